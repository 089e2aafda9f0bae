#!/bin/bash
#PBS -N argon_s_run.r1_label_0007.922ce16b
#PBS -S /bin/bash
#PBS -l select=1:ncpus=4:mem=4096mb:ngpus=1
#PBS -l walltime=01:30:00
#PBS -q workq
#PBS -A proj-42
#PBS -j oe
#PBS -r n
#PBS -l place=pack
# ratchet batch script, PBS backend: submitted with `qsub run.sh` from the task directory
# (qsub reads the directives above up to the first command).
# Reproduce the task by hand with `bash run.sh` (move exit.json aside first: a task with an exit
# record never runs again).
# ratchet task r1/label/0007 (argon_s_run.r1_label_0007), rendered from templates/common.sh.
# Every value below is a quoted shell word; the command runs as data through `bash -c`.
set -uo pipefail

ratchet_dir='/home/ada/campaigns/argon'\''s run/rounds/1/label/0007'
cd -- "$ratchet_dir" || { printf 'ratchet: cannot enter the task directory %s\n' "$ratchet_dir" >&2; exit 1; }

# A task that has an exit record has run: the record is the authority, the task never runs twice.
if [ -e exit.json ]; then
  printf 'ratchet: %s/exit.json exists, so this task has already run; move it aside to run it again\n' "$ratchet_dir" >&2
  exit 0
fi

ratchet_start=
ratchet_child=

# Write exit.json atomically (temporary file, then rename), then leave with the same code.
ratchet_record() {
  trap - EXIT
  trap '' HUP INT TERM
  local end host
  end=$(date -u +%Y-%m-%dT%H:%M:%SZ)
  host=${HOSTNAME:-$(uname -n)}
  printf '{"exit_code":%d,"start":"%s","end":"%s","host":"%s"}\n' \
    "$1" "${ratchet_start:-$end}" "$end" "${host//[^A-Za-z0-9._-]/_}" >"$ratchet_dir/.exit.json.$$" &&
    mv -f -- "$ratchet_dir/.exit.json.$$" "$ratchet_dir/exit.json"
  exit "$1"
}
# On HUP, INT or TERM: stop the command with TERM, wait for it to end, record 128 + the signal number.
ratchet_stop() {
  trap '' HUP INT TERM
  if [ -n "$ratchet_child" ]; then
    kill -s TERM "$ratchet_child" 2>/dev/null
    wait "$ratchet_child" 2>/dev/null
  fi
  ratchet_record "$1"
}
trap 'ratchet_record "$?"' EXIT
trap 'ratchet_stop 129' HUP
trap 'ratchet_stop 130' INT
trap 'ratchet_stop 143' TERM
ratchet_start=$(date -u +%Y-%m-%dT%H:%M:%SZ)

exec >"$ratchet_dir/stdout.log" 2>"$ratchet_dir/stderr.log" || exit 1

# Environment the command sees.
export RATCHET_TASK=r1/label/0007
export RATCHET_TASK_DIR='/home/ada/campaigns/argon'\''s run/rounds/1/label/0007'
export RATCHET_TASK_JSON='/home/ada/campaigns/argon'\''s run/rounds/1/label/0007/task.json'
export RATCHET_ROUND=1
export RATCHET_STAGE=label
export RATCHET_CPUS=4
export RATCHET_SEED=17
export RATCHET_IN_FRAMES='/home/ada/campaigns/argon'\''s run/rounds/1/sample/0000/frames.xyz'

# Set-up lines from the campaign: a failing line ends the task with its exit code.
set +u -e
module load python/3.11
source "$HOME/venvs/mlip/bin/activate"
set +e -u
cd -- "$ratchet_dir" || exit 1

# The command, handed to a new bash as one quoted argument (never spliced into this script).
"$BASH" -c -- 'python label.py --in "$RATCHET_IN_FRAMES" --note '\''it'\'''\''s $(not run)'\''' </dev/null &
ratchet_child=$!
wait "$ratchet_child"
