#!/usr/bin/env bash
# A one-host Grid Engine (Debian gridengine 8.1.9) on this machine for the backend tests:
# install | start | stop | status. Runs as root without systemd.
# Recipe notes (seen on these machines): the Debian packages leave act_qmaster empty when debconf has
# no master host, so it is written here; 127.0.0.1 resolves to "localhost" while the host calls itself
# by its hostname, so a host_aliases file maps one to the other; the default min_uid/min_gid of 1000
# refuse root's jobs, so they are set to 0; a queue "all.q" with 2 slots and a parallel environment
# "smp" are created; the scheduler runs every second instead of every 15 s.
set -euo pipefail
export SGE_ROOT=/var/lib/gridengine SGE_CELL=default
HOST=$(hostname)
WORK=${RATCHET_SGE_STATE:-/tmp/ratchet-sge}

install() {
  if command -v sge_qmaster >/dev/null 2>&1 || [ -x /usr/sbin/sge_qmaster ]; then return 0; fi
  export DEBIAN_FRONTEND=noninteractive
  printf '#!/bin/sh\nexit 101\n' > /usr/sbin/policy-rc.d
  chmod +x /usr/sbin/policy-rc.d
  apt-get update -qq
  apt-get install -y -qq gridengine-master gridengine-exec gridengine-client >/dev/null
  rm -f /usr/sbin/policy-rc.d
}

start() {
  install
  mkdir -p "$WORK"
  echo "$HOST" > "$SGE_ROOT/$SGE_CELL/common/act_qmaster"
  echo "$HOST localhost" > "$SGE_ROOT/$SGE_CELL/common/host_aliases"
  pgrep -x sge_qmaster >/dev/null || /usr/sbin/sge_qmaster
  for _ in $(seq 1 30); do qconf -sh >/dev/null 2>&1 && break; sleep 1; done
  qconf -sconf global > "$WORK/global"
  # Job shells are not login shells here (a login profile on the test machine may be slow or noisy).
  sed -i 's/^min_uid .*/min_uid 0/; s/^min_gid .*/min_gid 0/; s/^login_shells .*/login_shells none/' "$WORK/global"
  (cd "$WORK" && qconf -Mconf global >/dev/null)
  qconf -ssconf > "$WORK/sched"
  sed -i 's/^schedule_interval .*/schedule_interval 0:0:1/' "$WORK/sched"
  qconf -Msconf "$WORK/sched" >/dev/null
  qconf -ah "$HOST" >/dev/null 2>&1 || true
  qconf -as "$HOST" >/dev/null 2>&1 || true
  # The shepherd closes every possible file descriptor before it starts a job: with the huge open-file
  # limit of some sandboxes that takes a minute per job, so the exec daemon gets a modest one.
  pgrep -x sge_execd >/dev/null || (ulimit -n 4096 && /usr/sbin/sge_execd)
  if ! qconf -sp smp >/dev/null 2>&1; then
    printf 'pe_name smp\nslots 999\nuser_lists NONE\nxuser_lists NONE\nstart_proc_args NONE\nstop_proc_args NONE\nallocation_rule $pe_slots\ncontrol_slaves FALSE\njob_is_first_task TRUE\nurgency_slots min\naccounting_summary FALSE\nqsort_args NONE\n' > "$WORK/smp"
    qconf -Ap "$WORK/smp" >/dev/null
  fi
  if ! qconf -sq all.q >/dev/null 2>&1; then
    cat > "$WORK/all.q" <<Q
qname all.q
hostlist $HOST
seq_no 0
load_thresholds NONE
suspend_thresholds NONE
nsuspend 1
suspend_interval 00:05:00
priority 0
min_cpu_interval 00:05:00
processors UNDEFINED
qtype BATCH INTERACTIVE
ckpt_list NONE
pe_list smp
rerun FALSE
slots 2
tmpdir /tmp
shell /bin/bash
prolog NONE
epilog NONE
shell_start_mode posix_compliant
starter_method NONE
suspend_method NONE
resume_method NONE
terminate_method NONE
notify 00:00:60
owner_list NONE
user_lists NONE
xuser_lists NONE
subordinate_list NONE
complex_values NONE
projects NONE
xprojects NONE
calendar NONE
initial_state default
s_rt INFINITY
h_rt INFINITY
s_cpu INFINITY
h_cpu INFINITY
s_fsize INFINITY
h_fsize INFINITY
s_data INFINITY
h_data INFINITY
s_stack INFINITY
h_stack INFINITY
s_core INFINITY
h_core INFINITY
s_rss INFINITY
h_rss INFINITY
s_vmem INFINITY
h_vmem INFINITY
Q
    qconf -Aq "$WORK/all.q" >/dev/null
  fi
  qmod -cq all.q >/dev/null 2>&1 || true
  for _ in $(seq 1 30); do
    if qstat -f 2>/dev/null | grep -q "^all.q@"; then echo "sge: all.q on $HOST up"; return 0; fi
    sleep 1
  done
  echo "sge: the queue did not come up" >&2
  return 1
}

stop() {
  qdel -u root '*' >/dev/null 2>&1 || true
  sleep 1
  qconf -ke all >/dev/null 2>&1 || true
  qconf -km >/dev/null 2>&1 || true
}

case "${1:-}" in
  install) install ;;
  start) start ;;
  stop) stop ;;
  status) qstat -f; qstat -u '*' ;;
  *) echo "usage: $0 install|start|stop|status" >&2; exit 2 ;;
esac
