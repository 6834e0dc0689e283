#!/usr/bin/env bash
# install_out_of_tree.sh SRC BUILD VERSION: weir used from a connector's own
# repository, as examples/out-of-tree shows. Installs BUILD to a fresh prefix;
# checks the installed command (version, bundled files found beside it) and
# that nothing installed points back into the source or build tree; copies
# the example out of the source tree and builds it against that prefix alone
# (its compile commands and the headers it read name no path of weir's trees,
# and do name the prefix); runs the example's tests (the in-process
# GoogleTest on the installed quick suite, and certify over gRPC); certifies
# its Python connector with the installed Python adapter; and, when Go was
# built (GO, the go command, and GO_LIBRARIES, Debian's GOPATH entry), that
# the installed Go adapter compiles from the prefix alone.
# usage: install_out_of_tree.sh SRC BUILD VERSION [GO GO_LIBRARIES]
set -euo pipefail
SRC=$(cd "$1" && pwd -P)
BUILD=$(cd "$2" && pwd -P)
VERSION=$3
GO=${4:-}
GO_LIBRARIES=${5:-}
tmp=$(mktemp -d)
#trap 'rm -rf "$tmp"' EXIT
tmp=$(cd "$tmp" && pwd -P)
P=$tmp/prefix
fail() { echo "FAIL: $*" >&2; exit 1; }
# Paths into weir's trees, as a grep pattern list.
trees=(-e "$SRC" -e "$BUILD")

echo "== install to a fresh prefix"
cmake --install "$BUILD" --prefix "$P" >/dev/null
for f in bin/weir lib/cmake/weir/weirConfig.cmake include/weir/adapter/source.h \
    include/weir/v1/connector.grpc.pb.h include/weir/harness/inprocess/in_process_port.h \
    share/weir/suites/quick.suite share/weir/proto/weir/v1/connector.proto \
    share/weir/proto/weir/v1/status_details.proto \
    lib/python3/dist-packages/weir/adapter/__init__.py \
    lib/python3/dist-packages/weir/v1/connector_pb2_grpc.py \
    lib/python3/dist-packages/weir/v1/status_details_pb2.py; do
  [[ -f $P/$f ]] || fail "the install has no $f"
done
if hits=$(grep -rIl "${trees[@]}" "$P"); then
  fail "installed files point into weir's source or build tree: $hits"
fi

echo "== the installed command"
got=$("$P/bin/weir" --version)
[[ $got == "weir $VERSION" ]] || fail "weir --version says '$got', expected 'weir $VERSION'"
help=$("$P/bin/weir" --help)
grep -qxF "Bundled scenarios, profiles and suites: $P/share/weir" <<<"$help" ||
  fail "weir --help does not name $P/share/weir as its bundled directory"

echo "== the example, built against the prefix alone"
cp -r "$SRC/examples/out-of-tree" "$tmp/src"
# No compiler launcher: the headers' paths reach the dependency list as given.
cmake -S "$tmp/src" -B "$tmp/build" -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo \
  -DCMAKE_PREFIX_PATH="$P" >/dev/null
grep -qxF "weir_DIR:PATH=$P/lib/cmake/weir" "$tmp/build/CMakeCache.txt" ||
  fail "find_package(weir) did not find the prefix's package"
ninja -C "$tmp/build" -j1 >/dev/null
ninja -C "$tmp/build" -t deps > "$tmp/deps.txt"
grep -qF "$P/include/weir/harness/inprocess/in_process_port.h" "$tmp/deps.txt" ||
  fail "the example's test did not read the installed in-process header"
grep -qF "$P/include" "$tmp/build/compile_commands.json" ||
  fail "compile_commands.json does not name the prefix's include directory"
if hits=$(grep -rIl "${trees[@]}" "$tmp/build" "$tmp/deps.txt"); then
  fail "the example's build points into weir's source or build tree: $hits"
fi

echo "== the example's tests (in-process, then certify over gRPC)"
ctest --test-dir "$tmp/build" --output-on-failure

echo "== the Python connector on the installed adapter"
export PYTHONPATH=$P/lib/python3/dist-packages
where=$(cd "$tmp" && /usr/bin/python3 -c 'import weir.adapter; print(weir.adapter.__file__)')
[[ $where == "$P/"* ]] || fail "weir.adapter imported from $where, not from the prefix"
(cd "$tmp" && "$P/bin/weir" certify --suite quick --jobs 2 --progress none \
  --connector "$tmp/src/python/buoy_connector.py") > "$tmp/python.txt" ||
  { cat "$tmp/python.txt"; fail "the Python buoy connector was not certified"; }
tail -n 3 "$tmp/python.txt"

if [[ -n $GO ]]; then
  echo "== the Go adapter from the prefix"
  for f in adapter/serve.go adapter/weirtest/weirtest.go v1/connector.pb.go v1/connector_grpc.pb.go; do
    [[ -f $P/share/weir/go/src/weir/$f ]] || fail "the install has no share/weir/go/src/weir/$f"
  done
  # GOPATH mode against the prefix and Debian's libraries only; nothing downloaded.
  (cd "$tmp" && env GO111MODULE=off GOPROXY=off GOFLAGS=-buildvcs=false GOCACHE="$tmp/gocache" \
    GOPATH="$P/share/weir/go:$GO_LIBRARIES" "$GO" vet weir/adapter weir/adapter/weirtest) ||
    fail "the installed Go adapter does not build from the prefix"
fi
echo "install_out_of_tree: PASS"
