# What `cmake --install build --prefix P` puts under P, for a connector's own
# repository to use weir (examples/out-of-tree is such a project):
#   bin/weir                                  the command
#   lib/libweir_*.a, include/weir/...         the C++ adapter and the in-process host
#   lib/cmake/weir/                           find_package(weir CONFIG): weir::adapter,
#                                             weir::inprocess, weir::weir (the command)
#   share/weir/{scenarios,profiles,suites}/   bundled files (harness/cli/bundled_files.h)
#   share/weir/proto/weir/v1/*.proto          the wire contract, for other languages
#   ${WEIR_INSTALL_PYTHONDIR}/weir/           the Python adapter and its stubs
#                                             (adapters/python/CMakeLists.txt)
#   share/weir/go/src/weir/{adapter,v1}/      the Go adapter's sources and its stubs, a
#                                             GOPATH entry (only when Go was found)
# Every destination is relative to the prefix, so the tree can be moved whole.
include(CMakePackageConfigHelpers)

set(WEIR_INSTALL_CMAKEDIR ${CMAKE_INSTALL_LIBDIR}/cmake/weir)
set(WEIR_INSTALL_DATADIR ${CMAKE_INSTALL_DATADIR}/weir)

set_target_properties(weir_proto PROPERTIES EXPORT_NAME proto)
set_target_properties(weir_core PROPERTIES EXPORT_NAME core)
set_target_properties(weir_run PROPERTIES EXPORT_NAME run)
set_target_properties(weir_edge PROPERTIES EXPORT_NAME edge)
set_target_properties(weir_replay PROPERTIES EXPORT_NAME replay)
set_target_properties(weir_suite PROPERTIES EXPORT_NAME suite)
set_target_properties(weir_adapter PROPERTIES EXPORT_NAME adapter)
set_target_properties(weir_inprocess PROPERTIES EXPORT_NAME inprocess)

install(TARGETS weir EXPORT weirTargets RUNTIME DESTINATION ${CMAKE_INSTALL_BINDIR})
install(TARGETS weir_proto weir_core weir_run weir_edge weir_replay weir_suite weir_adapter weir_inprocess
  EXPORT weirTargets ARCHIVE DESTINATION ${CMAKE_INSTALL_LIBDIR})

# Headers. The adapter's and the generated protos' sit under include/weir/
# (#include "weir/adapter/source.h", "weir/v1/connector.pb.h"); the harness's
# keep their repository paths under include/weir/ (#include
# "harness/inprocess/in_process_port.h"), so the imported targets put both
# include/ and include/weir/ on the include path. The command's own headers
# (harness/cli) are not part of the API.
install(DIRECTORY ${PROJECT_SOURCE_DIR}/adapters/cpp/include/weir/adapter
  DESTINATION ${CMAKE_INSTALL_INCLUDEDIR}/weir)
install(DIRECTORY ${PROJECT_BINARY_DIR}/proto/weir/v1 DESTINATION ${CMAKE_INSTALL_INCLUDEDIR}/weir
  FILES_MATCHING PATTERN "*.pb.h")
install(DIRECTORY ${PROJECT_SOURCE_DIR}/harness DESTINATION ${CMAKE_INSTALL_INCLUDEDIR}/weir
  FILES_MATCHING PATTERN "*.h" PATTERN cli EXCLUDE)

install(DIRECTORY ${PROJECT_SOURCE_DIR}/fixtures/scenarios ${PROJECT_SOURCE_DIR}/fixtures/profiles
  ${PROJECT_SOURCE_DIR}/fixtures/suites DESTINATION ${WEIR_INSTALL_DATADIR})
install(DIRECTORY ${PROJECT_SOURCE_DIR}/proto/weir DESTINATION ${WEIR_INSTALL_DATADIR}/proto
  FILES_MATCHING PATTERN "*.proto")
# The Go adapter as source (Go builds it with the connector): with Debian's Go
# libraries, GOPATH=<prefix>/share/weir/go:/usr/share/gocode (docs/go.md).
if(WEIR_GO_FOUND)
  install(DIRECTORY ${PROJECT_SOURCE_DIR}/adapters/go/ DESTINATION ${WEIR_INSTALL_DATADIR}/go/src/weir/adapter
    FILES_MATCHING PATTERN "*.go" PATTERN examples EXCLUDE)
  install(DIRECTORY ${WEIR_GOPATH}/src/weir/v1 DESTINATION ${WEIR_INSTALL_DATADIR}/go/src/weir
    FILES_MATCHING PATTERN "*.go")
endif()

install(EXPORT weirTargets NAMESPACE weir:: DESTINATION ${WEIR_INSTALL_CMAKEDIR})
configure_package_config_file(${PROJECT_SOURCE_DIR}/cmake/weirConfig.cmake.in
  ${PROJECT_BINARY_DIR}/cmake/weirConfig.cmake
  INSTALL_DESTINATION ${WEIR_INSTALL_CMAKEDIR}
  PATH_VARS WEIR_INSTALL_DATADIR WEIR_INSTALL_PYTHONDIR)
# 0.x: a minor release may change the API.
write_basic_package_version_file(${PROJECT_BINARY_DIR}/cmake/weirConfigVersion.cmake
  COMPATIBILITY SameMinorVersion)
install(FILES ${PROJECT_BINARY_DIR}/cmake/weirConfig.cmake
  ${PROJECT_BINARY_DIR}/cmake/weirConfigVersion.cmake DESTINATION ${WEIR_INSTALL_CMAKEDIR})

# The build tree mirrors the install's bundled directory: build/share/weir
# beside build/harness/weir, so the uninstalled command finds the same files.
file(MAKE_DIRECTORY ${PROJECT_BINARY_DIR}/share)
file(CREATE_LINK ${PROJECT_SOURCE_DIR}/fixtures ${PROJECT_BINARY_DIR}/share/weir SYMBOLIC)
