#!/usr/bin/env bash
# End-to-end: hostile Go connectors (fixtures/connectors/go/hostile), the Go
# twins of tests/e2e/hostile.sh. For each: the exact exit code, the invariant
# and the message weir prints, the trace readable, and no process of the
# connector left behind (a marker word in its argv, looked up with pgrep -f).
# A panic the adapter can recover fails one call (connector-error); one it
# cannot ends the process (unexpected-exit, with the panic in its last words).
# Usage: go_hostile.sh WEIR GO_CONNECTOR_DIR HOSTILE_DIR
set -uo pipefail
WEIR=$1 BIN=$2 DIR=$3
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
marked_workdir go-hostile
SCENARIO=$DIR/hostile.scenario

# hostile CASE EXIT INVARIANT MESSAGE [TRANSPORT [SCENARIO]]: one run, checked.
hostile() {
  local name=$1 want=$2 invariant=$3 message=$4 transport=${5:-tcp} scenario=${6:-$SCENARIO}
  local out=$WORK/$name.out
  timeout 60 "$WEIR" run --scenario "$scenario" --seed 1 --transport "$transport" \
    --connector "$BIN/hostile_$name $MARK-$name" --trace "$WORK/$name.jsonl" >"$out" 2>&1
  local rc=$?
  check "$name: exit $want (got $rc)" test "$rc" -eq "$want"
  check "$name: $invariant fails" grep -Eq "^ *$invariant +FAILED|^$invariant" "$out"
  check "$name: says '$message'" grep -qF -- "$message" "$out"
  check "$name: trace written and readable" "$WEIR" explain "$WORK/$name.jsonl" >/dev/null 2>&1
  sleep 0.1
  check "$name: no process left behind" none_alive "$MARK-$name"
  echo "     $name -> $(grep -m1 -E 'Malformed|own failure|did not|ended without|^broker ' "$out" | sed 's/^ *//' | cut -c1-200)"
}

hostile panic_in_step 1 connector-error \
  "reported its own failure in Advance: Advance answered INTERNAL: source panicked during Advance: hostile panic_in_step gives up in step 2"
hostile panic_in_goroutine 1 unexpected-exit "panic: hostile panic_in_goroutine gives up in step 2"
# As in hostile.sh: the bound under test is tight, every other one generous.
hostile hang_in_step 1 step-timeout "did not answer Advance within 1000 ms" tcp "$DIR/step_bound.scenario"
hostile hang_in_step 1 step-timeout "did not answer Advance within 1000 ms" unix "$DIR/step_bound.scenario"
hostile silent_start 1 step-timeout "did not report its address on WEIR_READY_FD within 1000 ms" tcp "$DIR/start_bound.scenario"
hostile no_listen 1 protocol-error "but nothing accepted a connection there within 1000 ms" tcp "$DIR/start_bound.scenario"
hostile garbage_answer 1 protocol-error "Open answered no message, or bytes that are not a weir.v1.OpenResponse message"
# The panic that killed the process: exit code 2 is the Go runtime's.
check "panic_in_goroutine: the exit code is named" grep -q "exit code 2" "$WORK/panic_in_goroutine.out"

check "TMPDIR left clean" test -z "$(ls -A "$TMPDIR")"
if ((failures > 0)); then
  for f in "$WORK"/*.out; do echo "== $f"; head -c 3000 "$f"; done
  exit 1
fi
