#!/usr/bin/env bash
# detection_matrix.sh: runs each reference connector and every mutant of the
# zoo (fixtures/connectors/mutant_*.cc) over the bundled scenarios of its
# broker shape with a fixed seed budget and prints one detection matrix per
# shape: per mutant the invariant expected to catch it, whether it was caught
# with it, the runs up to the first such detection (scenario, seed) and every
# invariant seen failing.
#   queue  reference_connector, mutant_*.cc but mutant_log_*, mutant_readers_*
#          and mutant_deep_*, scenarios but log_*
#   deep   mutant_deep_*: bugs that need two faults in one run; each must be
#          found by weir search on rare_mixes_relay_huts within --deep-budget
#          runs (blind seeds shown beside it for comparison)
#   log    log_reference_connector, mutant_log_*.cc, scenarios log_*
#   readers  log_reference_connector, mutant_readers_*.cc, scenarios readers_* with a
#          log { } block (a readers_* queue scenario runs in the queue matrix)
#
# Usage: scripts/detection_matrix.sh [--build DIR] [--seeds N] [--jobs N]
#                                    [--shape queue|log|readers|all] [--scenarios 'GLOB'] [--keep DIR]
#   --seeds N     seeds 1..N per (connector, scenario)          (default 5)
#   --jobs N      runs in parallel                              (default 2)
#   --shape S     which matrices                                (default all)
#   --scenarios   scenario files, each run in its shape's matrix (default fixtures/scenarios/*.scenario)
#   --keep DIR    keep every run's output in DIR
#   --deep-budget N  runs for each deep mutant's search              (default 220)
# Exit code: 0 when each reference passed every run and every mutant failed at
# least one run with its expected invariant among the reasons; 1 otherwise; 2 on
# bad usage. A mutant whose expected invariant the oracle does not check yet
# (absent from the verdict table) is shown as "pending" and does not fail.
set -euo pipefail

root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
build="$root/build"
seeds=5
jobs=2
scenario_glob="$root/fixtures/scenarios/*.scenario"
shape=all
keep=""
deep_budget=220
while [[ $# -gt 0 ]]; do
  case "$1" in
    --build) build="$2"; shift 2 ;;
    --seeds) seeds="$2"; shift 2 ;;
    --jobs) jobs="$2"; shift 2 ;;
    --scenarios) scenario_glob="$2"; shift 2 ;;
    --shape) shape="$2"; shift 2 ;;
    --keep) keep="$2"; shift 2 ;;
    --deep-budget) deep_budget="$2"; shift 2 ;;
    *) echo "detection_matrix.sh: unknown argument '$1'" >&2; exit 2 ;;
  esac
done
[[ "$seeds" =~ ^[1-9][0-9]*$ ]] || { echo "detection_matrix.sh: --seeds needs a positive count" >&2; exit 2; }
[[ "$shape" =~ ^(queue|log|readers|all)$ ]] || { echo "detection_matrix.sh: --shape is queue, log, readers or all" >&2; exit 2; }
[[ "$deep_budget" =~ ^[1-9][0-9]*$ ]] || { echo "detection_matrix.sh: --deep-budget needs a positive count" >&2; exit 2; }

weir="$build/harness/weir"
bin="$build/fixtures/connectors"
[[ -x "$weir" ]] || { echo "detection_matrix.sh: $weir not built" >&2; exit 2; }

# Mutant -> the invariant expected to catch it (from each file's top comment).
expected_of() {
  sed -n 's/^\/\/ Expected to be caught by: \([a-z-]*\).*/\1/p' \
    "$root/fixtures/connectors/$1.cc" | head -n 1
}

# The connectors and scenarios of each shape.
queue_mutants=()
deep_mutants=()
log_mutants=()
readers_mutants=()
for f in "$root"/fixtures/connectors/mutant_*.cc; do
  m="$(basename "$f" .cc)"
  [[ -x "$bin/$m" ]] || { echo "detection_matrix.sh: $bin/$m not built" >&2; exit 2; }
  if [[ "$m" == mutant_deep_* ]]; then deep_mutants+=("$m");
  elif [[ "$m" == mutant_log_* ]]; then log_mutants+=("$m");
  elif [[ "$m" == mutant_readers_* ]]; then readers_mutants+=("$m");
  else queue_mutants+=("$m"); fi
