#!/usr/bin/env bash
# search_vs_blind.sh: for every mutant of the queue zoo, runs `weir search`
# guided by coverage and with --blind seeds on the same scenarios and budget,
# several search seeds each, and prints the median number of runs to the first
# detection (a miss counts as budget+1) and how many searches found it.
#
# Usage: bash bench/search_vs_blind.sh [BUDGET [REPEATS]]   (default 50, 3)
# Needs: weir, reference_connector and the mutant_* connectors built in build/.
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
BUILD=${WEIR_BUILD_DIR:-$ROOT/build}
BUDGET=${1:-50}
REPEATS=${2:-3}
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
printf '%-36s %14s %14s %8s %8s\n' mutant "guided median" "blind median" "guided" "blind"
tg=0 tb=0
for m in "$BIN"/mutant_*; do
  name=$(basename "$m")
  [[ $name == mutant_log_* || $name == mutant_readers_* || $name == mutant_wall_clock ]] && continue
  for mode in guided blind; do
    : >"$WORK/$mode"
    found=0
    for ((r = 1; r <= REPEATS; r++)); do
      flag=(); [[ $mode == blind ]] && flag=(--blind)
      out=$("$WEIR" search "${scen[@]}" "${flag[@]}" --budget "$BUDGET" --search-seed "$r" --first-seed $((r * 1000)) \
              --out "$WORK/out" --progress none --max-seconds 0 -- "$m" 2>&1 || true)
      at=$(sed -n 's/^FOUND .* at run \([0-9]*\) .*/\1/p' <<<"$out" | head -n 1)
      if [[ -n $at ]]; then echo "$at" >>"$WORK/$mode"; found=$((found + 1)); else echo $((BUDGET + 1)) >>"$WORK/$mode"; fi
    done
    eval "${mode}_med=\$(median <\"\$WORK/\$mode\")"
    eval "${mode}_found=$found"
  done
  printf '%-36s %14s %14s %5s/%-2s %5s/%-2s\n' "$name" "$guided_med" "$blind_med" "$guided_found" "$REPEATS" "$blind_found" "$REPEATS"
done
