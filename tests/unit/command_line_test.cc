// How printed command lines name weir: they must work as printed.
#include "harness/edge/command_line.h"

#include <gtest/gtest.h>

namespace weir {
namespace {

TEST(WeirProgram, IsWeirWhenThePathFindsThisVeryBinary) {
  EXPECT_EQ(WeirProgramFor("/bin/sh", "/tmp", std::string("/bin/sh")), "weir");
}

// The quick start leaves weir in build/harness/: from the checkout the line
// names it by that path, like the scenario paths beside it.
TEST(WeirProgram, IsThePathBelowTheWorkingDirectory) {
  EXPECT_EQ(WeirProgramFor("/src/weir/build/harness/weir", "/src/weir", std::nullopt), "build/harness/weir");
  EXPECT_EQ(WeirProgramFor("/src/weir/build/harness/weir", "/src/weir/", std::nullopt), "build/harness/weir");
  EXPECT_EQ(WeirProgramFor("/src/weir/build/harness/weir", "/src/weir/build/harness", std::nullopt), "./weir");
}

TEST(WeirProgram, IsTheAbsolutePathElsewhere) {
  EXPECT_EQ(WeirProgramFor("/src/weir/build/harness/weir", "/home/ci", std::nullopt), "/src/weir/build/harness/weir");
  EXPECT_EQ(WeirProgramFor("/opt/my tools/weir", "/home/ci", std::nullopt), "'/opt/my tools/weir'");
  // Another weir on PATH is not this one.
  EXPECT_EQ(WeirProgramFor("/src/weir/build/harness/weir", "/home/ci", std::string("/bin/sh")),
            "/src/weir/build/harness/weir");
}

TEST(WeirProgram, IsWeirForTheLibraryUntilMainSetsIt) { EXPECT_EQ(WeirProgram(), "weir"); }

}  // namespace
}  // namespace weir