done
queue_scenarios=()
log_scenarios=()
readers_scenarios=()
# shellcheck disable=SC2206
for s in $scenario_glob; do
  [[ -f "$s" ]] || continue
  if [[ "$(basename "$s")" == log_* ]]; then log_scenarios+=("$s");
  elif [[ "$(basename "$s")" == readers_* ]] && grep -q '^log *{' "$s"; then readers_scenarios+=("$s");
  else queue_scenarios+=("$s"); fi
done
shapes=()
[[ "$shape" =~ ^(queue|all)$ && ${#queue_scenarios[@]} -gt 0 ]] && shapes+=(queue)
[[ "$shape" =~ ^(log|all)$ && ${#log_scenarios[@]} -gt 0 ]] && shapes+=(log)
[[ "$shape" =~ ^(readers|all)$ && ${#readers_scenarios[@]} -gt 0 && ${#readers_mutants[@]} -gt 0 ]] && shapes+=(readers)
[[ ${#shapes[@]} -gt 0 ]] || { echo "detection_matrix.sh: no scenario of the chosen shape" >&2; exit 2; }
for r in reference_connector log_reference_connector; do
  [[ -x "$bin/$r" ]] || { echo "detection_matrix.sh: $bin/$r not built" >&2; exit 2; }
done

out="${keep:-$(mktemp -d)}"
mkdir -p "$out"
[[ -n "$keep" ]] || trap 'rm -rf "$out"' EXIT

# One job line per run: connector scenario seed (scenario-major, then seed).
jobs_file="$out/jobs"
: >"$jobs_file"
add_jobs() {  # add_jobs SHAPE
  local -n ms="${1}_mutants" ss="${1}_scenarios"
  local ref=reference_connector c s n
  [[ "$1" != queue ]] && ref=log_reference_connector
  for c in "$ref" "${ms[@]}"; do
    for s in "${ss[@]}"; do
      for ((n = 1; n <= seeds; n++)); do
        echo "$c $s $n" >>"$jobs_file"
      done
    done
  done
}
for sh in "${shapes[@]}"; do add_jobs "$sh"; done

run_one() {
  local c="$1" s="$2" n="$3"
  local tag
  tag="$c.$(basename "$s" .scenario).$n"
  local rc=0
  timeout 300 "$WEIR" run --scenario "$s" --seed "$n" --connector "$BIN/$c" >"$OUT/$tag.out" 2>&1 || rc=$?
  local failed
  failed="$(sed -n 's/^FAILED \([a-z-]*\).*/\1/p' "$OUT/$tag.out" | sort -u | tr '\n' ',' | sed 's/,$//')"
  echo "$c $s $n $rc ${failed:--}" >"$OUT/$tag.result"
}
export -f run_one
export WEIR="$weir" BIN="$bin" OUT="$out"
xargs -P "$jobs" -L 1 bash -c 'run_one "$@"' _ <"$jobs_file"

result_of() { cat "$out/$1.$(basename "$2" .scenario).$3.result"; }

status=0
# matrix SHAPE: prints the matrix of one shape; sets status=1 on a failure.
matrix() {
  local -n mutants="${1}_mutants" scenarios="${1}_scenarios"
  local ref=reference_connector
  [[ "$1" != queue ]] && ref=log_reference_connector
  # Invariants the oracle checks: the verdict table of the first reference run.
  local first_ref="$out/$ref.$(basename "${scenarios[0]}" .scenario).1.out"
  local known
  known="$(awk '/^invariant +verdict/{t=1; next} t && NF==0{t=0} t{print $1}' "$first_ref" | tr '\n' ' ')"

  local total=$(( ${#scenarios[@]} * seeds ))
  local ref_failures=0 ref_failed_runs="" s n rc failed
  for s in "${scenarios[@]}"; do
    for ((n = 1; n <= seeds; n++)); do
      read -r _ _ _ rc failed <<<"$(result_of "$ref" "$s" "$n")"
      if [[ "$rc" != 0 ]]; then
        ref_failures=$((ref_failures + 1))
        ref_failed_runs+="  $(basename "$s" .scenario) seed $n: exit $rc, failed: $failed"$'\n'
      fi
    done
  done

  echo "detection matrix ($1 shape): ${#scenarios[@]} scenarios x seeds 1..$seeds = $total runs per connector"
  echo
  if [[ $ref_failures -eq 0 ]]; then
    echo "$ref: passed all $total runs"
  else
    echo "$ref: FAILED $ref_failures of $total runs"
    printf '%s' "$ref_failed_runs"
    status=1
  fi
  echo
  [[ ${#mutants[@]} -gt 0 ]] || { echo "(no $1 mutants)"; echo; return; }
  printf '| %-30s | %-20s | %-8s | %-50s | %s |\n' mutant expected detected "first detection (runs, scenario, seed)" "invariants seen (runs failed)"
  printf '|%s|%s|%s|%s|%s|\n' "$(printf -- '-%.0s' {1..32})" "$(printf -- '-%.0s' {1..22})" \
    "$(printf -- '-%.0s' {1..10})" "$(printf -- '-%.0s' {1..52})" "$(printf -- '-%.0s' {1..31})"
  local m exp count first failed_runs seen_list detected x
  for m in "${mutants[@]}"; do
    exp="$(expected_of "$m")"
    count=0
    first=""
    failed_runs=0
    declare -A seen=()
    for s in "${scenarios[@]}"; do
      for ((n = 1; n <= seeds; n++)); do
        count=$((count + 1))
        read -r _ _ _ rc failed <<<"$(result_of "$m" "$s" "$n")"
        [[ "$rc" != 0 ]] && failed_runs=$((failed_runs + 1))
        if [[ "$failed" != "-" ]]; then
          IFS=',' read -ra names <<<"$failed"
          for x in "${names[@]}"; do seen[$x]=$(( ${seen[$x]:-0} + 1 )); done
        elif [[ "$rc" != 0 ]]; then
          seen["exit-$rc"]=$(( ${seen["exit-$rc"]:-0} + 1 ))
        fi
        if [[ -z "$first" && ",$failed," == *",$exp,"* ]]; then
          first="$count, $(basename "$s" .scenario), seed $n"
        fi
      done
    done
    seen_list=""
    for x in $(printf '%s\n' "${!seen[@]}" | sort); do seen_list+="$x (${seen[$x]}) "; done
    if [[ -n "$first" ]]; then
      detected=yes
    elif [[ " $known " != *" $exp "* ]]; then
      detected=pending
      first="oracle does not check $exp yet"
    else
      detected=NO
      first="-"
      status=1
    fi
    printf '| %-30s | %-20s | %-8s | %-50s | %s|\n' "$m" "$exp" "$detected" "$first" "${seen_list:-none }"
    unset seen
  done
  echo
}
for sh in "${shapes[@]}"; do matrix "$sh"; done

# Deep mutants: their bug needs two faults to meet in one run, which blind
# seeds rarely draw. Each must be found by weir search (guided by coverage)
# on the rare-mixes scenario within the budget; blind seeds with the same
# budget are shown beside it, for comparison only.
if [[ ${#deep_mutants[@]} -gt 0 && "$shape" =~ ^(queue|all)$ ]]; then
  rare="$root/fixtures/scenarios/rare_mixes_relay_huts.scenario"
  echo "deep mutants (weir search on $(basename "$rare" .scenario), budget $deep_budget runs, search seed 1):"
  echo
  printf '| %-42s | %-18s | %-22s | %s |\n' mutant expected "guided: found at run" "blind seeds: found at run"
  printf '|%s|%s|%s|%s|\n' "$(printf -- '-%.0s' {1..44})" "$(printf -- '-%.0s' {1..20})" \
    "$(printf -- '-%.0s' {1..24})" "$(printf -- '-%.0s' {1..27})"
  for m in "${deep_mutants[@]}"; do
    exp="$(expected_of "$m")"
    at=()
    for mode in guided blind; do
      flag=(); [[ $mode == blind ]] && flag=(--blind)
      "$weir" search --scenario "$rare" "${flag[@]}" --budget "$deep_budget" --search-seed 1 --out "$out/deep-$m-$mode" \
        --progress none --max-seconds 0 -- "$bin/$m" >"$out/deep-$m-$mode.out" 2>&1 || true
      found="$(sed -n "s/^FOUND \([a-z, -]*\) at run \([0-9]*\) .*/\1|\2/p" "$out/deep-$m-$mode.out" | head -n 1)"
      if [[ -n $found && ", ${found%%|*}," == *", $exp,"* ]]; then
        at+=("${found##*|}")
      else
        at+=("not found")
      fi
    done
    printf '| %-42s | %-18s | %-22s | %s |\n' "$m" "$exp" "${at[0]}" "${at[1]}"
    [[ ${at[0]} == "not found" ]] && status=1
  done
  echo
fi

if [[ $status -eq 0 ]]; then
  echo "PASSED: every reference passed every run; every mutant was caught by its expected invariant (or is pending)."
else
  echo "FAILED: see the rows above."
fi
exit "$status"
