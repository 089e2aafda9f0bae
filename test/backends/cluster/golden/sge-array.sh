#!/bin/bash
#$ -N argon_s_run.r1.label.ab0b2ebc928
#$ -S /bin/bash
#$ -cwd
#$ -j y
#$ -r n
#$ -l h_rt=01:30:00
#$ -l h_vmem=1024M
#$ -pe smp 4
#$ -q all.q
#$ -A proj-42
#$ -t 1-3
#$ -tc 2
#$ -l arch=lx-amd64
# ratchet batch script, Grid Engine backend: submitted with `qsub -terse run.sh` from the task
# directory. Reproduce the task by hand with `bash run.sh` (move exit.json aside first: a task with
# an exit record never runs again).
# ratchet job array b0b2ebc928: 3 tasks of label (round 1).
# Element i runs the task folder named on line i of the manifest, with that task's own run.sh.
set -u
ratchet_manifest='/home/ada/campaigns/argon'\''s run/rounds/1/label/.arrays/b0b2ebc928.tasks'
ratchet_base='/home/ada/campaigns/argon'\''s run/rounds/1/label'
ratchet_i=${SGE_TASK_ID:-}
case $ratchet_i in
  ''|*[!0-9]*) printf 'ratchet: %s is not set to an array index (found "%s")\n' SGE_TASK_ID "$ratchet_i" >&2; exit 1 ;;
esac
mapfile -t -s "$((10#$ratchet_i - 1))" -n 1 ratchet_line <"$ratchet_manifest" || exit 1
ratchet_task=${ratchet_line[0]:-}
if [ -z "$ratchet_task" ]; then
  printf 'ratchet: line %s of %s is missing\n' "$ratchet_i" "$ratchet_manifest" >&2
  exit 1
fi
exec bash -- "$ratchet_base/$ratchet_task/run.sh"
