#!/usr/bin/env bash
# End-to-end: every hostile connector (fixtures/connectors/hostile.h) through
# the real CLI. For each: the exact exit code, the invariant and the message
# weir prints, no process of the connector left behind (a marker word in its
# argv, inherited by its children, looked up with pgrep -f), and no weir
# temporary directory left in TMPDIR. Then certify a hostile connector over a
# small suite: every run is reported and certify goes on after each failure.
# Usage: hostile.sh WEIR CONNECTOR_DIR HOSTILE_DIR
set -uo pipefail
WEIR=$1 BIN=$2 DIR=$3
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
marked_workdir hostile
SCENARIO=$DIR/hostile.scenario

# hostile CASE EXIT INVARIANT MESSAGE [TRANSPORT [SCENARIO]]: one run, checked.
hostile() {
  local name=$1 want=$2 invariant=$3 message=$4 transport=${5:-tcp} scenario=${6:-$SCENARIO}
  local out=$WORK/$name.out
  timeout 60 "$WEIR" run --scenario "$scenario" --seed 1 --transport "$transport" \
    --connector "$BIN/hostile_$name $MARK-$name" --trace "$WORK/$name.jsonl" >"$out" 2>&1
  local rc=$?
  check "$name: exit $want (got $rc)" test "$rc" -eq "$want"
  if [[ $invariant == none ]]; then
    check "$name: PASSED" grep -q '^PASSED' "$out"
  else
    check "$name: $invariant fails" grep -Eq "^ *$invariant +FAILED|^$invariant" "$out"
  fi
  check "$name: says '$message'" grep -qF -- "$message" "$out"
  check "$name: trace written and readable" "$WEIR" explain "$WORK/$name.jsonl" >/dev/null 2>&1
  sleep 0.1
  check "$name: no process left behind" none_alive "$MARK-$name"
  # The one line per case for the issue note.
  echo "     $name -> $(grep -m1 -E 'Malformed|own failure|did not|ended without|acknowledged|^broker ' "$out" | sed 's/^ *//' | cut -c1-200)"
}

# A bound under test is tight (1 s) and every other bound of the case is
# generous (30 s), so a busy machine's slow start cannot end a case early with
# another message: start_bound for the cases that never come up, step_bound
# for the ones that hang in a call, hostile.scenario (both generous) else.
hostile silent_start 1 step-timeout "did not report its address on WEIR_READY_FD within 1000 ms" tcp "$DIR/start_bound.scenario"
hostile no_listen 1 protocol-error "but nothing accepted a connection there within 1000 ms" tcp "$DIR/start_bound.scenario"
hostile remote_address 1 protocol-error "which is neither loopback nor a Unix socket"
hostile garbage_answer 1 protocol-error "Open answered no message, or bytes that are not a weir.v1.OpenResponse message"
# Moving 20 MiB takes a while: the patient scenario's bound, so only the
# receive limit can end it.
hostile oversized_answer 1 protocol-error "Advance answered RESOURCE_EXHAUSTED: Received message larger than max" tcp "$DIR/patient.scenario"
hostile ack_unissued 1 protocol-error "acknowledged receipt 1099511627776, which the broker never issued"
hostile ack_twice 0 none "receipts ignored"
hostile ack_after_expiry 0 none "receipts ignored"
hostile phantom_record 1 protocol-error "record names message 999999999, which the broker never published"
hostile wild_times 1 protocol-error "more than 100 years away from virtual now"
hostile far_future_resume 1 protocol-error "more than 100 years away from virtual now"
# The flood takes a few seconds of wall time: the patient scenario's bound.
hostile flood 0 none "in one connector call" tcp "$DIR/patient.scenario"
hostile hang_in_step 1 step-timeout "did not answer Advance within 1000 ms" tcp "$DIR/step_bound.scenario"
hostile fork_orphans 1 unexpected-exit "exit code 0"
hostile exit_signal 1 unexpected-exit "signal 11 (SIGSEGV)"
hostile stderr_flood 1 unexpected-exit "last words: hostile stderr_flood gives up"
hostile throw_in_step 1 connector-error "reported its own failure in Advance: Advance answered INTERNAL: source threw during Advance: hostile throw_in_step gives up in step 2"
hostile hang_in_step 1 step-timeout "did not answer Advance within 1000 ms" unix "$DIR/step_bound.scenario"
# Several readers: misbehaving inside a cut or a revoke is that reader's
# invariant; every reader process is reaped.
hostile hang_in_cut 1 step-timeout "did not answer Cut within 1000 ms" tcp "$DIR/readers.scenario"
hostile exit_in_revoke 1 unexpected-exit "hostile exit_in_revoke gives up" tcp "$DIR/readers_patient.scenario"
# The flood takes a while (more under sanitizers): the patient bound.
hostile flood_in_cut 0 none "in one connector call" tcp "$DIR/readers_patient.scenario"
check "hang_in_cut: the report names the reader" grep -Eq "reader [0-9]+: " "$WORK/hang_in_cut.out"

