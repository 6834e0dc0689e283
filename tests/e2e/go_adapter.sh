#!/usr/bin/env bash
# End-to-end: the Go adapter. The Go reference connector is certified on the
# quick suite and gives the same trace digest as the C++ reference on every
# run (same broker calls at the same virtual times, jitter included); each Go
# mutant is refused with its expected invariant; a connector started outside
# weir, or with a bad flag, refuses with exit 2.
# The log shape likewise: the Go log reference gives the C++ log reference's
# digests on the log quick suite and with several readers on the readers
# quick suite, and each Go log mutant is refused with its invariant.
# Three parts, so CTest can run them side by side:
#   go_adapter.sh reference WEIR CPP_REFERENCE SOURCE_DIR GO_CONNECTOR_DIR GO_EXAMPLE_DIR
#   go_adapter.sh mutants   WEIR CPP_REFERENCE SOURCE_DIR GO_CONNECTOR_DIR GO_EXAMPLE_DIR
#   go_adapter.sh log       WEIR CPP_LOG_REFERENCE SOURCE_DIR GO_CONNECTOR_DIR GO_EXAMPLE_DIR
set -uo pipefail
PART=$1 WEIR=$2 CPP_REF=$3 SRC=$4 GOBIN=$5 EXAMPLES=$6
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
digests() { grep -o '"digest": "sha256:[0-9a-f]*"' "$1"; }

if [ "$PART" = reference ]; then
# 1. The Go reference is certified on the quick suite.
start=$(date +%s%N)
"$WEIR" certify --suite "$SRC/fixtures/suites/quick.suite" --connector "$GOBIN/reference" \
  --jobs 2 --progress none --json "$WORK/go.json" >"$WORK/go.out" 2>&1
rc=$?
end=$(date +%s%N)
check "go reference certify exits 0 (got $rc)" test $rc -eq 0
check "go reference is CERTIFIED" grep -q '^CERTIFIED' "$WORK/go.out"
[ $rc -eq 0 ] || tail -n 40 "$WORK/go.out"
echo "go reference: quick suite in $(( (end - start) / 1000000 )) ms"

# 2. Same digests as the C++ reference, run by run.
start=$(date +%s%N)
"$WEIR" certify --suite "$SRC/fixtures/suites/quick.suite" --connector "$CPP_REF" \
  --jobs 2 --progress none --json "$WORK/cpp.json" >"$WORK/cpp.out" 2>&1
check "C++ reference certify exits 0" test $? -eq 0
end=$(date +%s%N)
echo "C++ reference: quick suite in $(( (end - start) / 1000000 )) ms"
digests "$WORK/go.json" >"$WORK/go.digests"
digests "$WORK/cpp.json" >"$WORK/cpp.digests"
# One digest per (scenario, seed) of the quick suite.
quick_runs=$(( $(grep -c '\.scenario"' "$SRC/fixtures/suites/quick.suite") * $(sed -n 's/^seeds: *//p' "$SRC/fixtures/suites/quick.suite") ))
check "reports list $quick_runs run digests" test "$(wc -l <"$WORK/go.digests")" -eq "$quick_runs"
check "go and C++ references give identical traces on every run" \
  cmp -s "$WORK/go.digests" "$WORK/cpp.digests"

# 3. Outside weir, or with a bad flag: one clear line, exit 2.
env -u WEIR_BROKER_ADDRESS "$GOBIN/reference" >"$WORK/noenv.out" 2>&1
check "no handshake environment exits 2 (got $?)" test $? -eq 2
check "and says what is missing" grep -q 'WEIR_BROKER_ADDRESS is not set' "$WORK/noenv.out"
WEIR_BROKER_ADDRESS=127.0.0.1:1 WEIR_LISTEN_ADDRESS=127.0.0.1:0 WEIR_READY_FD=97 "$GOBIN/reference" >"$WORK/badfd.out" 2>&1
check "a ready descriptor that is not open exits 2 (got $?)" test $? -eq 2
check "and names it" grep -q 'WEIR_READY_FD 97 is not an open file descriptor' "$WORK/badfd.out"
"$GOBIN/reference" --idle-lag-ms soon >"$WORK/flag.out" 2>&1
check "a bad flag exits 2" test $? -eq 2
check "and names the flag" grep -q "idle-lag-ms: 'soon' is not a millisecond count" "$WORK/flag.out"

