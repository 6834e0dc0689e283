#!/usr/bin/env bash
# shrink.sh (ctest, label e2e): weir shrink over gRPC with real connector
# processes.
#   - a failing run ends with next-step hints and, last, its replay line;
#   - shrinking its trace writes a plan that weir lint and weir run --plan
#     accept, that fails the same invariant, and from which no single decision
#     can be removed while still failing; the printed replay line, pasted into
#     a shell, fails the same way;
#   - the flags form (--scenario --seed -- CMD) with a tiny rerun budget still
#     writes a failing plan and says it is not proven 1-minimal;
#   - a nondeterministic connector (the wall-clock mutant, made to fail
#     watermark-stall) is reported as such, exit 1, and no plan is written;
#   - bad input exits 2 and leaves no plan behind.
# Usage: shrink.sh WEIR CONNECTOR_BIN_DIR SCENARIO_DIR
set -euo pipefail
weir="${1:?weir}"
bin="${2:?connector bin dir}"
scenarios="${3:?scenario dir}"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
fail() { echo "FAIL: $*" >&2; exit 1; }
cd "$tmp"

mutant="$bin/mutant_no_dedup_in_checkpoint"
scenario="$scenarios/crash_storm_weather_buoys.scenario"
inv=duplicate-output

# 1. The failing run: hints, then the replay line last.
rc=0
"$weir" run --scenario "$scenario" --seed 1 --connector "$mutant" --trace run.jsonl \
  --save-plan original.plan >run.out 2>&1 || rc=$?
[[ $rc == 1 ]] || { cat run.out >&2; fail "mutant run: exit $rc, expected 1"; }
grep -q "^next: [^ ]*weir replay run.jsonl" run.out || fail "failing run shows no 'weir replay' hint"
grep -q "weir shrink run.jsonl --out" run.out || fail "failing run shows no 'weir shrink' hint"
tail -n 1 run.out | grep -q '^replay: [^ ]*weir run --scenario' || fail "failing run does not end with its replay line"
rc=0
"$weir" run --scenario "$scenario" --seed 1 --connector "$mutant" >notrace.out 2>&1 || rc=$?
grep -q "^next: [^ ]*weir shrink --scenario .* --seed 1 .*--out minimal.plan" notrace.out ||
  fail "failing run without a trace shows no 'weir shrink --scenario' hint"
tail -n 1 notrace.out | grep -q '^replay: [^ ]*weir run --scenario' || fail "run without trace does not end with replay"
before="$(grep -c '^  site: ' original.plan)"
[[ "$before" -gt 0 ]] || fail "the original run applied no faults; pick a run with faults"

# 2. Shrink the trace.
rc=0
"$weir" shrink run.jsonl --out min.plan --trace min.jsonl --progress lines >shrink.out 2>&1 || rc=$?
cat shrink.out
[[ $rc == 0 ]] || fail "weir shrink: exit $rc, expected 0"
grep -q "^target     $inv" shrink.out || fail "shrink does not name the target $inv"
grep -q "^before     $before decisions, [0-9]* events, [0-9]* steps" shrink.out || fail "no 'before' line with $before decisions"
after="$(sed -n 's/^after      \([0-9]*\) decisions\{0,1\}, [0-9]* events, [0-9]* steps.*/\1/p' shrink.out)"
[[ -n "$after" ]] || fail "no 'after' line"
[[ "$after" -le "$before" ]] || fail "minimal plan has $after decisions, more than the original $before"
grep -Eq '^reruns     [0-9]+ ' shrink.out || fail "no rerun count"
grep -q "^1-minimal: $inv still fails" shrink.out || fail "not reported 1-minimal"
[[ -f min.plan && -f min.jsonl ]] || fail "no plan or trace written"
[[ "$(grep -c '^  site: ' min.plan)" == "$after" ]] || fail "min.plan does not hold $after decisions"
"$weir" lint min.plan >/dev/null || fail "weir lint rejects the minimal plan"

# The minimal plan fails the same invariant under weir run --plan …
rc=0
"$weir" run --scenario "$scenario" --seed 1 --plan min.plan --connector "$mutant" >min.out 2>&1 || rc=$?
[[ $rc == 1 ]] || { cat min.out >&2; fail "run --plan min.plan: exit $rc, expected 1"; }
grep -q "^FAILED $inv" min.out || { cat min.out >&2; fail "run --plan min.plan does not fail $inv"; }
# … and so does the printed replay line, pasted into a shell as it is.
line="$(sed -n 's/^replay: //p' shrink.out)"
[[ "$line" == *"--plan min.plan"* ]] || fail "shrink's replay line does not name --plan min.plan"
rc=0
eval "$line" >pasted.out 2>&1 || rc=$?
[[ $rc == 1 ]] && grep -q "^FAILED $inv" pasted.out || fail "the pasted replay line does not fail $inv"
"$weir" replay min.jsonl >/dev/null || fail "the minimal run's trace does not replay identically"