# Figures: repeated and late acks are counted, not silently dropped.
ignored() { sed -n 's/.* \([0-9]\+\) receipts ignored.*/\1/p' "$WORK/$1.out"; }
check "ack_twice: ignored receipts counted" test "$(ignored ack_twice)" -gt 0
check "ack_after_expiry: ignored receipts counted" test "$(ignored ack_after_expiry)" -gt 0
check "ack_after_expiry: the expired receipt is in the trace" grep -q 'receipt expired' "$WORK/ack_after_expiry.jsonl"
# The flood: 64 threads x 250 calls in one step on their own connections;
# weir serves them on at most 32 threads (gRPC refuses the excess) and
# reports how many it served within that one connector call.
flood_in_call=$(sed -n 's/.*at most \([0-9]\+\) in one connector call.*/\1/p' "$WORK/flood.out")
check "flood: the figure is reported (${flood_in_call:-?} calls in one connector call)" \
  test "${flood_in_call:-0}" -ge 1000
# far_future_resume is never called again: its messages are lost, and said so.
check "far_future_resume: lost-message follows" grep -Eq '^ *lost-message +FAILED' "$WORK/far_future_resume.out"
check "wild_times: both watermarks named" test "$(grep -c 'reported a watermark of' "$WORK/wild_times.out")" -eq 2
# stderr_flood: 8 MiB written, a bounded tail kept.
size=$(wc -c <"$WORK/stderr_flood.out")
check "stderr_flood: output bounded ($size bytes)" test "$size" -lt 200000
# fork_orphans: the children were in the connector's argv too, so pgrep finds
# them if they survived.
check "fork_orphans: no child survives" none_alive "$MARK-fork_orphans"

# Certify goes on after every failure: 2 scenarios x 2 seeds, all reported.
timeout 120 "$WEIR" certify --suite "$DIR/hostile.suite" --jobs 2 --progress none \
  --connector "$BIN/hostile_exit_signal $MARK-certify" --json "$WORK/certify.json" >"$WORK/certify.out" 2>&1
rc=$?
check "certify hostile: exit 1 (got $rc)" test "$rc" -eq 1
check "certify hostile: all 4 runs reported" test "$(grep -c '"pair_index"' "$WORK/certify.json")" -eq 4
check "certify hostile: complete" grep -q '"complete": true' "$WORK/certify.json"
check "certify hostile: every run names unexpected-exit first" \
  test "$(grep -c '"first_violation": "unexpected-exit: The connector process ended without a crash point: died during Advance (signal 11 (SIGSEGV))' "$WORK/certify.json")" -eq 4
check "certify hostile: no process left behind" none_alive "$MARK"

# No weir temporary directory or socket left in TMPDIR.
check "TMPDIR left clean" test -z "$(ls -A "$TMPDIR")"

if ((failures > 0)); then
  for f in "$WORK"/*.out; do echo "== $f"; head -c 3000 "$f"; done
  exit 1
fi
