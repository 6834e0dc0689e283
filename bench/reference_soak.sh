#!/usr/bin/env bash
# reference_soak.sh: the reference connector against every bundled scenario for
# many seeds (50 each by default: the reference must pass every run, or the
# oracle or the reference is wrong), and the log reference against every
# log_*.scenario. A long check, not a ctest.
#
# Usage: bench/reference_soak.sh [SEEDS [JOBS]]     (defaults: 50 seeds, 2 jobs)
# Env:   WEIR, CONNECTOR, LOG_CONNECTOR, SCENARIOS (directory) override the build-tree defaults;
#        KEEP=1 keeps the work directory (one output file per run).
#
# Prints one row per scenario: runs, passed, failed, the first failing seed with
# its replay line, and the wall seconds summed over that scenario's runs (runs
# go JOBS at a time, so the sum exceeds the elapsed time). Exit 0 only when every
# run exited 0.
set -uo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
SEEDS=${1:-50}
JOBS=${2:-2}
WEIR=${WEIR:-$ROOT/build/harness/weir}
CONNECTOR=${CONNECTOR:-$ROOT/build/fixtures/connectors/reference_connector}
LOG_CONNECTOR=${LOG_CONNECTOR:-$ROOT/build/fixtures/connectors/log_reference_connector}
SCENARIOS=${SCENARIOS:-$ROOT/fixtures/scenarios}
WORK=$(mktemp -d)
if [[ ${KEEP:-0} != 1 ]]; then trap 'rm -rf "$WORK"' EXIT; else echo "work directory: $WORK"; fi
export WEIR CONNECTOR LOG_CONNECTOR WORK

# One run: its full output in WORK/NAME.SEED.out, and "NAME SEED RC WALL" on stdout.
run_one() {
  local scenario=$1 seed=$2 name start end rc connector=$CONNECTOR
  name=$(basename "$scenario" .scenario)
  [[ $name == log_* ]] && connector=$LOG_CONNECTOR
  start=$(date +%s.%N)
  "$WEIR" run --scenario "$scenario" --seed "$seed" --connector "$connector" \
    >"$WORK/$name.$seed.out" 2>&1
  rc=$?
  end=$(date +%s.%N)
  echo "$name $seed $rc $(echo "$end - $start" | bc)"
}
export -f run_one

t0=$(date +%s.%N)
for s in "$SCENARIOS"/*.scenario; do
  for ((i = 1; i <= SEEDS; ++i)); do echo "$s $i"; done
done | xargs -P "$JOBS" -n 2 bash -c 'run_one "$@"' _ >"$WORK/results"
t1=$(date +%s.%N)

printf '%-36s %5s %6s %6s %10s  %s\n' scenario runs passed failed wall_s first_failure
bad=0
for s in "$SCENARIOS"/*.scenario; do
  name=$(basename "$s" .scenario)
  read -r runs passed failed wall first < <(
    awk -v n="$name" '$1 == n { runs++; wall += $4; if ($3 == 0) ok++; else { bad++; if (first == "" || $2 < first) first = $2 } }
      END { printf "%d %d %d %.1f %s\n", runs, ok, bad, wall, (first == "" ? "-" : first) }' "$WORK/results")
  replay=""
  if [[ $first != - ]]; then
    bad=1
    replay="seed $first (exit $(awk -v n="$name" -v s="$first" '$1 == n && $2 == s { print $3 }' "$WORK/results")): $(grep -m1 '^replay:' "$WORK/$name.$first.out" || echo 'no replay line')"
  fi
  printf '%-36s %5d %6d %6d %10s  %s\n' "$name" "$runs" "$passed" "$failed" "$wall" "${replay:--}"
done
printf 'elapsed %.1f s with %d jobs\n' "$(echo "$t1 - $t0" | bc)" "$JOBS"
exit $bad
