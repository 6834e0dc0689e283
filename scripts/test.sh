#!/usr/bin/env bash
# Installs what is missing, builds, and runs every test (unit, end-to-end,
# external references) with CTest; then builds again with sanitizers and
# libFuzzer and runs everything once more plus a short fuzzing pass
# (scripts/sanitize.sh; WEIR_SKIP_SANITIZE=1 skips that second half).
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup-deps.sh
bash scripts/build.sh
ctest --test-dir "${WEIR_BUILD_DIR:-build}" --output-on-failure -j"$(nproc)"
if [[ ${WEIR_SKIP_SANITIZE:-0} != 1 ]]; then
  bash scripts/sanitize.sh
fi
