#!/usr/bin/env bash
# End-to-end: the log shape through every command of the CLI, with the log
# reference connector and one of its mutants as real processes over gRPC.
# Usage: log_mode.sh WEIR LOG_REFERENCE RESUME_AFTER_CHECKPOINT_MUTANT SOURCE_DIR
set -uo pipefail
WEIR=$1 REF=$2 MUTANT=$3 SRC=$4
SCEN=$SRC/fixtures/scenarios
STEADY=$SCEN/log_steady_river_gauges.scenario
CRASHES=$SCEN/log_bookmark_crash_storm_seismographs.scenario
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"

# 1. lint accepts every bundled log scenario.
for s in "$SCEN"/log_*.scenario; do
  "$WEIR" lint "$s" >"$WORK/lint.out" 2>&1
  check "lint accepts $(basename "$s")" test $? -eq 0
done

# 2. The reference passes a steady log and a crash storm at bookmark saves,
#    and the verdict table shows the log rules, not the queue ones.
"$WEIR" run --scenario "$STEADY" --seed 3 --connector "$REF" --trace "$WORK/ref.jsonl" >"$WORK/ref.out" 2>&1
rc=$?
check "reference passes the steady log (got $rc)" test $rc -eq 0
check "verdict table lists offset-gap" grep -q '^offset-gap ' "$WORK/ref.out"
check "verdict table leaves out lost-message" bash -c "! grep -q '^lost-message ' '$WORK/ref.out'"
[[ $rc -ne 0 ]] && cat "$WORK/ref.out"
"$WEIR" run --scenario "$CRASHES" --seed 5 --connector "$REF" >"$WORK/crash.out" 2>&1
rc=$?
check "reference passes the bookmark crash storm (got $rc)" test $rc -eq 0
check "the crash storm crashed at a bookmark save" bash -c "grep -q 'crash' '$WORK/crash.out'"
[[ $rc -ne 0 ]] && cat "$WORK/crash.out"

# 3. The trace names records by partition and offset; replay reproduces it.
check "trace has appended events" grep -q '"appended"' "$WORK/ref.jsonl"
check "trace has emitted records with offsets" grep -q '"emitted":{[^}]*"offset"' "$WORK/ref.jsonl"
"$WEIR" replay "$WORK/ref.jsonl" >"$WORK/replay.out" 2>&1
check "replay reproduces the log run" test $? -eq 0
check "replay says identically" grep -q 'reproduced identically' "$WORK/replay.out"

# 4. A mutant that resumes one offset after the checkpoint is refused by
#    resume-exact, with both offsets named; explain and shrink follow it.
found=""
for seed in 1 2 3 4 5 6; do
  "$WEIR" run --scenario "$CRASHES" --seed "$seed" --connector "$MUTANT" --trace "$WORK/mut.jsonl" >"$WORK/mut.out" 2>&1
  if [[ $? -eq 1 ]] && grep -q '^FAILED resume-exact' "$WORK/mut.out"; then found=$seed; break; fi
done
check "mutant is refused by resume-exact (seed ${found:-none})" test -n "$found"
check "the violation names a skip and both offsets" grep -Eq 'first read partition [0-9]+ at offset [0-9]+ but its resume point is [0-9]+: a skip' "$WORK/mut.out"
"$WEIR" explain "$WORK/mut.jsonl" --html "$WORK/mut.html" >"$WORK/explain.out" 2>&1
check "explain succeeds on a failing trace" test $? -eq 0
check "explain names the violation" grep -q 'resume-exact: After restoring checkpoint' "$WORK/explain.out"
check "explain shows reads of the partition" grep -q 'read partition' "$WORK/explain.out"
check "explain writes an HTML page" test -s "$WORK/mut.html"
"$WEIR" shrink "$WORK/mut.jsonl" --invariant resume-exact --out "$WORK/min.plan" --max-reruns 60 >"$WORK/shrink.out" 2>&1
rc=$?
check "shrink writes a plan (got $rc)" test $rc -eq 0 -a -s "$WORK/min.plan"
"$WEIR" run --scenario "$CRASHES" --seed "${found:-1}" --plan "$WORK/min.plan" --connector "$MUTANT" >"$WORK/min.out" 2>&1
check "the shrunk plan still fails resume-exact" grep -q '^FAILED resume-exact' "$WORK/min.out"

# 5. certify a small log suite with the reference: CERTIFIED and verified.
cat >"$WORK/log_tiny.suite" <<EOF
name: "log-tiny"
scenarios: ["$STEADY", "$CRASHES"]
seeds: 1
EOF
"$WEIR" certify --suite "$WORK/log_tiny.suite" --connector "$REF" --jobs 2 \
  --json "$WORK/c.json" --certificate "$WORK/c.cert" >"$WORK/certify.out" 2>&1
rc=$?
check "certify of the log suite passes (got $rc)" test $rc -eq 0
check "certify says CERTIFIED" grep -q 'CERTIFIED' "$WORK/certify.out"
"$WEIR" verify "$WORK/c.cert" --connector-binary "$REF" >"$WORK/verify.out" 2>&1
check "verify accepts the log certificate" test $? -eq 0
[[ $rc -ne 0 ]] && cat "$WORK/certify.out"

exit $((failures > 0))
