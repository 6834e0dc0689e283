#!/usr/bin/env bash
# run_all.sh: every benchmark of docs/performance.md, repeated, and one table of
# medians with the targets.
#
# Usage: bash bench/run_all.sh [--repeats N] [--tiny] [--build-dir DIR]
#   --repeats N   run each benchmark N times (default 3) and report the median
#   --tiny        tiny sizes, one repeat: checks that everything builds and runs
#                 (the ctest bench_run_all_tiny); its figures mean nothing
#   --build-dir   where the build is (default $WEIR_BUILD_DIR or build/)
#
# Ratios are taken inside one run of one benchmark (weir against the bare gRPC
# round trip, in-process against gRPC), so a loaded machine skews them less than
# the absolute figures. The raw output of every run is kept in
# $BENCH_OUT (default: a temporary directory, printed at the end).
#
# Needs: the targets weir, reference_connector, call_cost, certify_floor,
# oracle_bench, log_oracle_bench, suite_throughput and supervise_cost
# (`ninja -C build weir reference_connector call_cost certify_floor
# oracle_bench log_oracle_bench suite_throughput supervise_cost bench_python_echo
# weir_python`), and for the
# Python figures the Python stubs (build/adapters/python, build/bench/python)
# with Debian's python3-grpcio.
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
BUILD=${WEIR_BUILD_DIR:-build}
REPEATS=3
TINY=0
while (($#)); do
  case $1 in
    --repeats) REPEATS=$2; shift 2 ;;
    --tiny) TINY=1; REPEATS=1; shift ;;
    --build-dir) BUILD=$2; shift 2 ;;
    *) echo "run_all.sh: unknown argument '$1' (known: --repeats N, --tiny, --build-dir DIR)" >&2; exit 2 ;;
  esac
