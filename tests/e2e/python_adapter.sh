#!/usr/bin/env bash
# End-to-end: the Python adapter. The Python reference connector is
# certified on the quick suite and gives the same trace digest as the C++
# reference on every run (same broker calls at the same virtual times, jitter
# included); each Python mutant is refused with its expected invariant; the
# guide's example passes; a connector started outside weir refuses with exit 2;
# the thread-pool way of serving gives the same traces as the completion loop.
# Two parts, so CTest can run them side by side:
#   python_adapter.sh reference WEIR CPP_REFERENCE SOURCE_DIR PYTHON_DIR
#   python_adapter.sh mutants   WEIR CPP_REFERENCE SOURCE_DIR PYTHON_DIR
set -uo pipefail
PART=$1 WEIR=$2 CPP_REF=$3 SRC=$4 PYDIR=$5
PY=$SRC/fixtures/connectors/python
SCEN=$SRC/fixtures/scenarios
export PYTHONPATH=$PYDIR
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
digests() { grep -o '"digest": "sha256:[0-9a-f]*"' "$1"; }

if [ "$PART" = reference ]; then
# 1. The Python reference is certified on the quick suite (launched through its
#    #!/usr/bin/python3 line, so the certificate names the script).
start=$(date +%s%N)
"$WEIR" certify --suite "$SRC/fixtures/suites/quick.suite" --connector "$PY/reference.py" \
  --jobs 2 --progress none --json "$WORK/py.json" >"$WORK/py.out" 2>&1
rc=$?
end=$(date +%s%N)
check "python reference certify exits 0 (got $rc)" test $rc -eq 0
check "python reference is CERTIFIED" grep -q '^CERTIFIED' "$WORK/py.out"
[ $rc -eq 0 ] || tail -n 40 "$WORK/py.out"
echo "python reference: quick suite in $(( (end - start) / 1000000 )) ms"

# 2. Same digests as the C++ reference, run by run.
start=$(date +%s%N)
"$WEIR" certify --suite "$SRC/fixtures/suites/quick.suite" --connector "$CPP_REF" \
  --jobs 2 --progress none --json "$WORK/cpp.json" >"$WORK/cpp.out" 2>&1
check "C++ reference certify exits 0" test $? -eq 0
end=$(date +%s%N)
echo "C++ reference: quick suite in $(( (end - start) / 1000000 )) ms"
digests "$WORK/py.json" >"$WORK/py.digests"
digests "$WORK/cpp.json" >"$WORK/cpp.digests"
# One digest per (scenario, seed) of the quick suite.
quick_runs=$(( $(grep -c '\.scenario"' "$SRC/fixtures/suites/quick.suite") * $(sed -n 's/^seeds: *//p' "$SRC/fixtures/suites/quick.suite") ))
check "reports list $quick_runs run digests" test "$(wc -l <"$WORK/py.digests")" -eq "$quick_runs"
check "python and C++ references give identical traces on every run" \
  cmp -s "$WORK/py.digests" "$WORK/cpp.digests"

# 2b. Served by gRPC's thread-pool server instead of the adapter's completion
#     loop (WEIR_PYTHON_SERVING=pool, the way back when a grpcio lacks what
#     the loop uses): the same traces.
WEIR_PYTHON_SERVING=pool "$WEIR" certify --suite "$SRC/fixtures/suites/quick.suite" --connector "$PY/reference.py" \
  --jobs 2 --progress none --json "$WORK/pool.json" >"$WORK/pool.out" 2>&1
check "python reference served by the thread pool is CERTIFIED" grep -q '^CERTIFIED' "$WORK/pool.out"
digests "$WORK/pool.json" >"$WORK/pool.digests"
check "and gives the same traces as served by the completion loop" cmp -s "$WORK/pool.digests" "$WORK/py.digests"
WEIR_PYTHON_SERVING=threads WEIR_BROKER_ADDRESS=127.0.0.1:1 WEIR_LISTEN_ADDRESS=127.0.0.1:0 WEIR_READY_FD=1 \
  "$PY/reference.py" >"$WORK/serving.out" 2>&1
check "an unknown WEIR_PYTHON_SERVING exits 2 (got $?)" test $? -eq 2
check "and says what it expected" grep -q "serving is 'threads'; expected 'loop' or 'pool'" "$WORK/serving.out"

# 3. Outside weir, or with a bad flag: one clear line, exit 2.
env -u WEIR_BROKER_ADDRESS "$PY/reference.py" >"$WORK/noenv.out" 2>&1
check "no handshake environment exits 2 (got $?)" test $? -eq 2
check "and says what is missing" grep -q 'WEIR_BROKER_ADDRESS is not set' "$WORK/noenv.out"
"$PY/reference.py" --idle-lag-ms soon >"$WORK/flag.out" 2>&1
check "a bad flag exits 2" test $? -eq 2
check "and names the flag" grep -q "idle-lag-ms: 'soon' is not a millisecond count" "$WORK/flag.out"
env PYTHONPATH= "$PY/reference.py" >"$WORK/nopath.out" 2>&1
check "without the adapter on PYTHONPATH exits 2" test $? -eq 2
check "and points at docs/python.md" grep -q 'docs/python.md' "$WORK/nopath.out"

elif [ "$PART" = mutants ]; then
# 4. Every Python mutant is refused by weir certify (exit 1) with its invariant
#    failing, on a suite of the three scenarios that catch them.
MUTANT_SUITE=$(dirname "$0")/python_mutants.suite
mutant() {  # mutant NAME INVARIANT
  local out=$WORK/$1.out
  "$WEIR" certify --suite "$MUTANT_SUITE" --connector "$PY/mutant_$1.py" --jobs 2 \
    --max-failures 1 --progress none >"$out" 2>&1
  local rc=$?
  check "mutant_$1 certify exits 1 (got $rc)" test $rc -eq 1
  check "mutant_$1 fails $2" grep -Eq "^$2 +FAILED +[0-9]+ +[1-9][0-9]* " "$out"
  [ $rc -eq 1 ] || tail -n 20 "$out"
}
mutant ack_on_pull ack-before-commit
mutant ack_on_checkpoint ack-before-commit
mutant no_redelivery_dedup duplicate-output
mutant latest_event_time_watermark watermark-regression
mutant ignore_retry_after throttle-violation
mutant no_idle_watermark watermark-stall

# The guide's example connector (docs/python.md) passes the same three scenarios.
"$WEIR" certify --suite "$MUTANT_SUITE" --connector "$SRC/adapters/python/examples/hive_scales.py" \
  --jobs 2 --progress none >"$WORK/example.out" 2>&1
rc=$?
check "the docs/python.md example is certified (got $rc)" test $rc -eq 0
[ $rc -eq 0 ] || tail -n 20 "$WORK/example.out"

else
  echo "python_adapter.sh: first argument must be 'reference' or 'mutants', got '$PART'" >&2
  exit 2
fi

echo "$failures failure(s)"
[ $failures -eq 0 ]
