#include "harness/scenario/scenario_file.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "harness/edge/command_line.h"
#include "harness/scenario/text_file.h"

namespace weir {
namespace {

std::string Error(std::string_view text) {
  auto s = ParseScenario("s.scenario", text);
  EXPECT_FALSE(s.ok());
  return s.ok() ? "" : std::string(s.status().message());
}

TEST(ScenarioFile, ValidFileGetsDefaults) {
  auto s = ParseScenario("s.scenario", "workload { messages: 5 publish_interval_ms: 10 }");
  ASSERT_TRUE(s.ok()) << s.status();
  EXPECT_EQ(s->broker().lease_ms(), 30000);
  EXPECT_EQ(s->runtime().checkpoint_interval_ms(), 1000);
}

TEST(ScenarioFile, SyntaxErrorNamesLineAndColumn) {
  EXPECT_EQ(Error("workload {\n  messages: five\n}").rfind("s.scenario:2:13:", 0), 0u)
      << Error("workload {\n  messages: five\n}");
}

TEST(ScenarioFile, UnknownFieldNamesLineAndColumn) {
  const std::string e = Error("workload { messages: 5 publish_interval_ms: 1 }\nbogus: 3\n");
  EXPECT_EQ(e.rfind("s.scenario:2:", 0), 0u) << e;
  EXPECT_NE(e.find("bogus"), std::string::npos) << e;
}

TEST(ScenarioFile, OutOfRangeValueNamesTheFieldLocationAndTheExpectation) {
  const std::string e = Error("workload {\n  messages: 0\n  publish_interval_ms: 10\n}\n");
  EXPECT_EQ(e.rfind("s.scenario:2:3:", 0), 0u) << e;
  EXPECT_NE(e.find("expected 1"), std::string::npos) << e;
}

TEST(ScenarioFile, NegativeDurationIsRejected) {
  const std::string e = Error("workload { messages: 1 publish_interval_ms: 1 }\nbroker {\n  lease_ms: -5\n}\n");
  EXPECT_EQ(e.rfind("s.scenario:3:3:", 0), 0u) << e;
}

TEST(ScenarioFile, EmptyFileSaysAWorkloadIsExpected) {
  const std::string e = Error("");
  EXPECT_EQ(e.rfind("s.scenario:1:1:", 0), 0u) << e;
  EXPECT_NE(e.find("workload"), std::string::npos) << e;
}

TEST(ScenarioFile, MissingFileIsNotFound) {
  auto s = LoadScenario("/nonexistent/x.scenario");
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.status().code(), absl::StatusCode::kNotFound);
}

TEST(CommandLine, SplitsQuotesWithoutAShell) {
  auto argv = SplitCommandLine(R"(conn --name 'a b' "c \"d\"" e\ f $HOME)");
  ASSERT_TRUE(argv.ok());
  EXPECT_EQ(*argv, (std::vector<std::string>{"conn", "--name", "a b", "c \"d\"", "e f", "$HOME"}));
}

TEST(CommandLine, UnterminatedQuoteIsAnErrorWithItsColumn) {
  auto argv = SplitCommandLine("conn 'oops");
  ASSERT_FALSE(argv.ok());
  EXPECT_NE(argv.status().message().find("column 6"), std::string::npos);
}

TEST(CommandLine, QuoteRoundTrips) {
  const std::vector<std::string> argv = {"/bin/c", "it's", "", "a b", "$x"};
  auto back = SplitCommandLine(ShellJoin(argv));
  ASSERT_TRUE(back.ok());
  EXPECT_EQ(*back, argv);
}

// The streaming form of WriteFileAtomically: the file appears whole or not
// at all, and an old file survives a failed write.
class WriteFileAtomicallyTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = std::filesystem::temp_directory_path() / ("weir-atomic-" + std::to_string(::getpid()));
    std::filesystem::create_directories(dir_);
    path_ = (dir_ / "report.xml").string();
  }
  void TearDown() override { std::filesystem::remove_all(dir_); }
  std::string Contents() const {
    std::ifstream in(path_, std::ios::binary);
    std::stringstream text;
    text << in.rdbuf();
    return text.str();
  }
  std::filesystem::path dir_;
  std::string path_;
};

TEST_F(WriteFileAtomicallyTest, StreamedPiecesAllReachTheFile) {
  std::string want;
  ASSERT_TRUE(WriteFileAtomically(path_, [&](TextOut out) {
                for (int i = 0; i < 20000; ++i) {
                  const std::string piece = "<testcase name=\"seed " + std::to_string(i) + "\"/>\n";
                  want += piece;
                  out(piece);
                }
                return absl::OkStatus();
              }).ok());
  EXPECT_EQ(Contents(), want);
  EXPECT_FALSE(std::filesystem::exists(path_ + ".partial"));
}

TEST_F(WriteFileAtomicallyTest, AFailedWriterLeavesNoPartialFileAndTheOldFileAsItWas) {
  ASSERT_TRUE(WriteFileAtomically(path_, std::string("old\n")).ok());
  const absl::Status st = WriteFileAtomically(path_, [](TextOut out) {
    out("<testsuite>\n");
    return absl::DataLossError("run log: run 2 cannot be read");
  });
  EXPECT_EQ(st.code(), absl::StatusCode::kDataLoss);
  EXPECT_EQ(st.message(), path_ + ": run log: run 2 cannot be read");
  EXPECT_EQ(Contents(), "old\n");
  EXPECT_FALSE(std::filesystem::exists(path_ + ".partial"));
}

TEST_F(WriteFileAtomicallyTest, AFullDiskIsAnErrorNamingThePathAndLeavesNothing) {
  if (!std::filesystem::exists("/dev/full")) GTEST_SKIP() << "no /dev/full";
  // /dev/full accepts the open and fails every write with ENOSPC (Linux
  // null(4) man page); the rename over it is never attempted.
  const std::filesystem::path link = dir_ / "full.json.partial";
  std::filesystem::create_symlink("/dev/full", link);
  const std::string target = (dir_ / "full.json").string();
  const absl::Status st = WriteFileAtomically(target, [](TextOut out) {
    for (int i = 0; i < 1000; ++i) out(std::string(1024, 'x'));
    return absl::OkStatus();
  });
  EXPECT_EQ(st.code(), absl::StatusCode::kUnavailable);
  EXPECT_EQ(st.message(), target + ": cannot write: No space left on device");
  EXPECT_FALSE(std::filesystem::exists(target));
  EXPECT_FALSE(std::filesystem::exists(link));  // the partial name is removed (here: the link)
}

}  // namespace
}  // namespace weir
