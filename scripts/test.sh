#!/usr/bin/env bash
# Installs what is missing, builds, and runs every test (unit, end-to-end,
# external references) with CTest; then builds again with sanitizers and
# libFuzzer and runs everything once more plus a short fuzzing pass
# (scripts/sanitize.sh; WEIR_SKIP_SANITIZE=1 skips that second half).
set -euo pipefail
cd "$(dirname "$0")/.."
phase_start=$SECONDS
phases=()
phase_done() {
  phases+=("$(printf '%-46s %5d s' "$1" $((SECONDS - phase_start)))")
  phase_start=$SECONDS
}
report_phases() {
  echo "== time per phase"
  printf '  %s\n' "${phases[@]}"
}
trap report_phases EXIT
bash scripts/setup-deps.sh tests
phase_done "install packages (tests)"
# Tests and benchmarks on, also when the quick start configured them off.
bash scripts/build.sh -DWEIR_BUILD_TESTS=ON -DWEIR_BUILD_BENCH=ON
phase_done "build (gcc)"
ctest --test-dir "${WEIR_BUILD_DIR:-build}" --output-on-failure -j"$(nproc)"
phase_done "ctest (gcc): unit, e2e, repo"
if [[ ${WEIR_SKIP_SANITIZE:-0} != 1 ]]; then
  bash scripts/sanitize.sh
  phase_done "sanitizer build, ctest and fuzzing (clang)"
fi
