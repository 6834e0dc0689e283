#!/usr/bin/env bash
# End-to-end: SIGINT and SIGTERM during weir certify and weir run. weir must
# stop launching runs, kill and reap every connector (a marker word in the
# connector's argv, looked up with pgrep -f), write the reports of the runs
# finished so far marked incomplete, exit 4, and leave no temporary directory
# or socket in TMPDIR; also after a normal and an error exit. Unix-socket
# directories are private (0700).
# Usage: signals.sh WEIR CONNECTOR_DIR HOSTILE_DIR
set -uo pipefail
WEIR=$1 BIN=$2 DIR=$3
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
marked_workdir signals
# seen_processes TAG N SECONDS: waits until N distinct processes whose argv
# carries TAG have been seen alive (polled every 50 ms), at most SECONDS.
seen_processes() {
  local seen=" " n=0 p
  for _ in $(seq $(($3 * 20))); do
    for p in $(pgrep -f "$1"); do
      case "$seen" in *" $p "*) ;; *) seen="$seen$p " n=$((n + 1)) ;; esac
    done
    [ "$n" -ge "$2" ] && return 0
    sleep 0.05
  done
  return 1
}
tmp_clean() { test -z "$(ls -A "$TMPDIR")"; }

# 1. certify, interrupted: ack_twice passes its runs (each ~0.1 s); after a
#    few, SIGINT (then SIGTERM in the second round).
for sig in INT TERM; do
  tag=$MARK-certify-$sig
  "$WEIR" certify --suite "$DIR/patient.suite" --jobs 2 --transport unix --progress lines \
    --connector "$BIN/hostile_ack_twice $tag" --json "$WORK/$sig.json" --junit "$WORK/$sig.xml" \
    >"$WORK/certify-$sig.out" 2>&1 &
  pid=$!
  # Signal once a few runs have finished: three connector processes seen
  # (plus weir itself, whose argv carries the tag too), however slow the
  # machine or the build (sanitizers) is.
  seen_processes "$tag" 4 120
  started=$(date +%s%N)
  kill -"$sig" "$pid"
  wait "$pid"
  rc=$?
  took=$((($(date +%s%N) - started) / 1000000))
  check "certify SIG$sig: exit 4 (got $rc)" test "$rc" -eq 4
  check "certify SIG$sig: stopped within 3 s (${took} ms)" test "$took" -lt 3000
  check "certify SIG$sig: says INTERRUPTED" grep -q '^INTERRUPTED by signal' "$WORK/certify-$sig.out"
  check "certify SIG$sig: no connector survives" none_alive "$tag"
  check "certify SIG$sig: JSON report written" test -s "$WORK/$sig.json"
  check "certify SIG$sig: JUnit written" test -s "$WORK/$sig.xml"
  check "certify SIG$sig: report marked incomplete" grep -q '"stopped_because": "interrupted by a signal"' "$WORK/$sig.json"
  runs=$(grep -c '"pair_index"' "$WORK/$sig.json")
  check "certify SIG$sig: some runs finished and reported, not all 40 ($runs)" test "$runs" -gt 0 -a "$runs" -lt 40
  check "certify SIG$sig: abandoned runs are not reported as failures" bash -c "! grep -q '\"passed\": false' '$WORK/$sig.json'"
  check "certify SIG$sig: TMPDIR clean" tmp_clean
done

# 2. certify against a connector hanging in a call with a one-minute bound:
#    the signal, not the bound, ends it.
tag=$MARK-hang
"$WEIR" certify --suite "$DIR/patient.suite" --jobs 2 --progress none \
  --connector "$BIN/hostile_hang_in_step $tag" --json "$WORK/hang.json" >"$WORK/hang.out" 2>&1 &
pid=$!
wait_for "$tag" 20
sleep 1
started=$(date +%s%N)
kill -INT "$pid"
wait "$pid"
rc=$?
took=$((($(date +%s%N) - started) / 1000000))
check "certify hanging connector, SIGINT: exit 4 (got $rc)" test "$rc" -eq 4
check "certify hanging connector, SIGINT: stopped within 3 s (${took} ms)" test "$took" -lt 3000
check "certify hanging connector: no connector survives" none_alive "$tag"
check "certify hanging connector: report says interrupted" grep -q '"stopped_because": "interrupted by a signal"' "$WORK/hang.json"

