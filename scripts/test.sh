#!/usr/bin/env bash
# Installs what is missing, builds, and runs every test (unit, end-to-end,
# external references) with CTest.
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/setup-deps.sh
bash scripts/build.sh
ctest --test-dir "${WEIR_BUILD_DIR:-build}" --output-on-failure -j"$(nproc)"