elif [ "$PART" = mutants ]; then
# 4. Every Go mutant is refused by weir certify (exit 1) with its invariant
#    failing, on a suite of the scenarios that catch them.
MUTANT_SUITE=$(dirname "$0")/go_mutants.suite
mutant() {  # mutant NAME INVARIANT
  local out=$WORK/$1.out
  "$WEIR" certify --suite "$MUTANT_SUITE" --connector "$GOBIN/mutant_$1" --jobs 2 \
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
mutant no_dedup_in_checkpoint duplicate-output
mutant no_watermark_restore watermark-regression
mutant tight_retry_loop retry-storm
mutant exit_on_transient_error unexpected-exit
mutant receipt_as_message_id protocol-error

# The reference passes the same suite (the mutants' failures are theirs).
"$WEIR" certify --suite "$MUTANT_SUITE" --connector "$GOBIN/reference" --jobs 2 --progress none \
  >"$WORK/reference.out" 2>&1
rc=$?
check "the go reference passes the mutants' suite (got $rc)" test $rc -eq 0
[ $rc -eq 0 ] || tail -n 20 "$WORK/reference.out"

# The guide's example connector (docs/go.md) passes the same scenarios.
"$WEIR" certify --suite "$MUTANT_SUITE" --connector "$EXAMPLES/tide_gauges" --jobs 2 --progress none \
  >"$WORK/example.out" 2>&1
rc=$?
check "the docs/go.md example is certified (got $rc)" test $rc -eq 0
[ $rc -eq 0 ] || tail -n 20 "$WORK/example.out"

elif [ "$PART" = log ]; then
# 5. The Go log reference: certified, and the C++ log reference's digests,
#    run by run, on the log quick suite and on the readers quick suite.
for suite in log_quick readers_quick; do
  "$WEIR" certify --suite "$SRC/fixtures/suites/$suite.suite" --connector "$GOBIN/log_reference" \
    --jobs 2 --progress none --json "$WORK/go_$suite.json" >"$WORK/go_$suite.out" 2>&1
  rc=$?
  check "go log reference certified on $suite (got $rc)" test $rc -eq 0
  [ $rc -eq 0 ] || tail -n 40 "$WORK/go_$suite.out"
  "$WEIR" certify --suite "$SRC/fixtures/suites/$suite.suite" --connector "$CPP_REF" \
    --jobs 2 --progress none --json "$WORK/cpp_$suite.json" >"$WORK/cpp_$suite.out" 2>&1
  check "C++ log reference certified on $suite" test $? -eq 0
  digests "$WORK/go_$suite.json" >"$WORK/go_$suite.digests"
  digests "$WORK/cpp_$suite.json" >"$WORK/cpp_$suite.digests"
  check "$suite: $(wc -l <"$WORK/go_$suite.digests") run digests" test "$(wc -l <"$WORK/go_$suite.digests")" -gt 0
  check "$suite: go and C++ log references give identical traces on every run" \
    cmp -s "$WORK/go_$suite.digests" "$WORK/cpp_$suite.digests"
done

# 6. Every Go log mutant is refused (exit 1) with its invariant failing, on
#    one (scenario, seed) that catches it.
SCEN=$SRC/fixtures/scenarios
mutant() {  # mutant NAME SCENARIO SEED INVARIANT
  local out=$WORK/$1.out
  "$WEIR" run --scenario "$SCEN/$2.scenario" --seed "$3" --connector "$GOBIN/mutant_$1" >"$out" 2>&1
  local rc=$?
  check "mutant_$1 on $2 seed $3 exits 1 (got $rc)" test $rc -eq 1
  check "mutant_$1 fails $4" grep -Eq "^$4 +FAILED " "$out"
  [ $rc -eq 1 ] || tail -n 20 "$out"
}
mutant log_bookmark_on_read log_steady_river_gauges 1 position-before-commit
mutant log_resume_after_checkpoint log_steady_river_gauges 1 resume-exact
mutant log_resume_before_checkpoint log_steady_river_gauges 1 resume-exact
mutant log_global_resume_point log_steady_river_gauges 1 offset-gap
mutant log_fastest_partition_watermark log_hot_partition_rail_axle_counters 1 late-record
mutant log_idle_partition_stalls log_idle_partitions_snow_pillows 1 watermark-stall
mutant log_silent_skip log_retention_race_pollen_traps 1 silent-skip
mutant log_ignore_new_partitions log_partition_growth_wind_turbines 1 new-partition
mutant readers_tail_emit readers_frequent_cuts_seismographs 1 record-outside-span
mutant readers_keeps_revoked readers_hot_rebalance_wind_farms 1 record-outside-span

else
  echo "go_adapter.sh: first argument must be 'reference', 'mutants' or 'log', got '$PART'" >&2
  exit 2
fi

echo "$failures failure(s)"
[ $failures -eq 0 ]
