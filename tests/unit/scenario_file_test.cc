#include "harness/scenario/scenario_file.h"

#include <gtest/gtest.h>

#include "harness/cli/command_line.h"

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
  const std::string e =
      Error("workload { messages: 1 publish_interval_ms: 1 }\nbroker {\n  lease_ms: -5\n}\n");
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

}  // namespace
}  // namespace weir
