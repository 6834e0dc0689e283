#!/usr/bin/env bash
# End-to-end: determinism over the bundled scenarios: the same
# scenario, seed and connector binary must give the same trace, byte for byte.
# Every bundled scenario × seeds 1..SEEDS runs twice with the real reference
# connector of its shape over gRPC (a scenario with a log { } block:
# log_reference_connector, found beside REFERENCE_CONNECTOR); both runs of each (scenario, seed) must
# exit 0 and print the same `digest` line (SHA-256 over the trace's event lines).
#
# Usage: determinism.sh WEIR REFERENCE_CONNECTOR SCENARIO_DIR [SEEDS [JOBS]]
#   (defaults: 20 seeds, 2 runs at a time)
# Every scenario gets all seeds: each bundled run takes about a second of wall
# time now that the reference connector backs off while idle (it used to poll
# every 100 ms virtual, and long_idle_gaps_tide_gauges took ~25 s per run).
set -uo pipefail
WEIR=$1 REF=$2 SCEN=$3 SEEDS=${4:-20} JOBS=${5:-2}
LOG_REF="$(dirname "$REF")/log_reference_connector"
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
export WEIR REF LOG_REF WORK

# One run: "NAME SEED PASS RC DIGEST" on stdout, the whole output kept on failure.
run_one() {
  local scenario=$1 seed=$2 pass=$3 name out rc connector=$REF
  name=$(basename "$scenario" .scenario)
  grep -q '^log *{' "$scenario" && connector=$LOG_REF
  out="$WORK/$name.$seed.$pass.out"
  "$WEIR" run --scenario "$scenario" --seed "$seed" --connector "$connector" >"$out" 2>&1
  rc=$?
  echo "$name $seed $pass $rc $(awk '$1 == "digest" { print $2 }' "$out")"
}
export -f run_one

for s in "$SCEN"/*.scenario; do
  for ((seed = 1; seed <= SEEDS; ++seed)); do echo "$s $seed 1"; echo "$s $seed 2"; done
done | xargs -P "$JOBS" -n 3 bash -c 'run_one "$@"' _ >"$WORK/results"

failures=0
runs=$(wc -l <"$WORK/results")
echo "$runs runs"
# Every run exits 0 and prints a digest.
while read -r name seed pass rc digest; do
  if [[ $rc != 0 || -z $digest ]]; then
    echo "FAIL $name seed $seed pass $pass: exit $rc, digest '${digest}'"
    grep -E '^(replay|run|FAILED)' "$WORK/$name.$seed.$pass.out"
    failures=$((failures + 1))
  fi
done <"$WORK/results"
# Both passes of each (scenario, seed) agree.
sort -k1,1 -k2,2n -k3,3n "$WORK/results" | awk '
  $3 == 1 { d[$1 " " $2] = $5; next }
  { k = $1 " " $2; pairs++; if (!(k in d) || d[k] != $5) { print "FAIL " k ": digests differ: " d[k] " vs " $5; bad++ } }
  END { print pairs " (scenario, seed) pairs compared, " bad + 0 " differ"; exit bad > 0 }'
(($? != 0)) && failures=$((failures + 1))
((failures == 0)) && echo "ok   every run exited 0 and every pair of runs gave the same digest"
exit $((failures > 0))
