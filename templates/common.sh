# ratchet task {{task_id}} ({{job_name}}), rendered from templates/common.sh.
# Every value below is a quoted shell word; the command runs as data through `bash -c`.
set -uo pipefail

ratchet_dir={{task_dir}}
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
{{exports}}

# Set-up lines from the campaign: a failing line ends the task with its exit code.
set +u -e
{{setup}}
set +e -u
cd -- "$ratchet_dir" || exit 1

# The command, handed to a new bash as one quoted argument (never spliced into this script).
"$BASH" -c -- {{command}} </dev/null &
ratchet_child=$!
wait "$ratchet_child"
