# `cpack --config build/CPackConfig.cmake` (or `cmake --build build --target
# package`) builds weir_<version>_<arch>.deb: the install of cmake/install.cmake
# under /usr. Depends is computed by dpkg-shlibdeps from what the binaries
# link (with WEIR_STATIC_GRPC, gRPC and Protobuf are inside weir and only the C
# library remains). The Python adapter needs Debian's grpcio and protobuf, and
# building a connector against the CMake package needs the -dev packages:
# those are recommended and suggested, not required, since `weir` alone runs
# without them.
set(CPACK_GENERATOR DEB)
set(CPACK_PACKAGE_NAME weir)
set(CPACK_PACKAGE_VERSION ${PROJECT_VERSION})
set(CPACK_PACKAGE_DESCRIPTION_SUMMARY "deterministic test harness for stream source connectors")
set(CPACK_PACKAGE_DESCRIPTION
  "weir plays a scripted fake broker and a simulated pipeline runtime around a real
connector process, in virtual time and driven by a seed, checks every run with an
oracle and prints one command line that replays a failure exactly. Includes the
C++ and Python connector adapters, the in-process host for a connector's own
GoogleTest suite, a CMake package, and the bundled scenarios and suites.")
set(CPACK_PACKAGE_CONTACT "weir developers <weir@example.org>")
set(CPACK_PACKAGING_INSTALL_PREFIX /usr)
set(CPACK_STRIP_FILES ON)
set(CPACK_DEBIAN_FILE_NAME DEB-DEFAULT)
set(CPACK_DEBIAN_PACKAGE_SECTION devel)
set(CPACK_DEBIAN_PACKAGE_SHLIBDEPS ON)
set(CPACK_DEBIAN_PACKAGE_RECOMMENDS "python3, python3-grpcio, python3-protobuf")
# The C++ adapter's build needs, then the Go adapter's (share/weir/go).
set(CPACK_DEBIAN_PACKAGE_SUGGESTS
  "cmake, g++, ninja-build, libgrpc++-dev, libprotobuf-dev, protobuf-compiler-grpc, libabsl-dev, libboost-dev, libssl-dev, libgtest-dev, golang-go, golang-google-grpc-dev, golang-google-protobuf-dev")
include(CPack)
