#!/usr/bin/env bash
# A one-node Slurm cluster on localhost for the backend tests: install (Debian packages), start, stop.
# Runs as root without systemd. Usage: cluster.sh install | start | stop | status
# Recipe notes: proctrack/linuxproc and task/none need no cgroups; no accounting daemon (finished jobs are read
# from squeue/scontrol within MinJobAge and from the jobcomp file after that).
set -euo pipefail
STATE=${RATCHET_SLURM_STATE:-/tmp/ratchet-slurm}
CONF=/etc/slurm/slurm.conf

install() {
  if command -v slurmctld >/dev/null && command -v slurmd >/dev/null && command -v munged >/dev/null && command -v sbatch >/dev/null; then
    return 0
  fi
  export DEBIAN_FRONTEND=noninteractive
  # keep the packages' daemons from starting on install
  printf '#!/bin/sh\nexit 101\n' > /usr/sbin/policy-rc.d
  chmod +x /usr/sbin/policy-rc.d
  apt-get update -qq
  apt-get install -y -qq slurmctld slurmd slurm-client munge >/dev/null
  rm -f /usr/sbin/policy-rc.d
}

write_conf() {
  local cpus mem
  # At least 8 schedulable cpus on a 2-core machine (SlurmdParameters=config_overrides lets slurmd take
  # the configured count): the test suites keep jobs that only sleep (walltime kills) on the node for
  # minutes, which must not hold back the others' jobs.
  cpus=$(nproc)
  [ "$cpus" -ge 8 ] || cpus=8
  mem=$(( $(awk '/MemTotal/ {print $2}' /proc/meminfo) / 1024 - 1024 ))
  mkdir -p /etc/slurm "$STATE"/{ctld,d} /var/log/slurm
  cat > "$CONF" <<CONF
ClusterName=ratchet-test
SlurmctldHost=localhost(127.0.0.1)
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
StateSaveLocation=$STATE/ctld
SlurmdSpoolDir=$STATE/d
SlurmctldPidFile=$STATE/slurmctld.pid
SlurmdPidFile=$STATE/slurmd.pid
SlurmctldLogFile=$STATE/slurmctld.log
SlurmdLogFile=$STATE/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SchedulerType=sched/backfill
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
SchedulerParameters=batch_sched_delay=0
MinJobAge=86400
MailProg=/bin/true
JobCompType=jobcomp/filetxt
JobCompLoc=$STATE/jobcomp.log
ReturnToService=2
MaxArraySize=1001
# Jobs that ask for no memory get 256 MiB per cpu instead of the whole node (CR_Core_Memory).
DefMemPerCPU=256
KillWait=5
SlurmdParameters=config_overrides
InactiveLimit=0
NodeName=node1 NodeHostname=localhost NodeAddr=127.0.0.1 CPUs=$cpus RealMemory=$mem State=UNKNOWN
PartitionName=debug Nodes=node1 Default=YES MaxTime=INFINITE State=UP
CONF
}

start() {
  install
  write_conf
  if [ ! -s /etc/munge/munge.key ]; then
    mkdir -p /etc/munge
    dd if=/dev/urandom bs=1 count=1024 of=/etc/munge/munge.key status=none
  fi
  id munge >/dev/null 2>&1 && chown munge:munge /etc/munge/munge.key && chmod 400 /etc/munge/munge.key
  mkdir -p /run/munge /var/log/munge /var/lib/munge
  id munge >/dev/null 2>&1 && chown munge:munge /run/munge /var/log/munge /var/lib/munge
  if ! pgrep -x munged >/dev/null; then
    if id munge >/dev/null 2>&1; then su -s /bin/sh munge -c /usr/sbin/munged; else /usr/sbin/munged --force; fi
  fi
  pgrep -x slurmctld >/dev/null || /usr/sbin/slurmctld -c
  pgrep -x slurmd >/dev/null || /usr/sbin/slurmd -N node1
  for _ in $(seq 1 60); do
    if sinfo -h -o '%T' 2>/dev/null | grep -qE '^(idle|mixed|allocated)'; then
      echo "slurm: node1 up ($(sinfo -h -o '%c cpus, %m MB'))"
      return 0
    fi
    sleep 1
  done
  echo "slurm: node did not come up; logs in $STATE" >&2
  tail -20 "$STATE/slurmctld.log" "$STATE/slurmd.log" >&2 || true
  return 1
}

stop() {
  # cancel all jobs first: stopping slurmd does not end running jobs
  scancel --user=root 2>/dev/null || true
  sleep 1
  for f in "$STATE/slurmd.pid" "$STATE/slurmctld.pid"; do
    [ -s "$f" ] && kill "$(cat "$f")" 2>/dev/null || true
  done
  pkill -x munged 2>/dev/null || true
}

case "${1:-}" in
  install) install ;;
  start) start ;;
  stop) stop ;;
  status) sinfo; squeue ;;
  *) echo "usage: $0 install|start|stop|status" >&2; exit 2 ;;
esac
