#!/usr/bin/env bash
# The Go adapter's own checks, none of which starts a process beyond the go
# tool: every Go file gofmt'd, `go vet` clean, and `go test` of the adapter
# (its tests serve sources over loopback and Unix sockets in the test
# process, and run the package Example).
# Usage (the go environment of adapters/go/CMakeLists.txt set by ctest):
#   go_adapter_unit.sh GO SOURCE_DIR
set -uo pipefail
GO=$1 SRC=$2
GOFMT=$(dirname "$(readlink -f "$GO")")/gofmt
failures=0
unformatted=$("$GOFMT" -l "$SRC/adapters/go" "$SRC/fixtures/connectors/go" "$SRC/bench/go")
if [ -n "$unformatted" ]; then
  echo "FAIL not gofmt'd (run gofmt -w):"; echo "$unformatted"; failures=$((failures + 1))
else
  echo "ok   every Go file is gofmt'd"
fi
# Import paths of every package ("..." does not follow the GOPATH's symlinks).
packages() {  # packages DIR IMPORT_PREFIX
  find "$1" -name '*.go' -printf '%h\n' | sort -u | sed "s|^$1|$2|"
}
pkgs=$(packages "$SRC/adapters/go" weir/adapter; packages "$SRC/fixtures/connectors/go" weir/fixtures/go;
  packages "$SRC/bench/go" weir/bench)
if "$GO" vet $pkgs; then
  echo "ok   go vet"
else
  echo "FAIL go vet"; failures=$((failures + 1))
fi
if "$GO" test -count=1 weir/adapter; then
  echo "ok   go test weir/adapter"
else
  echo "FAIL go test weir/adapter"; failures=$((failures + 1))
fi
[ $failures -eq 0 ]
