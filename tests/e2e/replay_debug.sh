#!/usr/bin/env bash
# replay_debug.sh (ctest, label e2e): weir replay's debugging aids
# (docs/debugging.md) against a real mutant connector.
#   - --no-wall-bounds reproduces the run identically;
#   - --wrap with a trivial wrapper (/usr/bin/env), and the same wrapper given
#     word by word with --wrap-arg, reproduce it identically: the wrapper is
#     started in front of the connector, the identity check still names the
#     connector;
#   - --stop-before K with stdin at EOF prints the hold (pid alive at that
#     moment, addresses, the next event #K) and goes on at once, identical;
#   - --stop-before K with stdin a FIFO: weir really waits; the printed pid is
#     a live process while it waits; a newline lets it finish, identical;
#   - bad values (K = 0, K past the end, a wrapper that does not exist, an
#     unterminated quote in --wrap) exit 2 with a clear message.
# Usage: replay_debug.sh WEIR CONNECTOR_BIN_DIR SCENARIO_DIR
set -euo pipefail
weir="${1:?weir}"
bin="${2:?connector bin dir}"
scenarios="${3:?scenario dir}"
source "$(dirname "${BASH_SOURCE[0]}")/lib.sh"
tmp="$(mktemp -d)"
weir_pid=""
trap '[[ -n $weir_pid ]] && kill -KILL "$weir_pid" 2>/dev/null; rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }
cd "$tmp"

mutant="$bin/mutant_ack_on_pull"
rc=0
"$weir" run --scenario "$scenarios/steady_parcel_scanners.scenario" --seed 1 --connector "$mutant" \
  --trace run.jsonl >run.out 2>&1 || rc=$?
[[ $rc == 1 ]] || { cat run.out >&2; fail "mutant run: exit $rc, expected 1"; }
digest=$(sed -n 's/^digest *//p' run.out)
events=$(tail -n 1 run.jsonl | sed 's/.*"events":"\([0-9]*\)".*/\1/')
[[ -n $digest && $events -gt 10 ]] || fail "no digest or event count (digest '$digest', events '$events')"

identical() {  # FILE: the replay said identical with the run's digest
  grep -q "^weir replay: reproduced identically (digest $digest, $events events)" "$1"
}

# 1. No wall bounds: the same events.
rc=0
"$weir" replay run.jsonl --no-wall-bounds >nowall.out 2>&1 || rc=$?
check "--no-wall-bounds exit 0" test "$rc" = 0
check "--no-wall-bounds says weir waits as long as it takes" grep -q "waits as long as it takes" nowall.out
check "--no-wall-bounds identical" identical nowall.out

# 2. A trivial wrapper, as one string and word by word.
rc=0
"$weir" replay run.jsonl --wrap '/usr/bin/env WEIR_WRAPPED=1' >wrap.out 2>&1 || rc=$?
check "--wrap exit 0" test "$rc" = 0
check "--wrap names the wrapper" grep -q "under '/usr/bin/env WEIR_WRAPPED=1'" wrap.out
check "--wrap identical" identical wrap.out
check "--wrap: no connector-changed note (the identity is the connector's)" \
  bash -c "! grep -q 'changed since this trace' wrap.out"
rc=0
"$weir" replay run.jsonl --wrap-arg /usr/bin/env --wrap-arg WEIR_WRAPPED=1 >wraparg.out 2>&1 || rc=$?
check "--wrap-arg exit 0" test "$rc" = 0
check "--wrap-arg identical" identical wraparg.out

# 3. --stop-before K with stdin at EOF: holds, shows, goes on.
k=$((events / 2))
rc=0
"$weir" replay run.jsonl --stop-before "$k" </dev/null >stop.out 2>&1 || rc=$?
check "--stop-before exit 0" test "$rc" = 0
check "--stop-before holds before #$k" grep -q "^weir replay: holding before event #$k " stop.out
check "--stop-before shows a live pid and where it listens" \
  grep -Eq "^  reader 0: pid [0-9]+ \(alive\), listening on 127\.0\.0\.1:[0-9]+, broker calls to 127\.0\.0\.1:[0-9]+" stop.out
