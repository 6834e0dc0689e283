#!/usr/bin/env bash
# Configures and builds weir into build/ (Release with debug info, Ninja).
# Extra arguments go to CMake, e.g. -DWEIR_SANITIZE=ON.
set -euo pipefail
cd "$(dirname "$0")/.."
BUILD_DIR=${WEIR_BUILD_DIR:-build}
cmake -S . -B "$BUILD_DIR" -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo "$@" >/dev/null
ninja -C "$BUILD_DIR" -j"$(nproc)"
