#!/usr/bin/env bash
# Installs weir's dependencies from Debian 12 packages.
#   bash scripts/setup-deps.sh main    what building weir and certifying a connector needs
#   bash scripts/setup-deps.sh tests   that, plus what the tests need (the default):
#                                      GoogleTest, benchmarks, property tests, Go and Python's
#                                      gRPC, clang and LLVM for the sanitizer and fuzzing
#                                      builds, clang-format, a headless browser for the
#                                      HTML report checks
# Idempotent: packages already present are left alone; apt-get runs only when
# something is missing. Must run as root (or with sudo available).
set -euo pipefail

main_packages=(
  build-essential cmake ninja-build pkg-config git
  libgrpc++-dev protobuf-compiler-grpc libprotobuf-dev protobuf-compiler
  libboost-dev libcli11-dev libssl-dev
)
test_packages=(
  libgtest-dev libgmock-dev libbenchmark-dev librapidcheck-dev libxml2-utils
  chromium
  python3 python3-grpcio python3-protobuf python3-pytest
  golang-go golang-google-grpc-dev golang-google-protobuf-dev protoc-gen-go protoc-gen-go-grpc
  clang libclang-rt-14-dev llvm-14 clang-format-14
)

case ${1:-tests} in
  main) packages=("${main_packages[@]}") ;;
  tests) packages=("${main_packages[@]}" "${test_packages[@]}") ;;
  *)
    echo "setup-deps: '$1' is not a set; expected main or tests" >&2
    exit 2
    ;;
esac

missing=()
for p in "${packages[@]}"; do
  if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
    missing+=("$p")
  fi
done

if ((${#missing[@]} == 0)); then
  echo "setup-deps: all ${#packages[@]} packages present"
  exit 0
fi

echo "setup-deps: installing ${missing[*]}"
SUDO=""
if [[ $(id -u) -ne 0 ]]; then SUDO="sudo"; fi
export DEBIAN_FRONTEND=noninteractive
$SUDO apt-get update -qq
$SUDO apt-get install -y -qq --no-install-recommends "${missing[@]}"
