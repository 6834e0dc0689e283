#!/usr/bin/env bash
# layering.sh (ctest, label repo): the harness's folders keep their order.
# Each folder may include headers from its own folder and from folders below
# it, never from one above: the deterministic core (no I/O, no wall clock)
# stays free of the edge, and nothing but the commands includes a command's
# header. DEVELOPERS.md "Layout" gives the order and the libraries built from it.
#
# Usage: layering.sh SOURCE_DIR
# Exit 0 when every #include "harness/…" respects the order; otherwise prints
# file:line: what it includes and why that is not allowed, and exits 1.
set -uo pipefail
src=${1:?usage: layering.sh SOURCE_DIR}
cd "$src/harness" || exit 2

rank() {
  case $1 in
    core | trace | faults | broker | runtime | oracle | report | scenario | shrink | search) echo 0 ;;
    run) echo 1 ;;
    edge) echo 2 ;;
    replay) echo 3 ;;
    suite) echo 4 ;;
    inprocess) echo 5 ;;
    cli) echo 6 ;;
    *) echo -1 ;;
  esac
}

bad=0
checked=0
while IFS= read -r -d '' file; do
  folder=${file#./}
  folder=${folder%%/*}
  own=$(rank "$folder")
  if ((own < 0)); then
    echo "harness/${file#./}: folder '$folder' has no place in the order; add it to tests/repo/layering.sh and DEVELOPERS.md"
    bad=1
    continue
  fi
  while IFS=: read -r line text; do
    [[ -z $line ]] && continue
    target=${text#*\"harness/}
    target=${target%%/*}
    theirs=$(rank "$target")
    checked=$((checked + 1))
    if ((theirs < 0 || theirs > own)); then
      echo "harness/${file#./}:$line: includes harness/$target/ from harness/$folder/; a folder includes only its own and those before it in DEVELOPERS.md's Layout"
      bad=1
    fi
  done < <(grep -n '#include "harness/' "$file")
done < <(find . \( -name '*.h' -o -name '*.cc' \) -print0)

if ((bad)); then exit 1; fi
echo "layering: $checked includes keep the order"
