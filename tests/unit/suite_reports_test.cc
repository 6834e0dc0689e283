// The JSON suite report: printed run by run, it must still read back as the
// same report (Protobuf's JSON mapping, parsed by ParseSuiteReportJson).
#include "harness/suite/suite_reports.h"

#include <gtest/gtest.h>

#include <google/protobuf/util/message_differencer.h>

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

}  // namespace
}  // namespace weir
