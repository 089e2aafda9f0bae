#!/bin/bash
#BSUB -J "argon_s_run.r1.label.a06d7b1a947[1-3]%2"
#BSUB -n 4
#BSUB -R "span[hosts=1]"
#BSUB -W 90
#BSUB -M 4096MB
#BSUB -R "rusage[mem=4096MB]"
#BSUB -gpu "num=1"
#BSUB -q normal
#BSUB -P proj-42
#BSUB -o lsf-%J_%I.out
#BSUB -e lsf-%J_%I.out
#BSUB -R "select[avx2]"
# ratchet batch script, LSF backend: submitted with `bsub < run.sh` from the task directory
# (bsub reads #BSUB lines only from a script given on standard input).
# Reproduce the task by hand with `bash run.sh` (move exit.json aside first: a task with an exit
# record never runs again).
# ratchet job array 06d7b1a947: 3 tasks of label (round 1).
# Element i runs the task folder named on line i of the manifest, with that task's own run.sh.
set -u
ratchet_manifest='/home/ada/campaigns/argon'\''s run/rounds/1/label/.arrays/06d7b1a947.tasks'
ratchet_base='/home/ada/campaigns/argon'\''s run/rounds/1/label'
ratchet_i=${LSB_JOBINDEX:-}
case $ratchet_i in
  ''|*[!0-9]*) printf 'ratchet: %s is not set to an array index (found "%s")\n' LSB_JOBINDEX "$ratchet_i" >&2; exit 1 ;;
esac
mapfile -t -s "$((10#$ratchet_i - 1))" -n 1 ratchet_line <"$ratchet_manifest" || exit 1
ratchet_task=${ratchet_line[0]:-}
if [ -z "$ratchet_task" ]; then
  printf 'ratchet: line %s of %s is missing\n' "$ratchet_i" "$ratchet_manifest" >&2
  exit 1
fi
exec bash -- "$ratchet_base/$ratchet_task/run.sh"