# 3. weir run against a connector that hangs in a step (one-minute bound):
#    SIGTERM kills it and leaves no trace or plan file and no socket dir.
tag=$MARK-run
"$WEIR" run --scenario "$DIR/patient.scenario" --seed 3 --transport unix \
  --connector "$BIN/hostile_hang_in_step $tag" --trace "$WORK/run.jsonl" --save-plan "$WORK/run.plan" \
  >"$WORK/run.out" 2>&1 &
pid=$!
wait_for "$tag" 20
sleep 0.5
check "run: the connector's socket directory is private (0700)" \
  bash -c "stat -c %a '$TMPDIR'/weir-* 2>/dev/null | grep -qx 700"
kill -TERM "$pid"
wait "$pid"
rc=$?
check "run SIGTERM: exit 4 (got $rc)" test "$rc" -eq 4
check "run SIGTERM: says interrupted" grep -q 'interrupted by signal 15' "$WORK/run.out"
check "run SIGTERM: no trace or plan left" bash -c "! compgen -G '$WORK/run.jsonl*' >/dev/null && ! compgen -G '$WORK/run.plan*' >/dev/null"
check "run SIGTERM: no process survives" none_alive "$tag"
check "run SIGTERM: TMPDIR clean" tmp_clean

# 4. weir replay and weir shrink, interrupted while a connector hangs in a
#    step: exit 4, connector killed, nothing written, TMPDIR clean.
"$WEIR" run --scenario "$DIR/patient.scenario" --seed 3 --transport unix \
  --connector "$BIN/hostile_ack_twice $MARK-saved" --trace "$WORK/saved.jsonl" >"$WORK/saved.out" 2>&1
tag=$MARK-replay
"$WEIR" replay "$WORK/saved.jsonl" --transport unix --connector "$BIN/hostile_hang_in_step $tag" \
  >"$WORK/replay.out" 2>&1 &
pid=$!
wait_for "$tag" 20
sleep 0.5
kill -INT "$pid"
wait "$pid"
rc=$?
check "replay SIGINT: exit 4 (got $rc)" test "$rc" -eq 4
check "replay SIGINT: says interrupted" grep -q 'interrupted by signal 2' "$WORK/replay.out"
check "replay SIGINT: no process survives" none_alive "$tag"
check "replay SIGINT: TMPDIR clean" tmp_clean
tag=$MARK-shrink
"$WEIR" shrink --scenario "$DIR/patient.scenario" --seed 3 --transport unix --out "$WORK/min.plan" \
  -- "$BIN/hostile_hang_in_step" "$tag" >"$WORK/shrink.out" 2>&1 &
pid=$!
wait_for "$tag" 20
sleep 0.5
kill -TERM "$pid"
wait "$pid"
rc=$?
check "shrink SIGTERM: exit 4 (got $rc)" test "$rc" -eq 4
check "shrink SIGTERM: says interrupted" grep -q 'interrupted by signal 15' "$WORK/shrink.out"
check "shrink SIGTERM: no plan written" bash -c "! compgen -G '$WORK/min.plan*' >/dev/null"
check "shrink SIGTERM: no process survives" none_alive "$tag"
check "shrink SIGTERM: TMPDIR clean" tmp_clean

# 5. Normal exit and error exit leave TMPDIR clean too.
"$WEIR" run --scenario "$DIR/hostile.scenario" --seed 1 --transport unix \
  --connector "$BIN/hostile_ack_twice $MARK-normal" >"$WORK/normal.out" 2>&1
rc=$?
check "run normal exit: exit 0 (got $rc)" test "$rc" -eq 0
check "run normal exit: TMPDIR clean" tmp_clean
"$WEIR" run --scenario "$DIR/hostile.scenario" --seed 1 --transport unix \
  --connector "$BIN/hostile_exit_signal $MARK-error" >"$WORK/error.out" 2>&1
rc=$?
check "run failing exit: exit 1 (got $rc)" test "$rc" -eq 1
check "run failing exit: TMPDIR clean" tmp_clean
"$WEIR" run --scenario "$DIR/no-such.scenario" --transport unix --connector "$BIN/hostile_ack_twice" \
  >"$WORK/usage.out" 2>&1
rc=$?
check "run usage error: exit 2 (got $rc)" test "$rc" -eq 2
check "run usage error: TMPDIR clean" tmp_clean

if ((failures > 0)); then
  for f in "$WORK"/*.out; do echo "== $f"; tail -c 2000 "$f"; done
  exit 1
fi
