#!/usr/bin/env bash
# link_static_grpc.sh: a link launcher (CMake's RULE_LAUNCH_LINK, see
# weir_link_static_grpc() in cmake/weir.cmake). It runs the link command it is
# given with every shared library of the system's lib directory that has a
# static twin (gRPC, Protobuf, Abseil, upb, re2, c-ares, OpenSSL, zlib…) swapped
# for that .a, all of them in one --start-group/--end-group, plus static
# libstdc++ and libgcc; glibc stays shared. Why: a process that loads ~80 shared
# libraries spends most of its start-up in the dynamic loader, and weir starts
# a connector process for every incarnation (docs/performance.md, restart cost).
set -euo pipefail
LIBDIR=${WEIR_STATIC_LIBDIR:-/usr/lib/x86_64-linux-gnu}
args=()
group=()
for a in "$@"; do
  lib=
  if [[ $a =~ ^$LIBDIR/(lib[A-Za-z0-9_+.-]+)\.so(\.[0-9.]+)?$ ]]; then
    lib=${BASH_REMATCH[1]}
  elif [[ $a =~ ^-l([A-Za-z0-9_+-]+)$ ]]; then
    lib=lib${BASH_REMATCH[1]}
    case $lib in libdl | libm | librt | libpthread | libc | libatomic) lib= ;; esac
  fi
  if [[ -n $lib && -f $LIBDIR/$lib.a ]]; then
    group+=("$LIBDIR/$lib.a")
  else
    args+=("$a")
  fi
done
exec "${args[@]}" -Wl,--start-group "${group[@]}" -Wl,--end-group -static-libstdc++ -static-libgcc
