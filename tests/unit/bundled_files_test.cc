// Bare names of bundled files (harness/cli/bundled_files.h): found in
// ../share/weir beside the command, a file in the working directory wins,
// anything else is left as given.
#include "harness/cli/bundled_files.h"

#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>

#include <gtest/gtest.h>

namespace weir {
namespace {

namespace fs = std::filesystem;

class BundledFilesTest : public ::testing::Test {
 protected:
  void SetUp() override {
    std::string templ = (fs::temp_directory_path() / "weir-bundled-XXXXXX").string();
    ASSERT_NE(mkdtemp(templ.data()), nullptr);
    root_ = templ;
    fs::create_directories(root_ / "prefix" / "bin");
    for (const char* sub : {"suites", "scenarios", "profiles"}) {
      fs::create_directories(root_ / "prefix" / "share" / "weir" / sub);
    }
    Touch(root_ / "prefix" / "share" / "weir" / "suites" / "quick.suite");
    Touch(root_ / "prefix" / "share" / "weir" / "scenarios" / "crash_storm.scenario");
    Touch(root_ / "prefix" / "share" / "weir" / "profiles" / "exactly_once.profile");
    old_cwd_ = fs::current_path();
    fs::create_directories(root_ / "work");
    fs::current_path(root_ / "work");
  }
  void TearDown() override {
    fs::current_path(old_cwd_);
    fs::remove_all(root_);
  }
  static void Touch(const fs::path& p) { std::ofstream(p) << "# test\n"; }
  std::string Dir() const { return (root_ / "prefix" / "share" / "weir").string(); }

  fs::path root_;
  fs::path old_cwd_;
};

TEST_F(BundledFilesTest, DirIsShareWeirBesideTheCommand) {
  EXPECT_EQ(BundledDirFor((root_ / "prefix" / "bin" / "weir").string()), Dir());
  // No share/weir/suites beside it: none.
  EXPECT_EQ(BundledDirFor((root_ / "work" / "weir").string()), std::nullopt);
}

TEST_F(BundledFilesTest, BareNamesResolveByKind) {
  EXPECT_EQ(ResolveBundled("quick", BundledKind::kSuite, Dir()), Dir() + "/suites/quick.suite");
  EXPECT_EQ(ResolveBundled("quick.suite", BundledKind::kSuite, Dir()), Dir() + "/suites/quick.suite");
  EXPECT_EQ(ResolveBundled("crash_storm", BundledKind::kScenario, Dir()), Dir() + "/scenarios/crash_storm.scenario");
  EXPECT_EQ(ResolveBundled("exactly_once", BundledKind::kProfile, Dir()), Dir() + "/profiles/exactly_once.profile");
  // The kind decides the directory: no suite is called crash_storm.
  EXPECT_EQ(ResolveBundled("crash_storm", BundledKind::kSuite, Dir()), "crash_storm");
}

TEST_F(BundledFilesTest, PathsLocalFilesAndUnknownNamesStayAsGiven) {
  EXPECT_EQ(ResolveBundled("./quick", BundledKind::kSuite, Dir()), "./quick");
  EXPECT_EQ(ResolveBundled("suites/quick.suite", BundledKind::kSuite, Dir()), "suites/quick.suite");
  EXPECT_EQ(ResolveBundled("nightly", BundledKind::kSuite, Dir()), "nightly");
  EXPECT_EQ(ResolveBundled("quick", BundledKind::kSuite, ""), "quick");
  EXPECT_EQ(ResolveBundled("", BundledKind::kSuite, Dir()), "");
  Touch(root_ / "work" / "quick");
  EXPECT_EQ(ResolveBundled("quick", BundledKind::kSuite, Dir()), "quick");
}

}  // namespace
}  // namespace weir
