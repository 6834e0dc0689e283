#!/usr/bin/env bash
# shrink_workload.sh (ctest, label e2e): weir shrink's second phase, the
# workload, against real mutant connectors.
#   - shrinking a failing trace writes min.plan and min.scenario; weir lint
#     accepts the scenario; the shrink output says events before -> with the
#     minimal plan -> with the shrunk workload, fewer at the end;
#   - the printed replay line names both files and, pasted into a shell,
#     fails the same invariant with that many events; the --trace of the
#     minimal run replays identically;
#   - --keep-workload writes no scenario and the replay line names the
#     original one; --out-scenario picks the file;
#   - a rerun budget that runs out in the workload phase still leaves a
#     scenario that fails;
#   - bad --out-scenario values exit 2.
# Usage: shrink_workload.sh WEIR CONNECTOR_BIN_DIR SCENARIO_DIR
set -euo pipefail
weir="${1:?weir}"
bin="${2:?connector bin dir}"
scenarios="${3:?scenario dir}"
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }
cd "$tmp"

mutant="$bin/mutant_no_dedup_in_checkpoint"
scenario="$scenarios/crash_storm_weather_buoys.scenario"
inv=duplicate-output
rc=0
"$weir" run --scenario "$scenario" --seed 1 --connector "$mutant" --trace run.jsonl >run.out 2>&1 || rc=$?
[[ $rc == 1 ]] || { cat run.out >&2; fail "mutant run: exit $rc, expected 1"; }

# 1. Both phases.
rc=0
"$weir" shrink run.jsonl --out min.plan --trace min.jsonl --progress none >shrink.out 2>&1 || rc=$?
cat shrink.out
check "shrink exit 0" test "$rc" = 0
check "min.scenario written beside min.plan" test -f min.scenario
check "weir lint accepts min.scenario" "$weir" lint min.scenario
check "a workload line names what went down" grep -Eq "^workload   workload\.messages 400 -> [0-9]+" shrink.out
read -r before plan_events after < <(sed -n \
  's/^events     \([0-9]*\) before -> \([0-9]*\) with the minimal plan -> \([0-9]*\) with the shrunk workload$/\1 \2 \3/p' shrink.out)
check "an events line: before -> minimal plan -> shrunk workload" test -n "${after:-}"
check "fewer events with the shrunk workload ($before -> ${after:-?})" test "${after:-999999}" -lt "$before"
check "fewer events than with the minimal plan alone (${plan_events:-?} -> ${after:-?})" \
  test "${after:-999999}" -lt "${plan_events:-0}"
line="$(sed -n 's/^replay: //p' shrink.out)"
check "the replay line names min.scenario" grep -q -- "--scenario min.scenario " <<<"$line"
check "the replay line names min.plan" grep -q -- "--plan min.plan " <<<"$line"
rc=0
eval "$line" >pasted.out 2>&1 || rc=$?
check "the pasted replay line exits 1" test "$rc" = 1
check "the pasted replay line fails $inv" grep -q "^FAILED $inv" pasted.out
check "the pasted replay line has ${after:-?} events" grep -q " ${after:-x} events$" pasted.out
rc=0
"$weir" replay min.jsonl >replay.out 2>&1 || rc=$?
check "the minimal run's trace replays identically" grep -q "reproduced identically (digest .*, ${after:-x} events)" replay.out

# 2. --keep-workload and --out-scenario.
rc=0
"$weir" shrink run.jsonl --out keep.plan --keep-workload --progress none >keep.out 2>&1 || rc=$?
check "--keep-workload exit 0" test "$rc" = 0
check "--keep-workload says so" grep -q "^workload   kept (--keep-workload)" keep.out
check "--keep-workload writes no scenario" test ! -e keep.scenario
check "--keep-workload: the replay line names the original scenario" \
  grep -q "^replay: .*--scenario [^ ]*crash_storm_weather_buoys.scenario .*--plan keep.plan" keep.out
mkdir out
rc=0
"$weir" shrink run.jsonl --out p.plan --out-scenario out/small.scenario --progress none >custom.out 2>&1 || rc=$?
check "--out-scenario exit 0" test "$rc" = 0
check "--out-scenario writes that file" test -f out/small.scenario
check "--out-scenario: nothing beside the plan" test ! -e p.scenario
check "--out-scenario: the replay line names it" grep -q "^replay: .*--scenario out/small.scenario " custom.out

# 3. The budget ends in the workload phase: what is written still fails.
quick="$bin/mutant_ack_on_pull"
rc=0
"$weir" shrink --scenario "$scenarios/steady_parcel_scanners.scenario" --seed 1 --max-reruns 2 \
  --out b.plan --progress none -- "$quick" >budget.out 2>&1 || rc=$?
check "budget in the workload phase: exit 0" test "$rc" = 0
check "budget in the workload phase: said" grep -q "^workload   .*budget reached, not proven smallest" budget.out
rc=0
"$weir" run --scenario b.scenario --seed 1 --plan b.plan --connector "$quick" >b.out 2>&1 || rc=$?
check "budget in the workload phase: the scenario still fails ack-before-commit" grep -q "^FAILED ack-before-commit" b.out

# 4. Bad values.
rc=0
"$weir" shrink run.jsonl --out same.plan --out-scenario same.plan >bad.out 2>&1 || rc=$?
check "--out-scenario = --out: exit 2" test "$rc" = 2
check "--out-scenario = --out: says so" grep -q "same file as --out" bad.out
rc=0
"$weir" shrink run.jsonl --out x.plan --out-scenario nodir/x.scenario >bad.out 2>&1 || rc=$?
check "--out-scenario in a missing directory: exit 2" test "$rc" = 2
check "--out-scenario in a missing directory: says so" grep -q "directory 'nodir' does not exist" bad.out
check "--out-scenario in a missing directory: no plan written" test ! -e x.plan

exit $((failures > 0))