done
[[ $BUILD = /* ]] || BUILD=$ROOT/$BUILD
if ! [[ $REPEATS =~ ^[1-9][0-9]*$ ]]; then
  echo "run_all.sh: --repeats is '$REPEATS'; expected a positive integer" >&2
  exit 2
fi

WEIR=$BUILD/harness/weir
CONNECTOR=$BUILD/fixtures/connectors/reference_connector
for exe in "$WEIR" "$CONNECTOR" "$BUILD/bench/call_cost" "$BUILD/bench/certify_floor" "$BUILD/bench/oracle_bench" \
           "$BUILD/bench/log_oracle_bench" "$BUILD/bench/suite_throughput" "$BUILD/bench/supervise_cost"; do
  if [[ ! -x $exe ]]; then
    echo "run_all.sh: $exe is missing; build it first (see the top of this script)" >&2
    exit 2
  fi
done
if [[ ! -f $BUILD/bench/python/echo_pb2.py || ! -f $BUILD/adapters/python/weir/v1/connector_pb2.py ]]; then
  echo "run_all.sh: the Python stubs are missing; build them first (ninja -C build bench_python_echo weir_python)" >&2
  exit 2
fi

if ((TINY)); then
  STEADY=$ROOT/fixtures/scenarios/steady_parcel_scanners.scenario
  ECHO_CALLS=200 RESTARTS=3 ROUNDS=1 EXITS=5
  IDLE=$ROOT/bench/idle_tiny.scenario
  ORACLE_EVENTS=100000
  LOG_OFFSETS=100000 LOG_PARTITIONS=100
  SUITE=$ROOT/tests/e2e/tiny.suite
  FLOOR_SUITE=$ROOT/tests/e2e/tiny.suite FLOOR_ECHO=200 FLOOR_RESTARTS=3
else
  STEADY=$ROOT/bench/steady_calls.scenario
  ECHO_CALLS=5000 RESTARTS=30 ROUNDS=5 EXITS=200
  IDLE=$ROOT/bench/idle_hour.scenario
  ORACLE_EVENTS=10000000
  LOG_OFFSETS=10000000 LOG_PARTITIONS=1000
  SUITE=$ROOT/fixtures/suites/quick.suite
  FLOOR_SUITE=$ROOT/fixtures/suites/standard.suite FLOOR_ECHO=5000 FLOOR_RESTARTS=20
fi
CORES=$(nproc)
PY_REFERENCE=$ROOT/fixtures/connectors/python/reference.py
PY_ECHO=$ROOT/bench/python/echo_server.py
PY_PATH=$BUILD/bench/python:$BUILD/adapters/python
if ((TINY)); then PY_ECHO_CALLS=100 PY_RESTARTS=2 PY_FLOOR_ECHO=100; else PY_ECHO_CALLS=2000 PY_RESTARTS=10 PY_FLOOR_ECHO=2000; fi

OUT=${BENCH_OUT:-$(mktemp -d "${TMPDIR:-/tmp}/weir-bench-XXXXXX")}
mkdir -p "$OUT"
if ((TINY)) && [[ -z ${BENCH_OUT:-} ]]; then trap 'rm -rf "$OUT"' EXIT; fi
VALUES=$OUT/values  # "name value" lines, one per benchmark run
: >"$VALUES"

# run NAME LOG CMD...: runs CMD with output into LOG; stops everything if it fails.
run() {
  local name=$1 log=$2
  shift 2
  if ! "$@" >"$log" 2>&1; then
    echo "run_all.sh: $name failed; its output ($log):" >&2
    tail -n 30 "$log" >&2
    exit 1
  fi
}
# pick LOG SED_EXPR NAME: extracts one number from LOG into VALUES.
pick() {
  local v
  v=$(sed -n "$2" "$1" | head -n 1)
  if [[ -z $v ]]; then
    echo "run_all.sh: no '$3' in $1" >&2
    exit 1
  fi
  echo "$3 $v" >>"$VALUES"
}

for ((i = 1; i <= REPEATS; i++)); do
  echo "repeat $i of $REPEATS…" >&2
  log=$OUT/call_cost.$i.log
  run call_cost "$log" "$BUILD/bench/call_cost" "$CONNECTOR" "$STEADY" "$ECHO_CALLS" "$RESTARTS" "$ROUNDS"
  grep '^result ' "$log" | cut -d' ' -f2- >>"$VALUES"

  # The same with one busy-looping process per core beside it (call_cost
  # starts and stops them): what a busy CI runner leaves weir.
  log=$OUT/call_cost_loaded.$i.log
  run call_cost_loaded "$log" "$BUILD/bench/call_cost" "$CONNECTOR" "$STEADY" "$ECHO_CALLS" "$RESTARTS" "$ROUNDS" "$CORES"
  grep '^result ' "$log" | cut -d' ' -f2- | sed 's/^/loaded_/' >>"$VALUES"

  # The certify floor, C++ and Python references, --jobs = cores.
  log=$OUT/floor_cpp.$i.log
  run certify_floor "$log" "$BUILD/bench/certify_floor" "$FLOOR_SUITE" "$CORES" "$FLOOR_ECHO" "$FLOOR_RESTARTS" -- "$CONNECTOR"
  grep '^result ' "$log" | cut -d' ' -f2- | sed 's/^/floor_cpp_/' >>"$VALUES"
  # The Python reference against Python's own floor: the bare Python echo's
  # round trip and the bare restart of a Python process (echo_server.py).
  log=$OUT/floor_python.$i.log
  run certify_floor_python "$log" env PYTHONPATH="$PY_PATH" WEIR_BENCH_ECHO_SERVER="'$PY_ECHO' pool" \
    "$BUILD/bench/certify_floor" "$FLOOR_SUITE" "$CORES" "$PY_FLOOR_ECHO" "$FLOOR_RESTARTS" -- "$PY_REFERENCE"
  grep '^result ' "$log" | cut -d' ' -f2- | sed 's/^/floor_python_/' >>"$VALUES"

  # Python cost per call against the bare Python echo (grpc.server with a
  # thread pool, the plain way), and against the echo served by the adapter's
  # own completion loop (context: what serving alone costs).
  for serving in pool loop; do
    log=$OUT/python_call_cost_$serving.$i.log
    run python_call_cost "$log" env PYTHONPATH="$PY_PATH" WEIR_BENCH_ECHO_SERVER="'$PY_ECHO' $serving" \
      "$BUILD/bench/call_cost" "$PY_REFERENCE" "$STEADY" "$PY_ECHO_CALLS" "$PY_RESTARTS" "$ROUNDS"
    grep '^result ' "$log" | cut -d' ' -f2- | sed "s/^/python_${serving}_/" >>"$VALUES"
  done

  log=$OUT/idle_hour.$i.log
  run idle_hour "$log" bash "$ROOT/bench/idle_hour.sh" "$WEIR" "$CONNECTOR" "$IDLE"
  pick "$log" 's/.* = \([0-9.]*\) virtual s per wall s.*/\1/p' idle_vps
  pick "$log" 's/.*: \([0-9.]*\) virtual s in .*/\1/p' idle_virtual_s

  log=$OUT/oracle.$i.log
  run oracle_bench "$log" "$BUILD/bench/oracle_bench" "$ORACLE_EVENTS"
  pick "$log" 's/^generation+oracle: .*(raw \([0-9.]*\) M events.*/\1/p' oracle_raw_meps
  pick "$log" 's/^oracle only: .*(\([0-9.]*\) M events.*/\1/p' oracle_only_meps
  pick "$log" 's/^VmHWM at end: *\([0-9]*\) kB/\1/p' oracle_hwm_end_kb
  if grep -q 'VmHWM after   1.0M' "$log"; then
    pick "$log" 's/^VmHWM after   1.0M events: \([0-9]*\) kB/\1/p' oracle_hwm_1m_kb
  fi

  log=$OUT/log_oracle.$i.log
  run log_oracle_bench "$log" "$BUILD/bench/log_oracle_bench" "$LOG_OFFSETS" "$LOG_PARTITIONS"
  pick "$log" 's/^oracle only: .*(\([0-9.]*\) M offsets.*/\1/p' log_oracle_mops
  pick "$log" 's/^VmHWM at end: *\([0-9]*\) kB/\1/p' log_oracle_hwm_end_kb
  if grep -q 'VmHWM after   1.0M' "$log"; then
    pick "$log" 's/^VmHWM after   1.0M offsets: \([0-9]*\) kB/\1/p' log_oracle_hwm_1m_kb
  fi

  log=$OUT/suite.$i.log
  run suite_throughput "$log" "$BUILD/bench/suite_throughput" "$SUITE" "$CONNECTOR" 2
  pick "$log" 's/^over gRPC .* \([0-9.]*\) runs\/min$/\1/p' suite_grpc_rpm
  pick "$log" 's/^in-process .* \([0-9.]*\) runs\/min$/\1/p' suite_inproc_rpm
  pick "$log" 's/^in-process \/ gRPC = \([0-9.]*\)x.*/\1/p' suite_ratio

  log=$OUT/supervise.$i.log
  run supervise_cost "$log" "$BUILD/bench/supervise_cost" "$CONNECTOR" "$RESTARTS" "$EXITS" 32
  grep '^result ' "$log" | cut -d' ' -f2- >>"$VALUES"
done

# median NAME: the median of NAME's values (lower middle for an even count).
median() {
  awk -v k="$1" '$1 == k { print $2 }' "$VALUES" | sort -g |
    awk '{ v[NR] = $1 } END { if (NR == 0) print "?"; else print v[int((NR + 1) / 2)] }'
}
# verdict VALUE OP LIMIT: "met" or "NOT met"; "?" when VALUE is not a number
# (a figure missing from every run).
verdict() {
  awk -v v="$1" -v op="$2" -v l="$3" \
    'BEGIN { if (v !~ /^[0-9.]+$/) { print "?"; exit }
             ok = (op == "<=") ? v + 0 <= l + 0 : v + 0 >= l + 0; print ok ? "met" : "NOT met" }'
}

hwm_1m=$(median oracle_hwm_1m_kb)
hwm_end=$(median oracle_hwm_end_kb)
oracle_only=$(median oracle_only_meps)
tcp_ratio=$(median weir_tcp_ratio)
unix_ratio=$(median weir_unix_ratio)
idle=$(median idle_vps)
suite_ratio=$(median suite_ratio)

echo
echo "weir benchmarks: median of $REPEATS run(s)$( ((TINY)) && echo ', TINY sizes: figures mean nothing')"
echo "machine: $(nproc) cores, $(sed -n 's/^model name[[:space:]]*: //p' /proc/cpuinfo | head -n 1), load average $(cut -d' ' -f1-3 /proc/loadavg)"
printf '%s\n' "| # | benchmark | median | target | status |" "|---|---|---|---|---|"
printf '| 1 | bare gRPC unary echo, loopback TCP, one call outstanding | %s round trips/s (%s us) | baseline | |\n' \
  "$(median echo_tcp_rps)" "$(median echo_tcp_us)"
printf '| 1 | bare gRPC unary echo, Unix socket, one call outstanding | %s round trips/s (%s us) | baseline | |\n' \
  "$(median echo_unix_rps)" "$(median echo_unix_us)"
printf '| 2 | weir steps/s, reference connector, %s, TCP | %s steps/s | | |\n' \
  "$(basename "$STEADY")" "$(median weir_tcp_steps_per_s)"
printf '| 2 | weir cost per call / bare round trip, TCP | %s us = %sx | <= 1.5x | %s |\n' \
  "$(median weir_tcp_us)" "$tcp_ratio" "$(verdict "$tcp_ratio" '<=' 1.5)"
printf '| 2 | weir cost per call / bare round trip, Unix socket | %s us = %sx | <= 1.5x | %s |\n' \
  "$(median weir_unix_us)" "$unix_ratio" "$(verdict "$unix_ratio" '<=' 1.5)"
loaded_tcp=$(median loaded_weir_tcp_ratio)
loaded_unix=$(median loaded_weir_unix_ratio)
printf '| 2 | loaded (%s busy processes beside it): cost per call / round trip, TCP: median times, median per-round ratio | %s us, %s us: %sx | <= 1.4x | %s |\n' \
  "$CORES" "$(median loaded_weir_tcp_us)" "$(median loaded_echo_tcp_us)" "$loaded_tcp" "$(verdict "$loaded_tcp" '<=' 1.4)"
printf '| 2 | loaded (%s busy processes beside it): the same, Unix socket | %s us, %s us: %sx | <= 1.4x | %s |\n' \
  "$CORES" "$(median loaded_weir_unix_us)" "$(median loaded_echo_unix_us)" "$loaded_unix" "$(verdict "$loaded_unix" '<=' 1.4)"
printf '| 2 | (context) cost per call / echo carrying the mean message sizes of weir'"'"'s calls, TCP, Unix | %sx (echo %s us), %sx (echo %s us) | | |\n' \
  "$(median weir_tcp_sized_ratio)" "$(median echo_tcp_sized_us)" "$(median weir_unix_sized_ratio)" "$(median echo_unix_sized_us)"
printf '| 2 | simulation and reference connector alone (in-process), per call | %s us | | |\n' "$(median inprocess_us)"
printf '| 3 | virtual s per wall s, %s (%s virtual s) | %s | >= 10000 | %s |\n' \
  "$(basename "$IDLE")" "$(median idle_virtual_s)" "$idle" "$(verdict "$idle" '>=' 10000)"
printf '| 4 | oracle, %s synthetic events: M events/s (oracle only; with generation) | %s (%s) | >= 5 | %s |\n' \
  "$ORACLE_EVENTS" "$oracle_only" "$(median oracle_raw_meps)" "$(verdict "$oracle_only" '>=' 5)"
if [[ $hwm_1m != "?" ]]; then
  flat=$(awk -v a="$hwm_1m" -v b="$hwm_end" 'BEGIN { print (b <= a * 1.1 + 1024) ? "met" : "NOT met" }')
  printf '| 4 | oracle peak memory (VmHWM) after 1M events, at the end | %s kB, %s kB | flat | %s |\n' \
    "$hwm_1m" "$hwm_end" "$flat"
else
  printf '| 4 | oracle peak memory (VmHWM) at the end | %s kB | flat | (run too short) |\n' "$hwm_end"
fi
log_mops=$(median log_oracle_mops)
printf '| 4 | oracle, log shape, %s offsets over %s partitions: M offsets/s (oracle only) | %s | >= 20 | %s |\n' \
  "$LOG_OFFSETS" "$LOG_PARTITIONS" "$log_mops" "$(verdict "$log_mops" '>=' 20)"
log_hwm_1m=$(median log_oracle_hwm_1m_kb)
log_hwm_end=$(median log_oracle_hwm_end_kb)
if [[ $log_hwm_1m != "?" ]]; then
  flat=$(awk -v a="$log_hwm_1m" -v b="$log_hwm_end" 'BEGIN { print (b <= a * 1.1 + 1024) ? "met" : "NOT met" }')
  printf '| 4 | log oracle peak memory (VmHWM) after 1M offsets, at the end | %s kB, %s kB | flat | %s |\n' \
    "$log_hwm_1m" "$log_hwm_end" "$flat"
fi
printf '| 5 | suite %s --jobs 2: seed-runs/min over gRPC, in-process | %s, %s | | |\n' \
  "$(basename "$SUITE")" "$(median suite_grpc_rpm)" "$(median suite_inproc_rpm)"
printf '| 5 | in-process / gRPC suite throughput | %sx | >= 20x | %s |\n' \
  "$suite_ratio" "$(verdict "$suite_ratio" '>=' 20)"
printf '| 6 | restart: kill + start + Open of an incarnation, median | %s ms | | |\n' "$(median restart_ms)"
printf '| 7 | restart phases, medians: kill + spawn + handshake + connect + Open (total) | %s + %s + %s + %s + %s ms (%s ms) | | |\n' \
  "$(median supervise_kill_ms)" "$(median supervise_spawn_ms)" "$(median supervise_handshake_ms)" \
  "$(median supervise_connect_ms)" "$(median supervise_open_ms)" "$(median supervise_restart_ms)"
printf '| 7 | connector exec and loading alone (spawn to its first byte) | %s ms | | |\n' "$(median supervise_exec_load_ms)"
printf '| 7 | exit notice, SIGKILL to reaped: pidfd, SIGCHLD, old 2 ms poll | %s, %s, %s ms | | |\n' \
  "$(median exit_notice_pidfd_ms)" "$(median exit_notice_sigchld_ms)" "$(median exit_notice_poll_ms)"
printf '| 7 | threads added by 32 watched processes | %s | 0 | %s |\n' "$(median supervise_threads_added)" \
  "$(verdict "$(median supervise_threads_added)" '<=' 0)"
floor_cpp=$(median floor_cpp_floor_ratio)
floor_py=$(median floor_python_floor_ratio)
printf '| 8 | certify floor, C++ reference, %s --jobs %s: wall / floor | %s s / %s s = %sx | <= 1.3x | %s |\n' \
  "$(basename "$FLOOR_SUITE")" "$CORES" "$(median floor_cpp_wall_s)" "$(median floor_cpp_floor_s)" "$floor_cpp" \
  "$(verdict "$floor_cpp" '<=' 1.3)"
printf '| 8 | certify floor, Python reference, same suite, floor of Python'"'"'s own echo and restart: wall / floor | %s s / %s s = %sx | <= 1.3x | %s |\n' \
  "$(median floor_python_wall_s)" "$(median floor_python_floor_s)" "$floor_py" "$(verdict "$floor_py" '<=' 1.3)"
py_vs_cpp=$(awk -v p="$(median floor_python_wall_s)" -v c="$(median floor_cpp_wall_s)" \
  'BEGIN { if (p !~ /^[0-9.]+$/ || c !~ /^[0-9.]+$/ || c + 0 == 0) print "?"; else printf "%.2f", p / c }')
printf '| 8 | Python reference wall / C++ reference wall, same suite and calls | %sx | <= 1.5x | %s |\n' \
  "$py_vs_cpp" "$(verdict "$py_vs_cpp" '<=' 1.5)"
py_tcp=$(median python_pool_weir_tcp_ratio)
py_unix=$(median python_pool_weir_unix_ratio)
printf '| 9 | Python reference cost per call / bare Python echo (grpc.server, thread pool), TCP: median times, median per-round ratio | %s us, %s us: %sx | <= 1.5x | %s |\n' \
  "$(median python_pool_weir_tcp_us)" "$(median python_pool_echo_tcp_us)" "$py_tcp" "$(verdict "$py_tcp" '<=' 1.5)"
printf '| 9 | the same, Unix socket | %s us, %s us: %sx | <= 1.5x | %s |\n' \
  "$(median python_pool_weir_unix_us)" "$(median python_pool_echo_unix_us)" "$py_unix" "$(verdict "$py_unix" '<=' 1.5)"
printf '| 9 | (context) the same against the echo served by the adapter'"'"'s completion loop, TCP, Unix | %s us = %sx, %s us = %sx | | |\n' \
  "$(median python_loop_echo_tcp_us)" "$(median python_loop_weir_tcp_ratio)" \
  "$(median python_loop_echo_unix_us)" "$(median python_loop_weir_unix_ratio)"
printf '| 9 | restart of a Python connector: kill + start + Open, median | %s ms | | |\n' "$(median python_pool_restart_ms)"
echo
((TINY)) || echo "raw output: $OUT"
