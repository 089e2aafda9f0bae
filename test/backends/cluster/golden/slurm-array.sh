#!/usr/bin/env bash
#SBATCH --job-name=argon_s_run.r1.label.a0d85430f7d
#SBATCH --nodes=1
#SBATCH --ntasks=1
#SBATCH --cpus-per-task=4
#SBATCH --mem=4096M
#SBATCH --time=01:30:00
#SBATCH --gres=gpu:1
#SBATCH --partition=compute
#SBATCH --account=proj-42
#SBATCH --qos=normal
#SBATCH --no-requeue
#SBATCH --array=1-3%2
#SBATCH --output=slurm-%A_%a.out
#SBATCH --constraint=v100
# ratchet batch script, Slurm backend: submitted with `sbatch run.sh` from the task directory
# (directives above come from the stage's resources; sbatch reads them up to the first command).
# Reproduce the task by hand with `bash run.sh` (move exit.json aside first: a task with an exit
# record never runs again).
# ratchet job array 0d85430f7d: 3 tasks of label (round 1).
# Element i runs the task folder named on line i of the manifest, with that task's own run.sh.
set -u
ratchet_manifest='/home/ada/campaigns/argon'\''s run/rounds/1/label/.arrays/0d85430f7d.tasks'
ratchet_base='/home/ada/campaigns/argon'\''s run/rounds/1/label'
ratchet_i=${SLURM_ARRAY_TASK_ID:-}
case $ratchet_i in
  ''|*[!0-9]*) printf 'ratchet: %s is not set to an array index (found "%s")\n' SLURM_ARRAY_TASK_ID "$ratchet_i" >&2; exit 1 ;;
esac
mapfile -t -s "$((10#$ratchet_i - 1))" -n 1 ratchet_line <"$ratchet_manifest" || exit 1
ratchet_task=${ratchet_line[0]:-}
if [ -z "$ratchet_task" ]; then
  printf 'ratchet: line %s of %s is missing\n' "$ratchet_i" "$ratchet_manifest" >&2
  exit 1
fi
exec bash -- "$ratchet_base/$ratchet_task/run.sh"
