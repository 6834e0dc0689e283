#!/usr/bin/env bash
# Formats weir's C++ sources with the committed .clang-format.
#   bash scripts/format.sh          rewrites every tracked .h/.cc in place
#   bash scripts/format.sh --check  changes nothing; lists the files that differ, exit 1 if any
set -euo pipefail
cd "$(dirname "$0")/.."
FORMAT=${CLANG_FORMAT:-}
if [[ -z $FORMAT ]]; then
  for candidate in clang-format-14 clang-format; do
    if command -v "$candidate" >/dev/null; then FORMAT=$candidate; break; fi
  done
fi
if [[ -z $FORMAT ]]; then
  echo "format: clang-format not found; install it with: apt-get install clang-format-14" >&2
  exit 2
fi
mapfile -t files < <(git ls-files '*.h' '*.cc')
if [[ ${1:-} == --check ]]; then
  # One clang-format for the whole tree; only when it finds a difference, one
  # per file to name them.
  if "$FORMAT" --dry-run --Werror "${files[@]}" >/dev/null 2>&1; then
    echo "format: ${#files[@]} files match .clang-format"
    exit 0
  fi
  bad=()
  for f in "${files[@]}"; do
    if ! "$FORMAT" --dry-run --Werror "$f" >/dev/null 2>&1; then bad+=("$f"); fi
  done
  if ((${#bad[@]} > 0)); then
    echo "format: ${#bad[@]} file(s) differ from .clang-format (run: bash scripts/format.sh):" >&2
    printf '  %s\n' "${bad[@]}" >&2
    exit 1
  fi
  echo "format: ${#files[@]} files match .clang-format"
else
  "$FORMAT" -i "${files[@]}"
fi
