#!/usr/bin/env bash
# Sets weir up on a fresh Debian 12 machine and runs its main job on the
# bundled example: the reference connector, then a broken one (ack-on-pull),
# against the steady parcel-scanner scenario.
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup-deps.sh
bash scripts/build.sh
STEADY=fixtures/scenarios/steady_parcel_scanners.scenario
echo
echo "== the reference connector (expected: PASSED, exit 0)"
build/harness/weir run --scenario "$STEADY" --seed 7 --connector build/fixtures/connectors/reference_connector
echo
echo "== a connector that acks on pull (expected: FAILED ack-before-commit, exit 1)"
set +e
build/harness/weir run --scenario "$STEADY" --seed 7 --connector build/fixtures/connectors/mutant_ack_on_pull
rc=$?
set -e
if [[ $rc -ne 1 ]]; then echo "quickstart: expected exit 1 from the mutant, got $rc" >&2; exit 1; fi
echo
echo "quickstart: weir caught the broken connector (exit $rc), as it should."
