// The suite reports: printed run by run, the JSON must still read back as the
// same report (Protobuf's JSON mapping, parsed by ParseSuiteReportJson); and
// every report streamed from a run log must be byte for byte what weir wrote
// before it spilled runs to disk (tests/unit/suite_reports_before_spill.h).
#include "harness/suite/suite_reports.h"

#include <gtest/gtest.h>
#include <stdlib.h>

#include <filesystem>
#include <fstream>
#include <random>
#include <sstream>

#include <google/protobuf/util/message_differencer.h>

#include "harness/oracle/verdict.h"
#include "harness/suite/run_log.h"
#include "harness/suite/suite_tally.h"
#include "tests/unit/suite_reports_before_spill.h"

namespace weir {
namespace {

v1::SuiteReport Report(int runs) {
  v1::SuiteReport r;
  r.set_suite_name("tiny \"runs\": [] <b>");
  r.set_suite_digest("sha256:00");
  r.add_connector_argv("/bin/c");
  r.add_connector_argv("--name=\"runs\": []");
  r.set_pairs_total(static_cast<std::uint64_t>(runs));
  r.set_shard_count(1);
  r.set_complete(true);
  for (int i = 0; i < runs; ++i) {
    v1::RunRecord* run = r.add_runs();
    run->set_scenario("s.scenario");
    run->set_seed(static_cast<std::uint64_t>(i + 1));
    run->set_pair_index(static_cast<std::uint64_t>(i));
    run->set_passed(i % 2 == 0);
    if (i % 2 == 1) {
      run->add_failed_invariants("lost-message");
      run->set_first_violation("lost-message: message 3 \"runs\": [] has no record");
    }
    run->set_replay("weir run --scenario s.scenario --seed 1");
  }
  v1::InvariantSummary* s = r.add_invariants();
  s->set_invariant("lost-message");
  s->set_runs_failed(static_cast<std::uint64_t>(runs / 2));
  return r;
}

TEST(SuiteReportJson, ReadsBackAsTheSameReport) {
  for (int runs : {0, 1, 3, 50}) {
    SCOPED_TRACE(runs);
    const v1::SuiteReport want = Report(runs);
    const std::string json = SuiteReportJson(want);
    auto got = ParseSuiteReportJson(json);
    ASSERT_TRUE(got.ok()) << got.status() << "\n" << json;
    EXPECT_TRUE(google::protobuf::util::MessageDifferencer::Equals(*got, want)) << json;
    EXPECT_NE(json.find("\"complete\": true"), std::string::npos) << json;
  }
}

// A random report of `runs` runs, its invariants summarized the old way. The
// strings carry markup, quotes, JSON's and XML's special characters and
// non-ASCII; wall times have many digits so that their sum's last printed
// digit depends on the order of addition.
v1::SuiteReport RandomReport(std::mt19937_64& rng, int runs) {
  auto pick = [&rng](std::initializer_list<const char*> choices) {
    return std::string(*(choices.begin() + rng() % choices.size()));
  };
  auto coin = [&rng](double p) { return std::uniform_real_distribution<double>(0, 1)(rng) < p; };
  v1::SuiteReport r;
  r.set_suite_name(pick({"", "quick", "buoys <&> \"runs\": []", "kilo\u00e9\t\\ tab"}));
  r.set_suite_digest("sha256:" + std::to_string(rng()));
  r.set_weir_version(pick({"0.1.0", "0.1.0-dirty"}));
  r.add_connector_argv("/opt/scanner/bin/connector");
  if (coin(0.5)) r.add_connector_argv("--name=<\"x\"> & 'y'");
  r.set_connector_sha256(std::to_string(rng()));
  r.set_shard_count(coin(0.7) ? 1 : 3);
  r.set_shard_index(r.shard_count() == 1 ? 0 : static_cast<std::uint32_t>(rng() % 3));
  r.set_pairs_total(static_cast<std::uint64_t>(runs) * r.shard_count() + (coin(0.2) ? 1 : 0));
  r.set_complete(coin(0.7));
  if (coin(0.5)) {
    r.set_profile(pick({"profiles/claimed <lateness>.profile", "event_time_strict.profile"}));
    r.set_profile_sha256(std::to_string(rng()));
  }
  if (!r.complete()) r.set_stopped_because(pick({"interrupted by a signal", "stopped after 3 failed runs"}));
  for (int i = 0; i < runs; ++i) {
    v1::RunRecord* run = r.add_runs();
    run->set_scenario(pick({"steady_parcel_scanners.scenario", "dir/crash <storm> & \"buoys\".scenario"}));
    run->set_seed(coin(0.1) ? ~std::uint64_t{0} - rng() % 5 : rng() % 100000);
    run->set_pair_index(static_cast<std::uint64_t>(i) * r.shard_count() + r.shard_index());
    run->set_wall_seconds(std::uniform_real_distribution<double>(0, 3)(rng));
    run->set_digest("sha256:" + std::to_string(rng()));
    run->set_replay(absl::StrCat("weir run --scenario '", run->scenario(), "' --seed ", run->seed(),
                                 " --connector '/opt/scanner/bin/connector'"));
    if (coin(0.05)) {
      run->set_passed(false);
      run->set_harness_error(pick({"connector exited before serving: <status 127>", "cannot bind \"port\" & co"}));
      continue;
    }
    // Coverage: some invariants judged (chances, often none), some faults.
    for (int k = 0; k < kInvariantCount; ++k) {
      if (coin(0.5))
        AddCount(run->mutable_chances(), InvariantName(static_cast<Invariant>(k)), coin(0.3) ? 0 : rng() % 1000);
    }
    for (const char* fault : {"crash at IN_NOTICE", "latency_ms at <ACK> & \"x\"", "throttle_retry_after_ms at PULL"}) {
      if (coin(0.4)) AddCount(run->mutable_faults_applied(), fault, 1 + rng() % 5);
    }
    run->set_passed(coin(0.6));
    if (run->passed()) continue;
    for (int k = 0; k < kInvariantCount; ++k) {
      if (coin(0.25)) run->add_failed_invariants(InvariantName(static_cast<Invariant>(k)));
    }
    if (run->failed_invariants().empty()) run->add_failed_invariants("lost-message");
    run->set_first_violation(absl::StrCat(run->failed_invariants(0), ": message <m-", rng() % 50,
                                          "> \"lost\" & never committed \u2014 see event 17"));
  }
  before_spill::Summarize(&r);
  return r;
}

// Byte-for-byte equality; on a mismatch, the sizes and the first differing
// byte with some context, rather than two texts of megabytes.
void ExpectSameBytes(const std::string& got, const std::string& want, const char* what) {
  if (got == want) return;
  std::size_t at = 0;
  while (at < got.size() && at < want.size() && got[at] == want[at]) ++at;
  const std::size_t from = at < 60 ? 0 : at - 60;
  ADD_FAILURE() << what << ": streamed text differs from the old whole-report text at byte " << at << " (sizes "
                << got.size() << " and " << want.size() << ")\n  streamed: ..." << got.substr(from, 120)
                << "\n  expected: ..." << want.substr(from, 120);
}

std::string Collect(absl::FunctionRef<absl::Status(TextOut)> write) {
  std::string text;
  absl::Status st = write([&text](std::string_view piece) { text.append(piece); });
  EXPECT_TRUE(st.ok()) << st;
  return text;
}

// Certify's path: runs appended to a run log in pair order and tallied on
// the way; the head without runs; every report from those three parts.
TEST(SuiteReports, StreamedFromARunLogTheyAreByteIdenticalToTheWholeReportOnes) {
  std::mt19937_64 rng(20260601);
  for (int runs : {0, 1, 2, 7, 40, 1000}) {
    for (int round = 0; round < 3; ++round) {
      SCOPED_TRACE(absl::StrCat(runs, " runs, round ", round));
      const v1::SuiteReport report = RandomReport(rng, runs);
      auto log = RunLog::Create();
      ASSERT_TRUE(log.ok()) << log.status();
      SuiteTally tally;
      for (const auto& run : report.runs()) {
        tally.Add(run);
        ASSERT_TRUE((*log)->Append(run).ok());
      }
      ASSERT_TRUE((*log)->Finish().ok());
      v1::SuiteReport head = report;
      head.clear_runs();
      head.clear_invariants();
      *head.mutable_invariants() = tally.invariants();
      head.clear_faults_applied();
      for (const auto& [fault, n] : tally.faults_applied()) AddCount(head.mutable_faults_applied(), fault, n);
      ASSERT_EQ(head.invariants_size(), report.invariants_size());
      for (int i = 0; i < head.invariants_size(); ++i) {
        EXPECT_TRUE(google::protobuf::util::MessageDifferencer::Equals(head.invariants(i), report.invariants(i)))
            << head.invariants(i).DebugString() << "\nexpected\n"
            << report.invariants(i).DebugString();
      }

      const std::string json = Collect([&](TextOut out) {
        auto reader = (*log)->Read();
        return WriteSuiteReportJson(head, *reader, out);
      });
      ExpectSameBytes(json, before_spill::SuiteReportJson(report), "JSON");
      const std::string junit = Collect([&](TextOut out) {
        auto reader = (*log)->Read();
        return WriteSuiteJUnitXml(head, tally, *reader, "2026-06-01T12:00:00", "ci-7", out);
      });
      ExpectSameBytes(junit, before_spill::SuiteJUnitXml(report, "2026-06-01T12:00:00", "ci-7"), "JUnit");
      ExpectSameBytes(SuiteSummaryText(head, tally), before_spill::SuiteSummaryText(report), "summary");
      ExpectSameBytes(SuiteSummaryHtml(head, tally), before_spill::SuiteSummaryHtml(report), "HTML summary");
      ExpectSameBytes(CertificateJson(MakeCertificate(head, tally)),
                      CertificateJson(before_spill::MakeCertificate(report)), "certificate");

      // The whole-report forms, for reports in memory, too.
      ExpectSameBytes(SuiteReportJson(report), before_spill::SuiteReportJson(report), "whole JSON");
      ExpectSameBytes(SuiteJUnitXml(report, "t", ""), before_spill::SuiteJUnitXml(report, "t", ""), "whole JUnit");
      ExpectSameBytes(SuiteSummaryText(report), before_spill::SuiteSummaryText(report), "whole summary");
      ExpectSameBytes(SuiteSummaryHtml(report), before_spill::SuiteSummaryHtml(report), "whole HTML summary");
      ExpectSameBytes(CertificateJson(MakeCertificate(report)), CertificateJson(before_spill::MakeCertificate(report)),
                      "whole certificate");
    }
  }
}

// A reader that fails at its third run, as a damaged run log would.
class FailingReader : public RunReader {
 public:
  absl::StatusOr<bool> Next(v1::RunRecord* run) override {
    if (++calls_ == 3) return absl::DataLossError("run log: run 3 cannot be read (damaged or cut short)");
    run->set_seed(static_cast<std::uint64_t>(calls_));
    return true;
  }

