#!/usr/bin/env bash
# Fuzzes weir's input parsers with libFuzzer (a build configured with
# -DCMAKE_CXX_COMPILER=clang++ -DWEIR_FUZZ=ON, usually with -DWEIR_SANITIZE=ON).
#
#   scripts/fuzz.sh BUILD_DIR SECONDS   fuzz each target for SECONDS, seeded
#                                       with the bundled files
#   scripts/fuzz.sh BUILD_DIR 0         replay the seeds and tests/fuzz/regressions/
#                                       once each (the ctest fuzz_regressions)
#
# A crash leaves its input in BUILD_DIR/fuzz-artifacts/; copy it into
# tests/fuzz/regressions/<target>/ with the fix so it is replayed forever.
set -euo pipefail
cd "$(dirname "$0")/.."
src=$PWD
build=$(cd "$1" && pwd)
seconds=$2
export WEIR_SOURCE_DIR=$src

work=$(mktemp -d "${TMPDIR:-/tmp}/weir-fuzz.XXXXXX")
trap 'rm -rf "$work"' EXIT
artifacts=$build/fuzz-artifacts
mkdir -p "$artifacts"

# Seeds: the bundled files of each kind; a fault plan and traces from real runs.
mkdir -p "$work/seeds/scenario" "$work/seeds/plan" "$work/seeds/profile" "$work/seeds/suite" "$work/seeds/trace"
cp fixtures/scenarios/*.scenario tests/e2e/*.scenario "$work/seeds/scenario/"
cp fixtures/profiles/*.profile "$work/seeds/profile/"
cp fixtures/suites/*.suite tests/e2e/tiny.suite "$work/seeds/suite/"
weir=$build/harness/weir
connector=$build/fixtures/connectors/reference_connector
for s in steady_parcel_scanners crash_storm_weather_buoys; do
  "$weir" run --scenario "fixtures/scenarios/$s.scenario" --seed 3 --connector "$connector" \
    --trace "$work/seeds/trace/$s.jsonl" --save-plan "$work/seeds/plan/$s.plan" >/dev/null
done

status=0
for target in scenario plan profile suite trace; do
  bin=$build/tests/fuzz/fuzz_$target
  regressions=$src/tests/fuzz/regressions/$target
  dirs=("$work/seeds/$target")
  [[ -d $regressions ]] && dirs+=("$regressions")
  if [[ $seconds == 0 ]]; then
    args=(-runs=0)
  else
    mkdir -p "$work/corpus/$target"
    dirs=("$work/corpus/$target" "${dirs[@]}")
    # Trace lines go through a JSON parser: short inputs keep it near 1k execs/s.
    max_len=65536
    [[ $target == trace ]] && max_len=8192
    args=(-max_total_time="$seconds" -max_len=$max_len -timeout=10 -rss_limit_mb=2048 -print_final_stats=1)
  fi
  if "$bin" "${args[@]}" -artifact_prefix="$artifacts/$target-" "${dirs[@]}" \
      >"$work/$target.log" 2>&1; then
    echo "fuzz_$target: ok ($(grep -Eo '#[0-9]+ +DONE|stat::number_of_executed_units: [0-9]+' "$work/$target.log" | tail -1))"
  else
    echo "fuzz_$target: FAILED; input saved in $artifacts/, log follows"
    tail -40 "$work/$target.log"
    status=1
  fi
done
exit $status
