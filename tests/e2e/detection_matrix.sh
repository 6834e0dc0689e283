#!/usr/bin/env bash
# detection_matrix.sh (ctest, label e2e): runs scripts/detection_matrix.sh with a
# small seed budget. Fails if the reference connector fails any run, or if a
# mutant of fixtures/connectors/ is not caught with its expected invariant
# among the reasons (a mutant whose invariant the oracle does not check yet is
# reported as pending and does not fail).
# Usage: detection_matrix.sh SOURCE_DIR BUILD_DIR
set -euo pipefail
src="${1:?source dir}"
build="${2:?build dir}"
exec bash "$src/scripts/detection_matrix.sh" --build "$build" --seeds 2 --jobs 2
