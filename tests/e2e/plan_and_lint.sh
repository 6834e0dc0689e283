#!/usr/bin/env bash
# End-to-end: fault plans saved, replayed and edited; lint of bundled files.
# Usage: plan_and_lint.sh WEIR REFERENCE_CONNECTOR SCENARIO_DIR
set -uo pipefail
WEIR=$1 REF=$2 SCEN=$3
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
digest() { grep '^digest' "$1" | awk '{print $2}'; }

# 1. Every bundled scenario lints clean.
"$WEIR" lint "$SCEN"/*.scenario >"$WORK/lint.out" 2>&1
check "bundled scenarios lint clean" test $? -eq 0

# 2. Lint errors name file:line:column and exit 2.
printf 'workload { messages: 10 publish_interval_ms: 5 }\nfaults {\n  crash_rate: 1.5\n}\n' >"$WORK/bad.scenario"
"$WEIR" lint "$WORK/bad.scenario" >"$WORK/bad.out" 2>&1
check "bad rate exits 2" test $? -eq 2
check "bad rate names bad.scenario:3:" grep -q 'bad.scenario:3:' "$WORK/bad.out"
printf 'decisions {\n  site: STEP\n  position: 0\n  crash { point: BEFORE_STEP }\n}\n' >"$WORK/bad.plan"
"$WEIR" lint "$WORK/bad.plan" >"$WORK/badplan.out" 2>&1
check "bad plan exits 2" test $? -eq 2
check "bad plan names bad.plan:3:3" grep -q 'bad.plan:3:3:' "$WORK/badplan.out"
printf 'decisions { site: PULL position: 3 lost_ack: true }\n' >"$WORK/wrong-site.plan"
"$WEIR" lint "$WORK/wrong-site.plan" >"$WORK/ws.out" 2>&1
check "lost_ack at PULL is rejected" test $? -eq 2

# 3. A run saves its plan; replaying the plan reproduces the same trace.
CRASHY=$SCEN/crash_storm_weather_buoys.scenario
"$WEIR" run --scenario "$CRASHY" --seed 5 --connector "$REF" --save-plan "$WORK/run.plan" >"$WORK/a.out" 2>&1
check "crash storm run passes" test $? -eq 0
check "plan file written" test -s "$WORK/run.plan"
"$WEIR" lint "$WORK/run.plan" >/dev/null 2>&1
check "saved plan lints clean" test $? -eq 0
"$WEIR" run --scenario "$CRASHY" --seed 5 --connector "$REF" --plan "$WORK/run.plan" >"$WORK/b.out" 2>&1
check "plan replay passes" test $? -eq 0
check "plan replay gives the same digest" test "$(digest "$WORK/a.out")" = "$(digest "$WORK/b.out")"
check "replay line names the plan" grep -q -- "--plan" "$WORK/b.out"

# 4. An empty plan on the same scenario is a fault-free run: another digest.
printf '# no faults\n' >"$WORK/empty.plan"
"$WEIR" run --scenario "$CRASHY" --seed 5 --connector "$REF" --plan "$WORK/empty.plan" >"$WORK/c.out" 2>&1
check "empty plan passes" test $? -eq 0
check "empty plan differs from the drawn one" test "$(digest "$WORK/a.out")" != "$(digest "$WORK/c.out")"
check "empty plan applies no faults" grep -q '^faults     0 applied' "$WORK/c.out"

if ((failures > 0)); then cat "$WORK/a.out" "$WORK/b.out"; exit 1; fi
