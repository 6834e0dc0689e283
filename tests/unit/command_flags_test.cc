// The flags every command shares (command_flags.h) and the command lines
// weir prints (replay_line.h): one parser, one syntax, so a line printed by
// one command is read back by another exactly.
#include <gtest/gtest.h>

#include <filesystem>
#include <string>
#include <vector>

#include "harness/cli/command_flags.h"
#include "harness/edge/command_line.h"
#include "harness/edge/replay_line.h"

namespace weir {
namespace {

TEST(ParseTransport, KnowsTcpAndUnixOnly) {
  EXPECT_EQ(*ParseTransport("tcp"), Transport::kTcp);
  EXPECT_EQ(*ParseTransport("unix"), Transport::kUnix);
  auto bad = ParseTransport("udp");
  ASSERT_FALSE(bad.ok());
  EXPECT_EQ(bad.status().message(), "--transport is 'udp'; expected tcp or unix");
}

TEST(ParseConnectorFlags, SplitsConnectorWithoutAShell) {
  ConnectorFlags f;
  f.connector = "/bin/sh -c 'echo $HOME; exit 3'";
  f.transport = "unix";
  auto c = ParseConnectorFlags(f, ConnectorNeed::kRequired);
  ASSERT_TRUE(c.ok()) << c.status();
  EXPECT_EQ(c->argv, (std::vector<std::string>{"/bin/sh", "-c", "echo $HOME; exit 3"}));
  EXPECT_EQ(c->transport, Transport::kUnix);
}

TEST(ParseConnectorFlags, TakesTheWordsAfterDoubleDash) {
  ConnectorFlags f;
  f.command = {"/bin/sh", "a b"};
  auto c = ParseConnectorFlags(f, ConnectorNeed::kRequired);
  ASSERT_TRUE(c.ok()) << c.status();
  EXPECT_EQ(c->argv, (std::vector<std::string>{"/bin/sh", "a b"}));
  EXPECT_EQ(c->transport, Transport::kTcp);
}

TEST(ParseConnectorFlags, SaysWhatIsWrong) {
  ConnectorFlags both;
  both.connector = "/bin/sh";
  both.command = {"/bin/sh"};
  EXPECT_EQ(ParseConnectorFlags(both, ConnectorNeed::kRequired).status().message(),
            "give the connector either as --connector 'CMD ARGS' or after --, not both");

  ConnectorFlags open_quote;
  open_quote.connector = "/bin/sh 'oops";
  const std::string quote = std::string(ParseConnectorFlags(open_quote, ConnectorNeed::kRequired).status().message());
  EXPECT_EQ(quote.rfind("--connector column ", 0), 0u) << quote;

  ConnectorFlags none;
  EXPECT_EQ(ParseConnectorFlags(none, ConnectorNeed::kRequired).status().message(),
            "no connector command; expected --connector 'CMD ARGS…'");
  // Optional (a trace's header names it): nothing given is fine.
  auto optional = ParseConnectorFlags(none, ConnectorNeed::kOptional);
  ASSERT_TRUE(optional.ok());
  EXPECT_TRUE(optional->argv.empty());

  ConnectorFlags missing;
  missing.connector = "/nonexistent/connector --fast";
  EXPECT_EQ(ParseConnectorFlags(missing, ConnectorNeed::kRequired).status().message(),
            "--connector: '/nonexistent/connector' is not an executable file (nor found on PATH)");

  ConnectorFlags transport;
  transport.connector = "/bin/sh";
  transport.transport = "pipe";
  EXPECT_FALSE(ParseConnectorFlags(transport, ConnectorNeed::kRequired).ok());
}

TEST(CheckOutputPaths, NamesTheFirstBadFlag) {
  const std::string dir = ::testing::TempDir();
  EXPECT_TRUE(CheckOutputPaths({{"--json", ""}, {"--html", dir + "/report.html"}}).ok());
  auto st = CheckOutputPaths({{"--json", dir + "/r.json"}, {"--html", dir + "/no/such/dir/r.html"}});
  ASSERT_FALSE(st.ok());
  EXPECT_EQ(std::string(st.message()).rfind("--html ", 0), 0u) << st.message();
  // A directory is not a file to write.
  EXPECT_FALSE(CheckOutputPaths({{"--junit", dir}}).ok());
}

// The replay line is read back by the same parser that read the flags.
TEST(ReplayLine, RoundTripsThroughTheConnectorParser) {
  const PairFlags pair{"scenarios/odd name.scenario", 42, Transport::kUnix, "min.plan", "", {"/bin/sh", "-c", "it's"}};
  const std::string line = PairCommand("run", pair);
  EXPECT_EQ(line.rfind("weir run --scenario 'scenarios/odd name.scenario' --seed 42 --transport unix --plan min.plan "
                       "--connector ",
                       0),
            0u)
      << line;
  auto words = SplitCommandLine(line);
  ASSERT_TRUE(words.ok()) << words.status();
  ASSERT_EQ(words->size(), 12u);
  EXPECT_EQ((*words)[3], "scenarios/odd name.scenario");
  ConnectorFlags f;
  f.connector = words->back();
  auto c = ParseConnectorFlags(f, ConnectorNeed::kRequired);
  ASSERT_TRUE(c.ok()) << c.status();
  EXPECT_EQ(c->argv, pair.connector_argv);
  EXPECT_EQ(ReplayLine(pair.scenario_path, pair.seed, pair.transport, pair.plan_path, "", pair.connector_argv), line);
}

TEST(NextStepsHint, ShrinksThePairOrWorksOnTheTrace) {
  const PairFlags pair{"s.scenario", 7, Transport::kTcp, "", "strict.profile", {"/bin/true"}};
  EXPECT_EQ(NextStepsHint("", pair).rfind("next: weir shrink --scenario s.scenario --seed 7 --profile strict.profile "
                                          "--connector /bin/true --out minimal.plan\n",
                                          0),
            0u)
      << NextStepsHint("", pair);
  const std::string with_trace = NextStepsHint("run 1.jsonl", pair);
  EXPECT_NE(with_trace.find("weir replay 'run 1.jsonl'"), std::string::npos) << with_trace;
  EXPECT_NE(with_trace.find("weir explain 'run 1.jsonl'"), std::string::npos) << with_trace;
  EXPECT_NE(with_trace.find("weir shrink 'run 1.jsonl' --out minimal.plan"), std::string::npos) << with_trace;
}

TEST(ExitCodes, AreTheOnesTheHelpNames) {
  const std::string help = ExitCodesHelp();
  for (int code : {kExitPassed, kExitFailed, kExitUsage, kExitHarness, kExitInterrupted, kExitNotExercised}) {
    EXPECT_NE(help.find(std::to_string(code) + " "), std::string::npos) << code;
  }
  EXPECT_EQ(kExitUsage, 2);  // scripts and CI rely on 2 for bad input (README "Exit codes")
}

}  // namespace
}  // namespace weir