next_line=$(grep -m1 "\"seq\":\"$k\"" run.jsonl)
check "--stop-before shows the saved event #$k" grep -qF "$next_line" stop.out
check "--stop-before goes on at end of input" grep -q "^weir replay: end of input; going on from event #$k" stop.out
check "--stop-before identical" identical stop.out

# 3b. --stop-before past the last event: refused before anything starts
#     (exit 2, the range it expected), never silently ignored.
beyond=$((events + 10))
rc=0
"$weir" replay run.jsonl --stop-before "$beyond" </dev/null >never.out 2>&1 || rc=$?
check "--stop-before past the end exit 2" test "$rc" = 2
check "--stop-before past the end names the events there are" \
  grep -q "has no event #$beyond; expected an event number from 1 to $((events - 1))" never.out
check "--stop-before past the end did not hold" bash -c "! grep -q 'holding before event' never.out"

# 4. --stop-before with a FIFO on stdin: weir waits until a line comes, and
#    the pid it printed is a live process meanwhile.
mkfifo in.fifo
"$weir" replay run.jsonl --stop-before "$k" <in.fifo >fifo.out 2>&1 &
weir_pid=$!
exec 3>in.fifo
held=no
for _ in $(seq 600); do
  if grep -q "weir waits for Enter" fifo.out; then held=yes; break; fi
  sleep 0.1
done
check "--stop-before (fifo) holds" test "$held" = yes
pid=$(sed -n 's/^  reader 0: pid \([0-9]*\) .*/\1/p' fifo.out)
sleep 0.5
check "--stop-before (fifo) still waiting after 0.5 s" bash -c "! grep -q 'going on from' fifo.out"
check "--stop-before (fifo) printed pid $pid is alive while held" kill -0 "${pid:-0}"
echo >&3
exec 3>&-
rc=0
wait "$weir_pid" || rc=$?
weir_pid=""
check "--stop-before (fifo) exit 0 after Enter" test "$rc" = 0
check "--stop-before (fifo) went on at Enter" grep -q "^weir replay: Enter; going on from event #$k" fifo.out
check "--stop-before (fifo) identical" identical fifo.out
check "--stop-before (fifo) connector gone afterwards" bash -c "! kill -0 ${pid:-0} 2>/dev/null"

# 5. Ctrl-C while held: exit 4, the connector killed and reaped.
"$weir" replay run.jsonl --stop-before "$k" <in.fifo >sig.out 2>&1 &
weir_pid=$!
exec 3>in.fifo
held=no
for _ in $(seq 600); do
  if grep -q "weir waits for Enter" sig.out; then held=yes; break; fi
  sleep 0.1
done
check "SIGINT while held: held first" test "$held" = yes
pid=$(sed -n 's/^  reader 0: pid \([0-9]*\) .*/\1/p' sig.out)
kill -INT "$weir_pid"
rc=0
wait "$weir_pid" || rc=$?
weir_pid=""
exec 3>&-
check "SIGINT while held: exit 4" test "$rc" = 4
check "SIGINT while held: says so" grep -q "interrupted while holding before event #$k" sig.out
check "SIGINT while held: connector $pid gone" bash -c "! kill -0 ${pid:-0} 2>/dev/null"

# 6. Bad values: exit 2, clear message.
bad() {  # NAME EXPECTED_TEXT ARGS...
  local name=$1 text=$2; shift 2
  local rc=0
  "$weir" replay run.jsonl "$@" </dev/null >bad.out 2>&1 || rc=$?
  check "$name: exit 2" test "$rc" = 2
  check "$name: says '$text'" grep -qF -- "$text" bad.out
}
bad "--stop-before 0" "--stop-before 0: expected an event number of 1 or more" --stop-before 0
bad "--stop-before past the end" "--stop-before $events: run.jsonl has no event #$events; expected an event number from 1 to $((events - 1))" --stop-before "$events"
bad "--wrap missing" "--wrap: '/nonexistent/debugger' is not an executable file" --wrap '/nonexistent/debugger --args'
bad "--wrap unterminated quote" "--wrap column 5: unterminated '" --wrap "gdb '-q"

exit $((failures > 0))
