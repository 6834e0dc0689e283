#!/usr/bin/env bash
# Installs weir's build and test dependencies from Debian 12 packages.
# Idempotent: packages already present are left alone; apt-get runs only when
# something is missing. Must run as root (or with sudo available).
set -euo pipefail

packages=(
  build-essential cmake ninja-build pkg-config git
  libgrpc++-dev protobuf-compiler-grpc libprotobuf-dev protobuf-compiler
  libboost-dev libcli11-dev libgtest-dev libgmock-dev libbenchmark-dev
  librapidcheck-dev libxml2-utils libssl-dev
  chromium
  python3 python3-grpcio python3-protobuf python3-pytest
  golang-go golang-google-grpc-dev golang-google-protobuf-dev protoc-gen-go protoc-gen-go-grpc
  clang libclang-rt-14-dev llvm-14
)

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
