#!/usr/bin/env bash
# End-to-end: the Python adapter with many readers (log shape). The Python log
# reference passes every readers_* log scenario and gives the same trace digest
# as the C++ log reference on each (the same Assign, Revoke and Cut answers at
# the same virtual times); each Python many-readers mutant is refused with its
# expected invariant. Two parts, so CTest can run them side by side:
#   python_readers_adapter.sh reference WEIR CPP_LOG_REFERENCE SOURCE_DIR PYTHON_DIR
#   python_readers_adapter.sh mutants   WEIR CPP_LOG_REFERENCE SOURCE_DIR PYTHON_DIR
set -uo pipefail
PART=$1 WEIR=$2 CPP_REF=$3 SRC=$4 PYDIR=$5
PY=$SRC/fixtures/connectors/python
SCEN=$SRC/fixtures/scenarios
export PYTHONPATH=$PYDIR
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
digest() { awk '$1 == "digest" { print $2 }' "$1"; }

if [ "$PART" = reference ]; then
# 1. The Python log reference passes each many-readers log scenario (cuts,
#    moves, joins and leaves, crashes inside them), with the C++ log
#    reference's digest.
for s in readers_frequent_cuts_seismographs readers_hot_rebalance_wind_farms \
         readers_join_leave_bike_docks readers_parallel_backfill_tide_gauges; do
  for seed in 1 2; do
    "$WEIR" run --scenario "$SCEN/$s.scenario" --seed $seed --connector "$PY/log_reference.py" \
      >"$WORK/py.out" 2>&1
    rc=$?
    check "python log reference on $s seed $seed exits 0 (got $rc)" test $rc -eq 0
    [ $rc -eq 0 ] || tail -n 30 "$WORK/py.out"
    "$WEIR" run --scenario "$SCEN/$s.scenario" --seed $seed --connector "$CPP_REF" \
      >"$WORK/cpp.out" 2>&1
    check "C++ log reference on $s seed $seed exits 0" test $? -eq 0
    check "the same digest on $s seed $seed ($(digest "$WORK/py.out"))" \
      test -n "$(digest "$WORK/py.out")" -a "$(digest "$WORK/py.out")" = "$(digest "$WORK/cpp.out")"
  done
done

elif [ "$PART" = mutants ]; then
# 2. Every Python many-readers mutant is refused (exit 1) with its invariant
#    failing, on one (scenario, seed) that catches it.
mutant() {  # mutant NAME SCENARIO SEED INVARIANT
  local out=$WORK/$1.out
  "$WEIR" run --scenario "$SCEN/$2.scenario" --seed "$3" \
    --connector "$PY/mutant_readers_$1.py" >"$out" 2>&1
  local rc=$?
  check "mutant_readers_$1 on $2 seed $3 exits 1 (got $rc)" test $rc -eq 1
  check "mutant_readers_$1 fails $4" grep -Eq "^$4 +FAILED " "$out"
  [ $rc -eq 1 ] || tail -n 20 "$out"
}
mutant tail_emit readers_frequent_cuts_seismographs 1 record-outside-span
mutant cut_overlap readers_frequent_cuts_seismographs 1 cut-conservation
mutant cut_drops_first readers_frequent_cuts_seismographs 1 cut-conservation
mutant keeps_revoked readers_hot_rebalance_wind_farms 1 record-outside-span
mutant checkpoint_forgets_assigned readers_hot_rebalance_wind_farms 1 checkpoint-coverage
mutant trusts_restored_state readers_frequent_cuts_seismographs 1 record-outside-span

else
  echo "python_readers_adapter.sh: first argument must be 'reference' or 'mutants', got '$PART'" >&2
  exit 2
fi

echo "$failures failure(s)"
[ $failures -eq 0 ]
