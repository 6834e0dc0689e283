#!/usr/bin/env bash
# End-to-end: weir's CLI launches real connector processes over gRPC.
# Usage: cli_end_to_end.sh WEIR REFERENCE_CONNECTOR ACK_ON_PULL_MUTANT SCENARIO_DIR
set -uo pipefail
WEIR=$1 REF=$2 ACK_ON_PULL=$3 SCEN=$4
STEADY=$SCEN/steady_parcel_scanners.scenario
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"

# 1. The reference connector passes; the seed is printed first.
"$WEIR" run --scenario "$STEADY" --seed 7 --connector "$REF" >"$WORK/ref.out" 2>&1
rc=$?
check "reference exits 0 (got $rc)" test $rc -eq 0
check "seed is the first line" test "$(head -1 "$WORK/ref.out")" = "weir run: seed 7"
check "reference run says PASSED" grep -q '^PASSED' "$WORK/ref.out"
check "reference run ends with a replay line" bash -c "tail -1 '$WORK/ref.out' | grep -q '^replay: [^ ]*weir run --scenario .* --seed 7 --connector '"
[[ $rc -ne 0 ]] && cat "$WORK/ref.out"

# 2. The ack-on-pull mutant fails with ack-before-commit and its proving events.
"$WEIR" run --scenario "$STEADY" --seed 7 --connector "$ACK_ON_PULL" >"$WORK/mut.out" 2>&1
rc=$?
check "ack-on-pull mutant exits 1 (got $rc)" test $rc -eq 1
check "mutant report names ack-before-commit" grep -q '^FAILED ack-before-commit' "$WORK/mut.out"
check "mutant report cites the delivery" grep -q 'delivered message' "$WORK/mut.out"
check "mutant report cites the ack" grep -q 'broker received an ack for message' "$WORK/mut.out"
check "mutant report ends with a replay line" bash -c "tail -1 '$WORK/mut.out' | grep -q '^replay: [^ ]*weir run'"
# The replay line works as printed, with weir on no PATH (as the quick start
# leaves it): pasted into a shell in the same directory, the same failure.
line=$(tail -1 "$WORK/mut.out" | sed 's/^replay: //')
env PATH=/usr/bin:/bin bash -c "$line" >"$WORK/pasted.out" 2>&1
rc=$?
check "the replay line, pasted without weir on PATH, reruns the run (exit 1, got $rc)" test $rc -eq 1
check "the pasted replay fails the same way" grep -q '^FAILED ack-before-commit' "$WORK/pasted.out"
check "the pasted replay gives the same digest" test "$(grep '^digest' "$WORK/pasted.out")" = "$(grep '^digest' "$WORK/mut.out")"
# From the directory above weir's, the line names it by its relative path.
(cd "$(dirname "$WEIR")/.." && "$WEIR" run --scenario "$STEADY" --seed 7 --connector "$ACK_ON_PULL" >"$WORK/rel.out" 2>&1)
check "run from above the binary: the replay line names $(basename "$(dirname "$WEIR")")/weir" \
  grep -q "^replay: $(basename "$(dirname "$WEIR")")/weir run " "$WORK/rel.out"

# 3. Same scenario and seed twice: identical trace digests; the footer digest is
#    the SHA-256 of the event lines (every line but the header and the footer).
"$WEIR" run --scenario "$STEADY" --seed 11 --connector "$REF" --trace "$WORK/a.jsonl" >"$WORK/a.out" 2>&1
"$WEIR" run --scenario "$STEADY" --seed 11 --connector "$REF" --trace "$WORK/b.jsonl" >"$WORK/b.out" 2>&1
da=$(grep '^digest' "$WORK/a.out" | awk '{print $2}')
db=$(grep '^digest' "$WORK/b.out" | awk '{print $2}')
check "two runs give the same digest ($da)" test -n "$da" -a "$da" = "$db"
check "trace files are byte-identical" cmp -s "$WORK/a.jsonl" "$WORK/b.jsonl"
computed="sha256:$(sed '1d;$d' "$WORK/a.jsonl" | sha256sum | awk '{print $1}')"
check "footer digest is sha256 of the event lines" grep -q "\"digest\":\"$computed\"" "$WORK/a.jsonl"
check "no partial trace file left behind" test ! -e "$WORK/a.jsonl.partial"
"$WEIR" run --scenario "$STEADY" --seed 12 --connector "$REF" >"$WORK/c.out" 2>&1
dc=$(grep '^digest' "$WORK/c.out" | awk '{print $2}')
check "another seed gives another digest" test "$dc" != "$da"

# 4. Unix-socket transport gives the same trace as loopback TCP.
"$WEIR" run --scenario "$STEADY" --seed 11 --transport unix --connector "$REF" >"$WORK/u.out" 2>&1
rc=$?
du=$(grep '^digest' "$WORK/u.out" | awk '{print $2}')
check "unix transport passes (got $rc)" test $rc -eq 0
check "unix transport gives the same digest" test "$du" = "$da"

# 5. Usage and input errors exit 2 and say where.
"$WEIR" run --seed 1 --connector "$REF" >"$WORK/e1.out" 2>&1
check "missing --scenario exits 2" test $? -eq 2
printf 'workload {\n  messages: -3\n}\n' >"$WORK/bad.scenario"
"$WEIR" run --scenario "$WORK/bad.scenario" --seed 1 --connector "$REF" >"$WORK/e2.out" 2>&1
check "bad scenario exits 2" test $? -eq 2
check "bad scenario error names file:line:column" grep -q "bad.scenario:2:13:" "$WORK/e2.out"
"$WEIR" run --scenario "$STEADY" --seed 1 --connector "$WORK/no-such-connector" >"$WORK/e3.out" 2>&1
check "missing connector binary exits 2" test $? -eq 2
"$WEIR" run --scenario "$STEADY" --seed 1 --connector "'unterminated" >"$WORK/e4.out" 2>&1
check "unterminated quote in --connector exits 2" test $? -eq 2

# 6. A connector that exits at once is reported as unexpected-exit, no hang.
"$WEIR" run --scenario "$STEADY" --seed 1 --connector "/bin/sh -c 'echo boom >&2; exit 3'" >"$WORK/x.out" 2>&1
rc=$?
check "connector that exits at start: exit 1 (got $rc)" test $rc -eq 1
check "unexpected-exit names the exit code" grep -q 'exit code 3' "$WORK/x.out"
check "unexpected-exit shows the stderr tail" grep -q 'boom' "$WORK/x.out"

echo "$((failures == 0 ? 1 : 0)) passed, $failures failed" >/dev/null
if ((failures > 0)); then
  echo "--- mutant output"; cat "$WORK/mut.out"
  exit 1
fi
