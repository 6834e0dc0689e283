// Suite files: every setting a suite names is applied, and a setting weir does
// not know is an error with file:line:column. Certify judges every run by the
// suite's profile and says so in its reports; scenario paths take one form
// everywhere (summary, run records, replay lines).
#include "harness/suite/suite_file.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <set>

#include "harness/suite/certify.h"
#include "harness/suite/suite_reports.h"
#include "tests/unit/test_support.h"

namespace weir {
namespace {

namespace fs = std::filesystem;

class SuiteFileTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = fs::temp_directory_path() / ("weir_suite_file_test_" + std::to_string(::getpid()) + "_" +
                                        ::testing::UnitTest::GetInstance()->current_test_info()->name());
    fs::create_directories(dir_ / "suites");
    fs::create_directories(dir_ / "profiles");
    fs::copy_file(fs::path(testing::SourceDir()) / "fixtures/scenarios/steady_parcel_scanners.scenario",
                  dir_ / "steady.scenario");
    fs::copy_file(fs::path(testing::SourceDir()) / "fixtures/profiles/event_time_strict.profile",
                  dir_ / "profiles/strict.profile");
  }
  void TearDown() override { fs::remove_all(dir_); }
  std::string Write(const std::string& name, const std::string& text) {
    const fs::path p = dir_ / name;
    std::ofstream(p) << text;
    return p.string();
  }
  fs::path dir_;
};

TEST_F(SuiteFileTest, TheSuitesProfileIsLoadedAndPartOfTheDigest) {
  const std::string with = Write("suites/with.suite",
                                 "name: \"s\"\nscenarios: [\"../steady.scenario\"]\nseeds: 2\n"
                                 "profile: \"../profiles/strict.profile\"\n");
  auto suite = LoadSuite(with);
  ASSERT_TRUE(suite.ok()) << suite.status();
  ASSERT_TRUE(suite->profile.has_value());
  EXPECT_EQ(suite->profile->watermark_policy(), v1::Profile::BOUNDED_LATENESS);
  EXPECT_EQ(suite->profile->allowed_lateness_ms(), 1000);
  EXPECT_EQ(suite->profile_path, (dir_ / "profiles/strict.profile").string());

  // Editing the profile changes what the certificate names.
  const std::string before = suite->digest;
  std::ofstream(dir_ / "profiles/strict.profile", std::ios::app) << "# edited\n";
  auto again = LoadSuite(with);
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_NE(again->digest, before);
}

TEST_F(SuiteFileTest, AProfileThatCannotBeReadIsAnErrorAtItsLine) {
  const std::string path = Write("suites/missing.suite",
                                 "name: \"s\"\nscenarios: [\"../steady.scenario\"]\nseeds: 1\n"
                                 "profile: \"../profiles/nope.profile\"\n");
  auto suite = LoadSuite(path);
  ASSERT_FALSE(suite.ok());
  EXPECT_NE(suite.status().message().find(path + ":4:10: profile '../profiles/nope.profile' cannot be read"),
            std::string::npos)
      << suite.status();
}

TEST_F(SuiteFileTest, ABadProfileIsAnErrorInTheProfileFile) {
  Write("profiles/bad.profile", "watermark_policy: MONOTONIC\nallowed_lateness_ms: 5\n");
  auto suite = LoadSuite(Write("suites/bad.suite",
                               "scenarios: [\"../steady.scenario\"]\nseeds: 1\n"
                               "profile: \"../profiles/bad.profile\"\n"));
  ASSERT_FALSE(suite.ok());
  EXPECT_NE(suite.status().message().find("bad.profile:2:"), std::string::npos) << suite.status();
}

TEST_F(SuiteFileTest, AnUnknownSettingIsAnErrorWithItsLocation) {
  const std::string path = Write("suites/typo.suite", "scenarios: [\"../steady.scenario\"]\nseeds: 1\nprofil: \"x\"\n");
  auto suite = LoadSuite(path);
  ASSERT_FALSE(suite.ok());
  EXPECT_NE(suite.status().message().find(path + ":3:"), std::string::npos) << suite.status();
}

// A guard for the next field: every field of weir.v1.Suite must be applied by
// LoadSuite/Certify. Add a field here only together with the code that applies
// it (and a test that shows it applied).
TEST(SuiteSchema, EveryFieldIsApplied) {
  const std::set<std::string> applied = {"name", "description", "scenarios", "seeds", "first_seed", "profile"};
  const auto* d = v1::Suite::descriptor();
  for (int i = 0; i < d->field_count(); ++i) {
    EXPECT_TRUE(applied.contains(d->field(i)->name()))
        << "weir.v1.Suite." << d->field(i)->name() << " is accepted but nothing applies it";
  }
}

TEST_F(SuiteFileTest, CertifyJudgesEveryRunByTheSuitesProfileAndSaysSo) {
  auto suite = LoadSuite(Write("suites/strict.suite",
                               "name: \"s\"\nscenarios: [\"../steady.scenario\"]\nseeds: 2\n"
                               "profile: \"../profiles/strict.profile\"\n"));
  ASSERT_TRUE(suite.ok()) << suite.status();
  CertifyOptions options;
  options.connector_argv = {"connector"};
  std::vector<v1::Profile> seen;
  options.runner = [&](const RunSpec& spec) -> absl::StatusOr<RunOutput> {
    seen.push_back(spec.scenario.profile());
    return RunOutput{};
  };
  auto result = Certify(*suite, options);
  ASSERT_TRUE(result.ok()) << result.status();
  ASSERT_EQ(seen.size(), 2u);
  for (const v1::Profile& p : seen) EXPECT_EQ(p.watermark_policy(), v1::Profile::BOUNDED_LATENESS);
  const std::string profile = (dir_ / "profiles/strict.profile").string();
  EXPECT_EQ(result->head.profile(), profile);
  auto report = LoadReport(*result);
  ASSERT_TRUE(report.ok());
  for (const auto& run : report->runs()) {
    EXPECT_NE(run.replay().find("--profile " + profile), std::string::npos) << run.replay();
  }
  EXPECT_NE(SuiteSummaryText(result->head, result->tally).find("profile " + profile + " (applied to every scenario)"),
            std::string::npos);
}

// The summary names a failing pair by the path its replay line opens.
TEST_F(SuiteFileTest, RunRecordsNameTheScenarioAsTheReplayLineDoes) {
  auto suite = LoadSuite(Write("suites/plain.suite", "scenarios: [\"../steady.scenario\"]\nseeds: 1\n"));
  ASSERT_TRUE(suite.ok()) << suite.status();
  CertifyOptions options;
  options.connector_argv = {"connector"};
  options.runner = [&](const RunSpec&) -> absl::StatusOr<RunOutput> {
    RunOutput out;
    out.verdict.at(Invariant::kLostMessage).violations = 1;
    return out;
  };
  auto result = Certify(*suite, options);
  ASSERT_TRUE(result.ok()) << result.status();
  auto report = LoadReport(*result);
  ASSERT_TRUE(report.ok());
  ASSERT_EQ(report->runs_size(), 1);
  const v1::RunRecord& run = report->runs(0);
  EXPECT_EQ(run.scenario(), (dir_ / "steady.scenario").string());
  EXPECT_NE(run.replay().find("--scenario " + run.scenario() + " "), std::string::npos) << run.replay();
  const std::string summary = SuiteSummaryText(result->head, result->tally);
  EXPECT_NE(summary.find(run.scenario() + " seed 1"), std::string::npos) << summary;
  EXPECT_EQ(summary.find("../steady.scenario"), std::string::npos) << summary;
}

}  // namespace
}  // namespace weir
