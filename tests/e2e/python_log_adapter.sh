#!/usr/bin/env bash
# End-to-end: the Python adapter's log shape. The Python log reference
# connector is certified on the log quick suite and gives the same trace digest
# as the C++ log reference on every run (same broker calls at the same virtual
# times, jitter included); each Python log mutant is refused with its expected
# invariant; a log source answers Open with its shape. Two parts, so CTest can
# run them side by side:
#   python_log_adapter.sh reference WEIR CPP_LOG_REFERENCE SOURCE_DIR PYTHON_DIR
#   python_log_adapter.sh mutants   WEIR CPP_LOG_REFERENCE SOURCE_DIR PYTHON_DIR
set -uo pipefail
PART=$1 WEIR=$2 CPP_REF=$3 SRC=$4 PYDIR=$5
PY=$SRC/fixtures/connectors/python
export PYTHONPATH=$PYDIR
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
# runs REPORT: one line per run of a suite report: pair index, scenario, seed, digest.
runs() {
  /usr/bin/python3 -c '
import json, sys
for r in json.load(open(sys.argv[1])).get("runs", []):
    print(r.get("pairIndex", "0"), r["scenario"].rsplit("/", 1)[-1], r.get("seed", "0"),
          r.get("digest", "-"))' "$1"
}

if [ "$PART" = reference ]; then
SUITE=$SRC/fixtures/suites/log_quick.suite
# 1. The Python log reference is certified on the log quick suite (launched
#    through its #!/usr/bin/python3 line, so the certificate names the script).
start=$(date +%s%N)
"$WEIR" certify --suite "$SUITE" --connector "$PY/log_reference.py" \
  --jobs 2 --progress none --json "$WORK/py.json" >"$WORK/py.out" 2>&1
rc=$?
end=$(date +%s%N)
check "python log reference certify exits 0 (got $rc)" test $rc -eq 0
check "python log reference is CERTIFIED" grep -q '^CERTIFIED' "$WORK/py.out"
[ $rc -eq 0 ] || tail -n 40 "$WORK/py.out"
echo "python log reference: log quick suite in $(( (end - start) / 1000000 )) ms"

# 2. Same digests as the C++ log reference, run by run.
start=$(date +%s%N)
"$WEIR" certify --suite "$SUITE" --connector "$CPP_REF" \
  --jobs 2 --progress none --json "$WORK/cpp.json" >"$WORK/cpp.out" 2>&1
check "C++ log reference certify exits 0" test $? -eq 0
end=$(date +%s%N)
echo "C++ log reference: log quick suite in $(( (end - start) / 1000000 )) ms"
runs "$WORK/py.json" >"$WORK/py.runs"
runs "$WORK/cpp.json" >"$WORK/cpp.runs"
n=$(wc -l <"$WORK/cpp.runs")
check "the C++ report lists runs ($n)" test "$n" -gt 0
check "the Python report lists as many runs ($(wc -l <"$WORK/py.runs"))" \
  test "$(wc -l <"$WORK/py.runs")" -eq "$n"
check "every run has a digest" test "$(grep -c ' sha256:' "$WORK/py.runs")" -eq "$n"
check "python and C++ log references give identical traces on every run" \
  cmp -s "$WORK/py.runs" "$WORK/cpp.runs"
diff "$WORK/cpp.runs" "$WORK/py.runs" | head -n 20

# 3. A bad flag: one clear line, exit 2.
"$PY/log_reference.py" --idle-timeout-ms never >"$WORK/flag.out" 2>&1
check "a bad flag exits 2 (got $?)" test $? -eq 2
check "and names the flag" grep -q "idle-timeout-ms: 'never' is not a millisecond count" \
  "$WORK/flag.out"

# 4. The source declares its shape: on a queue scenario the log reference is
#    refused at Open.
"$WEIR" run --scenario "$SRC/fixtures/scenarios/steady_parcel_scanners.scenario" --seed 1 \
  --connector "$PY/log_reference.py" >"$WORK/shape.out" 2>&1
check "the log reference on a queue scenario exits 1 (got $?)" test $? -eq 1
check "as a protocol error naming the shapes" \
  grep -q "the connector reads a log, but this scenario's broker is a queue" "$WORK/shape.out"

elif [ "$PART" = mutants ]; then
# 5. Every Python log mutant is refused (exit 1) with its invariant failing, on
#    one (scenario, seed) that catches it. One run each keeps this part
#    short: a Python process restarts at every crash point, and the crash-storm
#    scenario takes about a minute per mutant.
SCEN=$SRC/fixtures/scenarios
mutant() {  # mutant NAME SCENARIO SEED INVARIANT
  local out=$WORK/$1.out
  "$WEIR" run --scenario "$SCEN/$2.scenario" --seed "$3" --connector "$PY/mutant_log_$1.py" \
    >"$out" 2>&1
  local rc=$?
  check "mutant_log_$1 on $2 seed $3 exits 1 (got $rc)" test $rc -eq 1
  check "mutant_log_$1 fails $4" grep -Eq "^$4 +FAILED " "$out"
  [ $rc -eq 1 ] || tail -n 20 "$out"
}
mutant bookmark_on_read log_steady_river_gauges 1 position-before-commit
mutant resume_after_checkpoint log_steady_river_gauges 1 resume-exact
mutant resume_before_checkpoint log_steady_river_gauges 1 resume-exact
mutant global_resume_point log_steady_river_gauges 1 offset-gap
mutant fastest_partition_watermark log_hot_partition_rail_axle_counters 1 late-record
mutant idle_partition_stalls log_idle_partitions_snow_pillows 1 watermark-stall
mutant silent_skip log_retention_race_pollen_traps 1 silent-skip
mutant ignore_new_partitions log_partition_growth_wind_turbines 1 new-partition

else
  echo "python_log_adapter.sh: first argument must be 'reference' or 'mutants', got '$PART'" >&2
  exit 2
fi

echo "$failures failure(s)"
[ $failures -eq 0 ]
