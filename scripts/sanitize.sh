#!/usr/bin/env bash
# Builds weir once more with clang, AddressSanitizer, UndefinedBehaviorSanitizer
# and libFuzzer instrumentation into build-asan/, runs the test suite there
# (all but the four longest end-to-end tests), then fuzzes each input parser
# for WEIR_FUZZ_SECONDS (default 30).
# Part of scripts/test.sh (CI); run alone after scripts/setup-deps.sh.
set -euo pipefail
cd "$(dirname "$0")/.."
build=${WEIR_ASAN_BUILD_DIR:-build-asan}
seconds=${WEIR_FUZZ_SECONDS:-30}

# A report is a failure; leaks too. Stack traces need llvm-symbolizer.
export ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=1:abort_on_error=1:strict_string_checks=1:detect_stack_use_after_return=1}
export UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}
export LSAN_OPTIONS=${LSAN_OPTIONS:-suppressions=$PWD/tests/sanitizer/lsan.supp:print_suppressions=0}

cmake -S . -B "$build" -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo \
  -DCMAKE_CXX_COMPILER=clang++ -DWEIR_SANITIZE=ON -DWEIR_FUZZ=ON "$@" >/dev/null
ninja -C "$build" -j"$(nproc)"
# The four longest end-to-end tests repeat, over hundreds of seeds, code paths
# the others already cover under the sanitizers, and take ten times longer
# there; WEIR_ASAN_ALL=1 runs them too. install_out_of_tree is never run here:
# it builds a connector project against the installed libraries, which under
# the sanitizers would need that project built with them too.
skip=(-E '^(determinism|detection_matrix|certify_end_to_end|python_adapter_reference|install_out_of_tree)$')
if [[ ${WEIR_ASAN_ALL:-0} == 1 ]]; then skip=(-E '^install_out_of_tree$'); fi
ctest --test-dir "$build" --output-on-failure -j"$(nproc)" "${skip[@]}"
bash scripts/fuzz.sh "$build" "$seconds"
