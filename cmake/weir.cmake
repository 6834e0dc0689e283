# weir_warnings(target): our code builds with these and fails on any warning.
function(weir_warnings target)
  # -Wrestrict: GCC 12 reports false positives inside std::string at -O2
  # (GCC bug 105329), so it is off for GCC only.
  # -Wshadow: a name that hides another in an enclosing scope is a bug waiting
  # to happen in code that keeps models, ports and runs side by side.
  target_compile_options(${target} PRIVATE -Wall -Wextra -Wshadow -Werror
    $<$<CXX_COMPILER_ID:GNU>:-Wno-restrict>)
endfunction()

# weir_add_test(name SOURCES ... [LIBS ...] [LABELS ...]): one GoogleTest
# executable registered with CTest.
function(weir_add_test name)
  cmake_parse_arguments(T "" "" "SOURCES;LIBS;LABELS" ${ARGN})
  add_executable(${name} ${T_SOURCES})
  weir_warnings(${name})
  target_link_libraries(${name} PRIVATE ${T_LIBS} GTest::gtest GTest::gtest_main GTest::gmock)
  add_test(NAME ${name} COMMAND ${name})
  set_tests_properties(${name} PROPERTIES LABELS "${T_LABELS}" TIMEOUT 600
    ENVIRONMENT "WEIR_SOURCE_DIR=${PROJECT_SOURCE_DIR};WEIR_BINARY_DIR=${PROJECT_BINARY_DIR}")
endfunction()

# weir_link_static_grpc(target): link `target` against the static gRPC,
# Protobuf and Abseil libraries instead of the shared ones (glibc stays
# shared), through cmake/link_static_grpc.sh. A connector process then starts
# several times faster (docs/performance.md: restart cost), which is what
# crash-heavy suites spend their time on. Off with -DWEIR_STATIC_GRPC=OFF, and
# under WEIR_SANITIZE. Only for executables none of whose libraries also reach
# the shared gRPC (one copy of gRPC's globals per process).
function(weir_link_static_grpc target)
  if(WEIR_STATIC_GRPC AND NOT WEIR_SANITIZE)
    set_property(TARGET ${target} PROPERTY RULE_LAUNCH_LINK
      "bash ${PROJECT_SOURCE_DIR}/cmake/link_static_grpc.sh")
  endif()
endfunction()
