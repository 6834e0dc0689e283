#!/usr/bin/env bash
# End-to-end: weir search. A guided search finds a mutant's failure and writes
# it as a scenario, a plan and a suite that each replay it (same digest as the
# run under the plan); the reference connector gives "no failure" (exit 0);
# the coverage file grows with the runs; bad flags exit 2.
# Usage: search.sh WEIR REFERENCE MUTANT_NO_DEDUP_IN_CHECKPOINT IGNORE_RETRY_AFTER SCENARIO_DIR
set -uo pipefail
WEIR=$1 REF=$2 MUTANT=$3 THROTTLE_MUTANT=$4 SCEN=$5
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
CRASHES=$SCEN/crash_storm_weather_buoys.scenario

"$WEIR" search --scenario "$CRASHES" --budget 60 --out "$WORK/found" --coverage "$WORK/cov.txt" --html "$WORK/s.html" \
  --progress lines -- "$MUTANT" >"$WORK/m.out" 2>&1
rc=$?
check "a failure found: exit 1 (got $rc)" test $rc -eq 1
check "names what failed" grep -q '^FOUND duplicate-output' "$WORK/m.out"
check "writes the scenario, plan and suite" test -s "$WORK/found/find-1.scenario" -a -s "$WORK/found/find-1.plan" -a -s "$WORK/found/find-1.suite"
seed=$(sed -n 's/^FOUND .*, seed \([0-9]*\),.*/\1/p' "$WORK/m.out")
check "prints the seed ($seed)" test -n "$seed"
replay=$(sed -n 's/^  replay:  //p' "$WORK/m.out")
eval "$replay" >"$WORK/replay.out" 2>&1
check "the printed replay line fails duplicate-output" grep -q '^FAILED duplicate-output' "$WORK/replay.out"
"$WEIR" run --scenario "$CRASHES" --seed "$seed" --plan "$WORK/found/find-1.plan" --connector "$MUTANT" >"$WORK/plan.out" 2>&1
d1=$(awk '$1 == "digest" { print $2 }' "$WORK/replay.out")
d2=$(awk '$1 == "digest" { print $2 }' "$WORK/plan.out")
check "the finding's scenario replays the run under its plan ($d1)" test -n "$d1" -a "$d1" = "$d2"
"$WEIR" certify --suite "$WORK/found/find-1.suite" --progress none --connector "$MUTANT" >"$WORK/cert.out" 2>&1
check "the regression suite fails it under certify (exit 1)" test $? -eq 1
check "…with duplicate-output" grep -qE '^duplicate-output +FAILED' "$WORK/cert.out"
check "the HTML page is well-formed" xmllint --noout "$WORK/s.html"
check "…plots coverage against runs" grep -q '<polyline fill="none"' "$WORK/s.html"
check "…and lists the finding" grep -q 'duplicate-output at run' "$WORK/s.html"
runs=$(sed -n 's/^\([0-9]*\) runs, .* features seen.*/\1/p' "$WORK/m.out")
check "the coverage file has one line per run ($runs)" test "$(wc -l <"$WORK/cov.txt")" = "$runs"
check "…never decreasing" awk 'NR > 1 && $1 < prev { exit 1 } { prev = $1 }' "$WORK/cov.txt"

# Throttles drawn from a token bucket are decisions of the plan too: the
# finding's scenario draws nothing else, and replays the run exactly.
"$WEIR" search --scenario "$SCEN/throttle_storm_toll_gantries.scenario" --budget 30 --out "$WORK/thr" \
  --progress none -- "$THROTTLE_MUTANT" >"$WORK/t.out" 2>&1
check "throttle mutant: found (exit $?)" grep -q '^FOUND throttle-violation' "$WORK/t.out"
tseed=$(sed -n 's/^FOUND .*, seed \([0-9]*\),.*/\1/p' "$WORK/t.out")
"$WEIR" run --scenario "$WORK/thr/find-1.scenario" --seed "$tseed" --connector "$THROTTLE_MUTANT" >"$WORK/t1.out" 2>&1
"$WEIR" run --scenario "$SCEN/throttle_storm_toll_gantries.scenario" --seed "$tseed" --plan "$WORK/thr/find-1.plan" \
  --connector "$THROTTLE_MUTANT" >"$WORK/t2.out" 2>&1
t1=$(awk '$1 == "digest" { print $2 }' "$WORK/t1.out")
t2=$(awk '$1 == "digest" { print $2 }' "$WORK/t2.out")
check "…its scenario replays the run under its plan ($t1)" test -n "$t1" -a "$t1" = "$t2"

"$WEIR" search --scenario "$SCEN/steady_parcel_scanners.scenario" --budget 4 --out "$WORK/none" --progress none \
  --connector "$REF" >"$WORK/r.out" 2>&1
rc=$?
check "reference: nothing found, exit 0 (got $rc)" test $rc -eq 0
check "…and says so" grep -q '^no failure found within the budget' "$WORK/r.out"
check "…after exactly the budget" grep -q '^4 runs' "$WORK/r.out"

"$WEIR" search --scenario "$CRASHES" --budget 0 -- "$REF" >/dev/null 2>&1
check "--budget 0: exit 2" test $? -eq 2
"$WEIR" search --scenario "$CRASHES" --budget -1 -- "$REF" >/dev/null 2>&1
check "--budget -1 (no wrap to 2^64 - 1): exit 2" test $? -eq 2
"$WEIR" search --scenario "$CRASHES" --max-seconds nan -- "$REF" >/dev/null 2>&1
check "--max-seconds nan: exit 2" test $? -eq 2
"$WEIR" search --scenario "$WORK/missing.scenario" -- "$REF" >"$WORK/bad.out" 2>&1
check "a missing scenario: exit 2" test $? -eq 2
"$WEIR" search --scenario "$CRASHES" -- "$WORK/no-such-connector" >/dev/null 2>&1
check "a connector that is not executable: exit 2" test $? -eq 2
exit $((failures > 0))