# 1-minimality from outside: without any one decision, the invariant holds.
for ((i = 1; i <= after; i++)); do
  awk -v skip="$i" '/^decisions \{/ { n++; drop = (n == skip) } !drop { print } /^\}/ { drop = 0 }' \
    min.plan >without.plan
  [[ "$(grep -c '^  site: ' without.plan)" == "$((after - 1))" ]] || fail "could not drop decision $i"
  rc=0
  "$weir" run --scenario "$scenario" --seed 1 --plan without.plan --connector "$mutant" >without.out 2>&1 || rc=$?
  grep -q "^FAILED $inv" without.out && fail "still fails $inv without decision $i: not 1-minimal"
  echo "ok   without decision $i of $after: $inv holds (exit $rc)"
done
echo "ok   $(basename "$mutant"): $before -> $after decisions, plan accepted by weir run --plan"

# 3. The flags form with a tiny budget.
rc=0
"$weir" shrink --scenario "$scenario" --seed 1 --max-reruns 2 --out budget.plan -- "$mutant" >budget.out 2>&1 || rc=$?
[[ $rc == 0 ]] || { cat budget.out >&2; fail "budgeted shrink: exit $rc, expected 0"; }
grep -q "^budget reached (--max-reruns 2" budget.out || { cat budget.out >&2; fail "no 'budget reached' line"; }
grep -q "^reruns     2 " budget.out || fail "budgeted shrink did not stop at 2 reruns"
rc=0
"$weir" run --scenario "$scenario" --seed 1 --plan budget.plan --connector "$mutant" >budget_run.out 2>&1 || rc=$?
grep -q "^FAILED $inv" budget_run.out || fail "the budgeted plan does not fail $inv"
echo "ok   --max-reruns 2 stops with a plan that still fails"

# 4. A nondeterministic connector: the wall-clock mutant, made to fail
#    watermark-stall by an idle timeout longer than the run.
wc=("$bin/mutant_wall_clock" --idle-timeout-ms 1000000)
idle="$scenarios/idle_watermark_beehive_scales.scenario"
rc=0
"$weir" run --scenario "$idle" --seed 1 --trace wc.jsonl -- "${wc[@]}" >wc.run 2>&1 || rc=$?
grep -q '^FAILED watermark-stall' wc.run || { cat wc.run >&2; fail "wall-clock mutant does not fail watermark-stall"; }
for form in trace flags; do
  rc=0
  if [[ $form == trace ]]; then
    "$weir" shrink wc.jsonl --out wc.plan >wc.out 2>&1 || rc=$?
  else
    "$weir" shrink --scenario "$idle" --seed 1 --out wc.plan -- "${wc[@]}" >wc.out 2>&1 || rc=$?
  fi
  [[ $rc == 1 ]] || { cat wc.out >&2; fail "shrink of the wall-clock mutant ($form): exit $rc, expected 1"; }
  grep -q '^NONDETERMINISTIC: .*digest.*nothing shrunk' wc.out || { cat wc.out >&2; fail "not reported nondeterministic ($form)"; }
  [[ ! -e wc.plan ]] || fail "a plan was written for a nondeterministic connector ($form)"
  echo "ok   wall-clock mutant ($form): $(grep -o '^NONDETERMINISTIC: [^;]*' wc.out)"
done

# 5. Bad input: exit 2, no plan.
bad() {  # NAME TEXT ARGS…
  local name="$1" text="$2"
  shift 2
  rc=0
  "$weir" shrink --out bad.plan "$@" >bad.out 2>&1 || rc=$?
  [[ $rc == 2 ]] || { cat bad.out >&2; fail "$name: exit $rc, expected 2"; }
  grep -q -- "$text" bad.out || { cat bad.out >&2; fail "$name: no '$text'"; }
  [[ ! -e bad.plan ]] || fail "$name: a plan was written"
  echo "ok   $name -> $(head -n 1 bad.out)"
}
bad "missing trace" "nope.jsonl: cannot open" nope.jsonl
bad "unknown invariant" "expected one of ack-before-commit" run.jsonl --invariant bogus
bad "invariant not failed" "did not fail lost-message" run.jsonl --invariant lost-message
bad "seed with a trace" "go with --scenario" run.jsonl --seed 3
bad "passing run" "nothing to shrink" --scenario "$scenario" --seed 1 -- "$bin/reference_connector"
bad "no seed" "needs --seed" --scenario "$scenario" -- "$mutant"
echo "PASSED: shrink"
