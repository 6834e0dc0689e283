#!/usr/bin/env bash
# idle_hour.sh: how many virtual seconds weir simulates per wall second on a
# long, idle-heavy scenario, with the reference connector over gRPC: idle
# virtual time must cost next to nothing, so long runs stay cheap in CI.
#
# Usage: bench/idle_hour.sh [WEIR [CONNECTOR [SCENARIO [SEED]]]]
#   defaults: build/harness/weir, build/fixtures/connectors/reference_connector,
#   bench/idle_hour.scenario (> 1 virtual hour), seed 1.
#
# Virtual time is the end time on weir's `run` line ("… committed at Xs
# virtual; … N steps …"); wall time is measured around the whole `weir run`
# (so it includes starting and stopping the connector process). Prints one
# line of figures; exits non-zero if the run did not pass or the line is missing.
set -uo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
WEIR=${1:-$ROOT/build/harness/weir}
CONNECTOR=${2:-$ROOT/build/fixtures/connectors/reference_connector}
SCENARIO=${3:-$ROOT/bench/idle_hour.scenario}
SEED=${4:-1}
OUT=$(mktemp)
trap 'rm -f "$OUT"' EXIT

start=$(date +%s.%N)
"$WEIR" run --scenario "$SCENARIO" --seed "$SEED" --connector "$CONNECTOR" >"$OUT" 2>&1
rc=$?
end=$(date +%s.%N)
if ((rc != 0)); then
  echo "idle_hour: weir run exited $rc" >&2
  cat "$OUT" >&2
  exit 1
fi
run_line=$(grep -m1 '^run ' "$OUT")
virtual_s=$(sed -n 's/.* at \([0-9.]*\)s virtual.*/\1/p' <<<"$run_line")
steps=$(sed -n 's/.* \([0-9][0-9]*\) steps.*/\1/p' <<<"$run_line")
events=$(sed -n 's/.* \([0-9][0-9]*\) events.*/\1/p' <<<"$run_line")
if [[ -z $virtual_s || -z $steps ]]; then
  echo "idle_hour: no virtual end time or step count in: $run_line" >&2
  exit 1
fi
awk -v v="$virtual_s" -v s="$steps" -v e="${events:-0}" -v a="$start" -v b="$end" -v n="$(basename "$SCENARIO")" '
  BEGIN { w = b - a; if (w <= 0) w = 1e-9
          printf "%s: %.1f virtual s in %.2f wall s = %.1f virtual s per wall s; %d steps = %.0f steps/s; %d events = %.0f events/s\n",
                 n, v, w, v / w, s, s / w, e, e / w }'
