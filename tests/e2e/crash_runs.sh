#!/usr/bin/env bash
# End-to-end runtime faults: weir kills the real reference connector process at
# crash points (SIGKILL to its process group, including in the middle of an
# Advance right after a broker call) and fails commits; every crash must be
# followed by a new incarnation, the run must pass (a crash is never an
# unexpected exit), and the same seed must give the same digest twice.
# Usage: crash_runs.sh WEIR REFERENCE_CONNECTOR SCENARIO
set -uo pipefail
WEIR=$1 REF=$2 SCENARIO=$3
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
count() {  # count PATTERN FILE: matching lines (0 when none)
  grep -c -- "$1" "$2" || true
}

run() {  # run NAME SEED
  "$WEIR" run --scenario "$SCENARIO" --seed "$2" --connector "$REF" \
    --trace "$WORK/$1.jsonl" >"$WORK/$1.out" 2>&1
}

run a 7; rc_a=$?
run b 7; rc_b=$?
check "first run exits 0 (got $rc_a)" test $rc_a -eq 0
check "second run exits 0 (got $rc_b)" test $rc_b -eq 0
[[ $rc_a -ne 0 ]] && cat "$WORK/a.out"
check "run says PASSED" grep -q '^PASSED' "$WORK/a.out"

crashes=$(count '"crashed":' "$WORK/a.jsonl")
check "several crashes in the trace ($crashes)" test "$crashes" -ge 3
for point in in-step-after-broker-call in-notice-after-ack commit-failed; do
  check "crash point $point occurred" grep -q "\"crashed\":{\"point\":\"$point\"}" "$WORK/a.jsonl"
done
check "scripted commit failure of checkpoint 4" grep -q '"commit_failed":{"checkpoint_id":"4"}' "$WORK/a.jsonl"
incarnations=$(grep -o '"incarnation":"[0-9]*"' "$WORK/a.jsonl" | sort -u | wc -l)
check "one more incarnation than crashes ($incarnations for $crashes)" test "$incarnations" -eq $((crashes + 1))
opened=$(count '"opened":' "$WORK/a.jsonl")
check "every crash is followed by an opened event ($opened)" test "$opened" -eq $((crashes + 1))
restored=$(count '"opened":{"restored":true' "$WORK/a.jsonl")
check "restarts open from a committed checkpoint ($restored)" test "$restored" -ge 1
check "no crash was reported as an exit" test "$(count '"exited":' "$WORK/a.jsonl")" -eq 0
check "unexpected-exit held" grep -Eq '^unexpected-exit +held' "$WORK/a.out"

da=$(grep '^digest' "$WORK/a.out")
db=$(grep '^digest' "$WORK/b.out")
check "same seed, same digest line ($da)" test -n "$da" -a "$da" = "$db"
check "same seed, byte-identical traces" cmp -s "$WORK/a.jsonl" "$WORK/b.jsonl"

# A second seed also passes, with a different schedule.
run c 8; rc_c=$?
check "seed 8 exits 0 (got $rc_c)" test $rc_c -eq 0
check "seed 8 gives another digest" test "$(grep '^digest' "$WORK/c.out")" != "$da"

if [[ $failures -ne 0 ]]; then
  echo "$failures check(s) failed"
  exit 1
fi
echo "all checks passed"
