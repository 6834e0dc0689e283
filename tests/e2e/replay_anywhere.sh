#!/usr/bin/env bash
# replay_anywhere.sh (ctest, label e2e): a failing run recorded in one
# directory replays and shrinks from any other, and a rerun that cannot be
# the recorded run is reported as what it is, never as nondeterminism.
#   - recorded in A with a relative connector path (and, for an interpreter,
#     a relative script), replayed from B: reproduced identically; shrunk from
#     B: the same plan as shrunk from A;
#   - the binary moved (--connector names the copy): identical, no change;
#   - the binary at the recorded path overwritten by another: replay says
#     first that the binary changed (sha256 then and now) and calls the
#     divergence a changed connector, not nondeterminism; shrink refuses;
#   - the script of an interpreter overwritten: reported as changed likewise;
#   - the binary replaced by one that does not come up: "could not start",
#     exit 3; removed: "cannot start", exit 2; shrink the same.
# Usage: replay_anywhere.sh WEIR CONNECTOR_BIN_DIR SCENARIO_DIR PYTHON_SOURCE_DIR PYTHON_ADAPTER_DIR
set -uo pipefail
weir="${1:?weir}"
bin="${2:?connector bin dir}"
scenarios="${3:?scenario dir}"
pysrc="${4:?python connector source dir}"
pydir="${5:?python adapter dir}"
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
marked_workdir replay-anywhere
# The reference connectors take no extra argument to carry the marker, and
# every connector here runs from a path inside WORK: mark by that instead.
MARK=$WORK
A=$WORK/recorded-here
B=$WORK/elsewhere/deeper
mkdir -p "$A/bin" "$A/py" "$B"
cp "$bin/mutant_ack_on_pull" "$A/bin/conn"
cp "$scenarios/steady_parcel_scanners.scenario" "$A/steady.scenario"

# has FILE TEXT / lacks FILE TEXT (fixed strings); on failure show the file.
has() { grep -qF -- "$2" "$1" || { echo "--- $1:"; head -c 3000 "$1"; return 1; }; }
lacks() { ! grep -qiF -- "$2" "$1" || { echo "--- $1:"; head -c 3000 "$1"; return 1; }; }
# header FILE: the trace's header line.
header() { head -n 1 "$1" >"$1.header"; echo "$1.header"; }
# run_in DIR OUT CMD…: runs CMD in DIR, output to OUT, sets rc.
run_in() { local dir=$1 out=$2; shift 2; rc=0; (cd "$dir" && "$@") >"$out" 2>&1 || rc=$?; }

# 1. Record a failing run in A, everything relative to A.
run_in "$A" "$WORK/run.out" "$weir" run --scenario steady.scenario --seed 1 \
  --connector "bin/conn" --trace run.jsonl
check "the recorded run fails (exit 1, got $rc)" test "$rc" = 1
digest=$(sed -n 's/^digest *//p' "$WORK/run.out")
h=$(header "$A/run.jsonl")
check "the header records the working directory" has "$h" "\"working_directory\":\"$A\""
check "the header records the absolute executable" has "$h" "\"executable\":\"$A/bin/conn\""
sha=$(sha256sum "$A/bin/conn" | cut -d' ' -f1)
check "the header records the executable's sha256" has "$h" "\"executable_sha256\":\"sha256:$sha\""
check "the command as given stays in the header" has "$h" '"connector_argv":["bin/conn"]'

# 2. Replay from B: identical.
run_in "$B" "$WORK/replay.out" "$weir" replay "$A/run.jsonl"
check "replay from elsewhere exits 0 (got $rc)" test "$rc" = 0
check "replay from elsewhere reproduces identically" has "$WORK/replay.out" "reproduced identically (digest $digest,"

# 3. Shrink from A and from B (a bounded search; both ends the same).
run_in "$A" "$WORK/shrink-a.out" "$weir" shrink run.jsonl --out "$WORK/a.plan" --max-reruns 6 --progress none
check "shrink in the recording directory exits 0 (got $rc)" test "$rc" = 0
run_in "$B" "$WORK/shrink-b.out" "$weir" shrink "$A/run.jsonl" --out "$WORK/b.plan" --max-reruns 6 --progress none
check "shrink from elsewhere exits 0 (got $rc)" test "$rc" = 0
check "shrink from elsewhere is not nondeterministic" lacks "$WORK/shrink-b.out" "nondeterministic"
check "shrink from elsewhere writes the same plan" cmp -s "$WORK/a.plan" "$WORK/b.plan"

# 4. The binary moved: --connector names the copy; same bytes, no change.
cp "$A/bin/conn" "$WORK/moved-conn"
run_in "$B" "$WORK/moved.out" "$weir" replay "$A/run.jsonl" --connector "$WORK/moved-conn"
check "replay of a moved binary exits 0 (got $rc)" test "$rc" = 0
check "a moved binary is not a changed one" lacks "$WORK/moved.out" "changed"

