#!/usr/bin/env bash
# Sets weir up on a fresh Debian 12 machine and runs its main job on the
# bundled example: certify the reference connector on the quick suite (passes,
# certificate verified), then a broken one that acks on pull (refused).
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup-deps.sh
bash scripts/build.sh
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

echo
echo "== certify a connector that acks on pull (expected: FAILED ack-before-commit, exit 1)"
set +e
"$WEIR" certify --suite fixtures/suites/quick.suite --connector "$MUTANT" --max-failures 3 \
  --junit "$OUT/mutant.xml" --certificate "$OUT/mutant.cert"
rc=$?
set -e
if [[ $rc -ne 1 ]]; then echo "quickstart: expected exit 1 from the mutant, got $rc" >&2; exit 1; fi
echo
echo "== one failing run, replayed with its evidence"
set +e
"$WEIR" run --scenario fixtures/scenarios/steady_parcel_scanners.scenario --seed 7 --connector "$MUTANT" | head -40
set -e
echo
echo "quickstart: weir certified the reference connector and refused the broken one (exit $rc)."
echo "Reports: $OUT/"
