#!/usr/bin/env bash
# Sets weir up on a fresh Debian 12 machine and runs its main job on the
# bundled example: certify the reference connector on the quick suite (passes,
# certificate verified), then a broken one that acks on pull (refused).
# Installs and builds only what the main job needs (the test command adds the
# rest) and says how long each phase took.
set -euo pipefail
cd "$(dirname "$0")/.."
phase_start=$SECONDS
phases=()
phase_done() {
  phases+=("$(printf '%-40s %4d s' "$1" $((SECONDS - phase_start)))")
  phase_start=$SECONDS
}
bash scripts/setup-deps.sh main
phase_done "install packages (main)"
# Tests and benchmarks off here, and only the three programs the job runs;
# scripts/test.sh turns tests on again and builds everything.
WEIR_BUILD_TARGETS="weir reference_connector mutant_ack_on_pull" \
  bash scripts/build.sh -DWEIR_BUILD_TESTS=OFF -DWEIR_BUILD_BENCH=OFF
phase_done "build weir and two bundled connectors"
OUT=build/quickstart
mkdir -p "$OUT"
WEIR=build/harness/weir
REF=build/fixtures/connectors/reference_connector
MUTANT=build/fixtures/connectors/mutant_ack_on_pull

echo
echo "== certify the reference connector on the quick suite (expected: CERTIFIED, exit 0)"
"$WEIR" certify --suite fixtures/suites/quick.suite --connector "$REF" \
  --junit "$OUT/reference.xml" --json "$OUT/reference.json" --certificate "$OUT/reference.cert"
"$WEIR" verify "$OUT/reference.cert" --connector-binary "$REF"
phase_done "certify the reference connector"

echo
echo "== certify a connector that acks on pull (expected: FAILED ack-before-commit, exit 1)"
set +e
"$WEIR" certify --suite fixtures/suites/quick.suite --connector "$MUTANT" --max-failures 3 \
  --junit "$OUT/mutant.xml" --certificate "$OUT/mutant.cert"
rc=$?
set -e
if [[ $rc -ne 1 ]]; then echo "quickstart: expected exit 1 from the mutant, got $rc" >&2; exit 1; fi
phase_done "certify the broken connector"
echo
echo "== one failing run, replayed with its evidence"
set +e
"$WEIR" run --scenario fixtures/scenarios/steady_parcel_scanners.scenario --seed 7 --connector "$MUTANT" | head -40
set -e
phase_done "replay one failing run"
echo
echo "== time per phase"
printf '  %s\n' "${phases[@]}"
echo
echo "quickstart: weir certified the reference connector and refused the broken one (exit $rc)."
echo "Reports: $OUT/"
