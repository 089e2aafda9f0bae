#!/bin/bash
#PBS -N argon_s_run.r1.label.a60d2015d95
#PBS -S /bin/bash
#PBS -l select=1:ncpus=4:mem=4096mb:ngpus=1
#PBS -l walltime=01:30:00
#PBS -q workq
#PBS -A proj-42
#PBS -j oe
#PBS -J 1-3%2
#PBS -l place=pack
# ratchet batch script, PBS backend: submitted with `qsub run.sh` from the task directory
# (qsub reads the directives above up to the first command).
# Reproduce the task by hand with `bash run.sh` (move exit.json aside first: a task with an exit
# record never runs again).
# ratchet job array 60d2015d95: 3 tasks of label (round 1).
# Element i runs the task folder named on line i of the manifest, with that task's own run.sh.
set -u
ratchet_manifest='/home/ada/campaigns/argon'\''s run/rounds/1/label/.arrays/60d2015d95.tasks'
ratchet_base='/home/ada/campaigns/argon'\''s run/rounds/1/label'
ratchet_i=${PBS_ARRAY_INDEX:-}
case $ratchet_i in
  ''|*[!0-9]*) printf 'ratchet: %s is not set to an array index (found "%s")\n' PBS_ARRAY_INDEX "$ratchet_i" >&2; exit 1 ;;
esac
mapfile -t -s "$((10#$ratchet_i - 1))" -n 1 ratchet_line <"$ratchet_manifest" || exit 1
ratchet_task=${ratchet_line[0]:-}
if [ -z "$ratchet_task" ]; then
  printf 'ratchet: line %s of %s is missing\n' "$ratchet_i" "$ratchet_manifest" >&2
  exit 1
fi
exec bash -- "$ratchet_base/$ratchet_task/run.sh"
