# Shared helpers of the end-to-end scripts; source it after `set`:
#   source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
# check NAME COMMAND...: runs COMMAND, prints "ok   NAME" or "FAIL NAME" and
# counts failures in $failures; the script ends with `exit $((failures > 0))`
# or prints what helps first.
failures=0
check() {
  local name=$1; shift
  if "$@"; then echo "ok   $name"; else echo "FAIL $name"; failures=$((failures + 1)); fi
}
# alive PATTERN / none_alive PATTERN: whether a process has PATTERN in its
# command line (pgrep skips itself).
alive() { pgrep -f -- "$1" >/dev/null; }
none_alive() { ! pgrep -f -- "$1" >/dev/null; }
# wait_for PATTERN SECONDS: until a process matching PATTERN runs.
wait_for() {
  local _
  for _ in $(seq $(($2 * 10))); do alive "$1" && return 0; sleep 0.1; done
  return 1
}
# marked_workdir NAME: WORK, a directory removed at exit, with a private
# TMPDIR inside it (so a test can check weir left nothing there), and MARK, a
# word to put in connector argv: every process carrying it is found with
# pgrep -f and killed at exit.
marked_workdir() {
  WORK=$(mktemp -d)
  export TMPDIR=$WORK/tmp
  mkdir -p "$TMPDIR"
  MARK=weir-$1-$$-$RANDOM
  trap 'pkill -KILL -f "$MARK" 2>/dev/null; rm -rf "$WORK"' EXIT
}
