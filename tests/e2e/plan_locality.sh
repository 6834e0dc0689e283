#!/usr/bin/env bash
# End-to-end: plan edit locality. Deleting one decision from a saved fault plan
# changes only what follows that decision: replaying the full plan and the plan
# without decision k gives event lines that are identical up to the line where
# decision k's fault_applied event was, and differ from exactly that line on.
# A fault plan is keyed by logical positions (the k-th
# pull, the k-th checkpoint…), so nothing before a decision can depend on it;
# a first difference earlier than that line would mean a decision leaks
# backwards (e.g. drawn ahead of its position).
#
# Usage: plan_locality.sh WEIR REFERENCE_CONNECTOR SCENARIO_DIR
set -uo pipefail
WEIR=$1 REF=$2 SCEN=$3
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
# Event lines only: the header (line 1) holds the plan, the footer the digest.
events() { sed '1d;$d' "$1"; }
# 1-based index of the first line where files $1 and $2 differ; 0 when identical.
first_difference() {
  awk 'NR == FNR { a[FNR] = $0; n = FNR; next }
       { m = FNR; if (!(FNR in a) || a[FNR] != $0) { print FNR; found = 1; exit } }
       END { if (!found) print (m < n ? m + 1 : 0) }' "$1" "$2"
}
# Field $2 (site or position) of decision $1 (1-based) of plan file $3.
decision_field() {
  awk -v k="$1" -v f="$2" '/^decisions \{/ { n++ } n == k && $1 == f ":" { print $2; exit }' "$3"
}
# Plan $2 without decision $1.
delete_decision() {
  awk -v k="$1" '/^decisions \{/ { n++; if (n == k) { skip = 1; next } }
                 skip { if (/^}/) skip = 0; next } { print }' "$2"
}

# check_locality NAME SCENARIO SEED: deletes the first, middle and last decision.
check_locality() {
  local name=$1 scenario=$2 seed=$3 dir="$WORK/$1"
  mkdir -p "$dir"
  "$WEIR" run --scenario "$scenario" --seed "$seed" --connector "$REF" \
    --save-plan "$dir/full.plan" >"$dir/drawn.out" 2>&1
  check "$name: drawn run passes" test $? -eq 0
  "$WEIR" run --scenario "$scenario" --seed "$seed" --connector "$REF" \
    --plan "$dir/full.plan" --trace "$dir/full.jsonl" >"$dir/full.out" 2>&1
  check "$name: full plan replay passes" test $? -eq 0
  events "$dir/full.jsonl" >"$dir/full.events"
  local count
  count=$(grep -c '^decisions {' "$dir/full.plan")
  check "$name: plan has at least 3 decisions ($count)" test "$count" -ge 3
  local k
  for k in 1 $(((count + 1) / 2)) "$count"; do
    local site pos at line rc diff
    site=$(decision_field "$k" site "$dir/full.plan")
    pos=$(decision_field "$k" position "$dir/full.plan")
    at="\"fault_applied\":{\"decision\":{\"site\":\"$site\",\"position\":\"$pos\","
    # The line of decision k's fault_applied event (the plan holds applied
    # decisions only, so there is one; several faults at one position would
    # make the match ambiguous, hence the count check).
    check "$name: decision $k ($site $pos) applied once" test "$(grep -cF "$at" "$dir/full.events")" -eq 1
    line=$(grep -nF "$at" "$dir/full.events" | head -1 | cut -d: -f1)
    delete_decision "$k" "$dir/full.plan" >"$dir/minus$k.plan"
    check "$name: plan minus decision $k has one decision less" \
      test "$(grep -c '^decisions {' "$dir/minus$k.plan")" -eq $((count - 1))
    "$WEIR" run --scenario "$scenario" --seed "$seed" --connector "$REF" \
      --plan "$dir/minus$k.plan" --trace "$dir/minus$k.jsonl" >"$dir/minus$k.out" 2>&1
    rc=$?
    check "$name: run without decision $k completes (exit $rc)" test "$rc" -le 1
    events "$dir/minus$k.jsonl" >"$dir/minus$k.events"
    diff=$(first_difference "$dir/full.events" "$dir/minus$k.events")
    check "$name: without decision $k the traces first differ at its event line $line (got ${diff})" \
      test "${diff:-x}" = "${line:-y}"
  done
}

check_locality crash-storm "$SCEN/crash_storm_weather_buoys.scenario" 5
check_locality commit-failures "$SCEN/commit_failures_cold_chain.scenario" 5
check_locality flaky-network "$SCEN/flaky_network_vineyard_probes.scenario" 3
check_locality heavy-redelivery "$SCEN/heavy_redelivery_bike_docks.scenario" 5
check_locality skewed-event-times "$SCEN/skewed_event_times_rail_sensors.scenario" 5

exit $((failures > 0))
