#!/usr/bin/env bash
# many_readers.sh (ctest, label e2e): several readers end to end through the
# real CLI, each reader its own connector process.
#   1. certify: the log reference is CERTIFIED on the readers suite, and a
#      readers mutant is refused with its own invariant;
#   2. over a Unix socket directory (one broker and one connector socket per
#      reader) a run passes and replays identically;
#   3. shrink: a cut-conservation failure shrinks to a 1-minimal plan holding
#      the cut; the plan, run again, fails the same way;
#   4. the HTML timeline of a failing run has one lane per reader;
#   5. no reader process is left behind (a marker word in every reader's argv)
#      and weir leaves nothing in TMPDIR.
# Usage: many_readers.sh WEIR CONNECTOR_BIN_DIR SOURCE_DIR
set -uo pipefail
WEIR=$1 BIN=$2 SRC=$3
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
marked_workdir readers
SCEN=$SRC/fixtures/scenarios
REF=$BIN/log_reference_connector
cd "$WORK"

# 1. certify.
"$WEIR" certify --suite "$SRC/fixtures/suites/readers_quick.suite" --connector "$REF $MARK-ref" \
  --progress none --jobs 2 --json ref.json >ref.out 2>&1
rc=$?
check "reference certify exits 0 (got $rc)" test "$rc" -eq 0
check "reference is CERTIFIED" grep -q '^CERTIFIED' ref.out
"$WEIR" certify --suite "$SRC/fixtures/suites/readers_quick.suite" \
  --connector "$BIN/mutant_readers_cut_overlap $MARK-mutant" --progress none --jobs 2 >mutant.out 2>&1
rc=$?
check "mutant certify exits 1 (got $rc)" test "$rc" -eq 1
check "mutant is refused for cut-conservation" grep -q 'cut-conservation' mutant.out

# 2. Unix sockets, and replay.
"$WEIR" run --scenario "$SCEN/readers_join_leave_bike_docks.scenario" --seed 2 --transport unix \
  --connector "$REF $MARK-unix" --trace unix.jsonl >unix.out 2>&1
rc=$?
check "unix run passes (got $rc)" test "$rc" -eq 0
check "the run says how many readers" grep -q '^readers    4;' unix.out
digest=$(sed -n 's/^digest *//p' unix.out)
"$WEIR" replay unix.jsonl >replay.out 2>&1
check "replay of the unix run is identical" grep -q "reproduced identically (digest $digest," replay.out

# 3. shrink a many-reader failure.
"$WEIR" shrink --scenario "$SCEN/readers_frequent_cuts_seismographs.scenario" --seed 1 \
  --invariant cut-conservation --out min.plan --progress none -- \
  "$BIN/mutant_readers_cut_drops_first" "$MARK-shrink" >shrink.out 2>&1
rc=$?
check "shrink exits 0 (got $rc)" test "$rc" -eq 0
check "the minimal plan holds a cut" grep -q 'cut {' min.plan
check "and is 1-minimal" grep -q '^1-minimal: cut-conservation still fails' shrink.out
"$WEIR" run --scenario "$SCEN/readers_frequent_cuts_seismographs.scenario" --seed 1 --plan min.plan \
  --connector "$BIN/mutant_readers_cut_drops_first $MARK-plan" >plan.out 2>&1
rc=$?
check "the minimal plan fails again (exit 1, got $rc)" test "$rc" -eq 1
check "with cut-conservation" grep -q '^FAILED cut-conservation' plan.out

# 4. HTML: one lane per reader.
"$WEIR" run --scenario "$SCEN/readers_frequent_cuts_seismographs.scenario" --seed 1 \
  --connector "$BIN/mutant_readers_tail_emit $MARK-html" --trace tail.jsonl >tail.out 2>&1
"$WEIR" explain tail.jsonl --html tail.html >explain.out 2>&1
check "explain --html exits 0" test "$?" -eq 0
check "the timeline has a lane for reader 0" grep -q '>reader 0</text>' tail.html
check "and one for reader 1" grep -q '>reader 1</text>' tail.html
check "the text explain shows the spans held" grep -q '^    spans held then:' <("$WEIR" explain tail.jsonl)

# 5. Nothing left behind.
sleep 0.2
check "no reader process left behind" none_alive "$MARK"
check "weir left nothing in TMPDIR" test -z "$(ls -A "$TMPDIR")"
exit $((failures > 0))