# 5. Another binary at the recorded path: changed, not nondeterministic.
cp "$bin/reference_connector" "$A/bin/conn"
sha_now=$(sha256sum "$A/bin/conn" | cut -d' ' -f1)
run_in "$B" "$WORK/changed.out" "$weir" replay "$A/run.jsonl"
check "replay with a changed binary exits 1 (got $rc)" test "$rc" = 1
check "replay says first that the binary changed" \
  test "$(head -n 1 "$WORK/changed.out")" = "the connector binary changed since this trace was recorded: sha256 $sha then, $sha_now now ($A/bin/conn)"
check "the divergence is called a changed connector" has "$WORK/changed.out" "the connector changed since this trace was recorded"
check "and never nondeterministic" lacks "$WORK/changed.out" "nondeterministic"
run_in "$B" "$WORK/shrink-changed.out" "$weir" shrink "$A/run.jsonl" --out "$WORK/c.plan" --progress none
check "shrink with a changed binary exits 2 (got $rc)" test "$rc" = 2
check "shrink says the binary changed" has "$WORK/shrink-changed.out" "the connector binary changed since this trace was recorded"
check "shrink calls it a changed connector, not nondeterminism" has "$WORK/shrink-changed.out" "CHANGED CONNECTOR"
check "shrink wrote no plan" test ! -e "$WORK/c.plan"

# 6. A program at the recorded path that never comes up: could not start.
printf '#!/bin/sh\necho "no config here" >&2\nexit 7\n' >"$A/bin/conn"
run_in "$B" "$WORK/nostart.out" "$weir" replay "$A/run.jsonl"
check "replay of a connector that does not come up exits 3 (got $rc)" test "$rc" = 3
check "it says the connector could not start, and why" has "$WORK/nostart.out" "the connector could not start: "
check "with the connector's own words" has "$WORK/nostart.out" "no config here"
check "and never nondeterministic" lacks "$WORK/nostart.out" "is nondeterministic"
run_in "$B" "$WORK/shrink-nostart.out" "$weir" shrink "$A/run.jsonl" --out "$WORK/d.plan" --progress none
check "shrink of a connector that does not come up exits 3 (got $rc)" test "$rc" = 3
check "shrink says it could not start" has "$WORK/shrink-nostart.out" "the connector could not start: "

# 7. Nothing at the recorded path: cannot start, exit 2, before any run.
rm "$A/bin/conn"
run_in "$B" "$WORK/gone.out" "$weir" replay "$A/run.jsonl"
check "replay of a connector that no longer exists exits 2 (got $rc)" test "$rc" = 2
check "it names the missing path and what was recorded" \
  has "$WORK/gone.out" "the connector cannot start: '$A/bin/conn' (recorded as 'bin/conn' in $A) no longer exists"
check "and never nondeterministic" lacks "$WORK/gone.out" "nondeterministic"
run_in "$B" "$WORK/shrink-gone.out" "$weir" shrink "$A/run.jsonl" --out "$WORK/e.plan" --progress none
check "shrink of a connector that no longer exists exits 2 (got $rc)" test "$rc" = 2
check "shrink says it cannot start" has "$WORK/shrink-gone.out" "the connector cannot start: "

# 8. An interpreter and a relative script: recorded in A, replayed from B;
#    then the script changed.
cp "$pysrc/reference_source.py" "$A/py/"
cp "$pysrc/mutant_ack_on_pull.py" "$A/py/conn.py"
export PYTHONPATH=$pydir
run_in "$A" "$WORK/py-run.out" "$weir" run --scenario steady.scenario --seed 1 \
  --connector "/usr/bin/python3 py/conn.py" --trace py.jsonl
check "the recorded script run fails (exit 1, got $rc)" test "$rc" = 1
check "the header records the script's absolute path" has "$(header "$A/py.jsonl")" "\"file_argument\":\"$A/py/conn.py\""
run_in "$B" "$WORK/py-replay.out" "$weir" replay "$A/py.jsonl"
check "the script run replays from elsewhere (exit 0, got $rc)" test "$rc" = 0
check "identically" has "$WORK/py-replay.out" "reproduced identically"
cp "$pysrc/reference.py" "$A/py/conn.py"
run_in "$B" "$WORK/py-changed.out" "$weir" replay "$A/py.jsonl"
check "a changed script is reported as changed" \
  has "$WORK/py-changed.out" "the connector file argument changed since this trace was recorded: sha256 "
check "and never as nondeterminism" lacks "$WORK/py-changed.out" "nondeterministic"

check "no connector process is left" none_alive "$MARK"
exit $((failures > 0))
