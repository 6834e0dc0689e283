#!/usr/bin/env bash
# self_contained.sh (ctest, label repo): the repository stands on its own.
# A reader of a clone has nothing but the clone, so no file may point to a
# path outside it (a sibling folder next to the checkout) or to a tracker
# entry by number: a comment says why, and docs/design.md and
# docs/references.md hold the design and the sources of check values.
#
# Usage: self_contained.sh SOURCE_DIR
# Checks the files git knows (tracked, and new ones not ignored), or every file
# outside build folders when SOURCE_DIR is not a git checkout. Exit 0 when no
# file matches; otherwise prints file:line:text of each match and exits 1.
#
# The patterns are assembled from pieces so that this file does not match them.
set -uo pipefail
src=${1:?usage: self_contained.sh SOURCE_DIR}
cd "$src" || exit 2

up='\.\.'
sibling="${up}/shared"
tracker='[Ii]ss''ue[[:space:]]*#?[0-9]'
pattern="${sibling}|${tracker}"

list_files() {
  if git rev-parse --is-inside-work-tree >/dev/null 2>&1; then
    git ls-files -z --cached --others --exclude-standard
  else
    find . -path './build*' -prune -o -path './.git' -prune -o -type f -print0
  fi
}

matches=$(list_files | xargs -0 -r grep -nIE -- "$pattern" 2>/dev/null)
if [[ -n "$matches" ]]; then
  echo "files that point outside the repository or cite a tracker number" \
       "(say why instead; the design is docs/design.md, sources docs/references.md):"
  printf '%s\n' "$matches"
  exit 1
fi
echo "no file points outside the repository or cites a tracker number"
