#!/usr/bin/env bash
# search_vs_blind.sh: for every mutant of the queue zoo, runs `weir search`
# guided by coverage and with --blind seeds on the same scenarios and budget,
# several search seeds each, and prints the median number of runs to the first
# detection (a miss counts as budget+1) and how many searches found it.
#
# Then the deep mutants (mutant_deep_*: two faults must meet in one run) on
# the rare-mixes scenario alone, with a budget of DEEP_BUDGET runs.
#
# Usage: bash bench/search_vs_blind.sh [BUDGET [REPEATS [DEEP_BUDGET]]]   (default 50, 3, 220)
# Needs: weir, reference_connector and the mutant_* connectors built in build/.
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
BUILD=${WEIR_BUILD_DIR:-$ROOT/build}
BUDGET=${1:-50}
REPEATS=${2:-3}
DEEP_BUDGET=${3:-220}
WEIR=$BUILD/harness/weir
BIN=$BUILD/fixtures/connectors
[[ -x $WEIR ]] || { echo "search_vs_blind.sh: $WEIR not built" >&2; exit 2; }
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
scen=()
for s in "$ROOT"/fixtures/scenarios/*.scenario; do
  b=$(basename "$s")
  [[ $b == log_* || $b == readers_* ]] && continue
  scen+=(--scenario "$s")
done
median() { sort -n | awk '{ a[NR] = $1 } END { print (NR % 2) ? a[(NR + 1) / 2] : (a[NR / 2] + a[NR / 2 + 1]) / 2 }'; }
# compare NAME BUDGET SCENARIO-FLAGS…: one row, guided against blind.
compare() {
  local m=$1 budget=$2 mode r out at found name
  shift 2
  name=$(basename "$m")
  for mode in guided blind; do
    : >"$WORK/$mode"
    found=0
    for ((r = 1; r <= REPEATS; r++)); do
      flag=(); [[ $mode == blind ]] && flag=(--blind)
      out=$("$WEIR" search "$@" "${flag[@]}" --budget "$budget" --search-seed "$r" --first-seed $((r * 1000)) \
              --out "$WORK/out" --progress none --max-seconds 0 -- "$m" 2>&1 || true)
      at=$(sed -n 's/^FOUND .* at run \([0-9]*\) .*/\1/p' <<<"$out" | head -n 1)
      if [[ -n $at ]]; then echo "$at" >>"$WORK/$mode"; found=$((found + 1)); else echo $((budget + 1)) >>"$WORK/$mode"; fi
    done
    eval "${mode}_med=\$(median <\"\$WORK/\$mode\")"
    eval "${mode}_found=$found"
  done
  printf '%-42s %14s %14s %5s/%-2s %5s/%-2s\n' "$name" "$guided_med" "$blind_med" "$guided_found" "$REPEATS" "$blind_found" "$REPEATS"
}
echo "queue zoo, every queue scenario, budget $BUDGET runs, $REPEATS searches each (a miss counts as budget+1):"
printf '%-42s %14s %14s %8s %8s\n' mutant "guided median" "blind median" "guided" "blind"
for m in "$BIN"/mutant_*; do
  name=$(basename "$m")
  [[ $name == mutant_log_* || $name == mutant_readers_* || $name == mutant_wall_clock || $name == mutant_deep_* ]] && continue
  compare "$m" "$BUDGET" "${scen[@]}"
done
echo
echo "deep mutants, rare_mixes_relay_huts alone, budget $DEEP_BUDGET runs:"
printf '%-42s %14s %14s %8s %8s\n' mutant "guided median" "blind median" "guided" "blind"
for m in "$BIN"/mutant_deep_*; do
  compare "$m" "$DEEP_BUDGET" --scenario "$ROOT/fixtures/scenarios/rare_mixes_relay_huts.scenario"
done