 private:
  int calls_ = 0;
};

TEST(SuiteReports, AReadErrorLeavesNoReportFileAndKeepsTheOldOne) {
  const auto dir = std::filesystem::temp_directory_path() / ("weir-reports-test-" + std::to_string(::getpid()));
  std::filesystem::create_directories(dir);
  const std::string path = (dir / "suite.json").string();
  ASSERT_TRUE(WriteFileAtomically(path, std::string("old report\n")).ok());
  v1::SuiteReport head;
  head.set_suite_name("buoys");
  for (bool junit : {false, true}) {
    SCOPED_TRACE(junit ? "junit" : "json");
    FailingReader reader;
    absl::Status st = WriteFileAtomically(path, [&](TextOut out) {
      return junit ? WriteSuiteJUnitXml(head, SuiteTally(), reader, "t", "h", out)
                   : WriteSuiteReportJson(head, reader, out);
    });
    EXPECT_EQ(st.code(), absl::StatusCode::kDataLoss) << st;
    EXPECT_EQ(st.message(), path + ": run log: run 3 cannot be read (damaged or cut short)");
    std::ifstream in(path);
    std::stringstream text;
    text << in.rdbuf();
    EXPECT_EQ(text.str(), "old report\n");
    EXPECT_FALSE(std::filesystem::exists(path + ".partial"));
  }
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace weir
