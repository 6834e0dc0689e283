# weir_warnings(target): our code builds with these and fails on any warning.
function(weir_warnings target)
  # -Wrestrict: GCC 12 reports false positives inside std::string at -O2
  # (GCC bug 105329), so it is off for GCC only.
  target_compile_options(${target} PRIVATE -Wall -Wextra -Werror
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
