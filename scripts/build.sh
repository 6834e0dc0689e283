#!/usr/bin/env bash
# Configures and builds weir into build/ (Release with debug info, Ninja).
# Extra arguments go to CMake, e.g. -DWEIR_SANITIZE=ON. WEIR_BUILD_TARGETS
# (space-separated) builds only those targets instead of everything.
set -euo pipefail
cd "$(dirname "$0")/.."
BUILD_DIR=${WEIR_BUILD_DIR:-build}
cmake -S . -B "$BUILD_DIR" -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo "$@" >/dev/null
read -r -a targets <<<"${WEIR_BUILD_TARGETS:-}"
ninja -C "$BUILD_DIR" -j"$(nproc)" "${targets[@]}"
