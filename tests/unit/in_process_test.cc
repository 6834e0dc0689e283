// The harness as a library: a C++ source certified in-process, with the same
// simulation, trace and oracle as over gRPC.
#include "harness/edge/grpc_run.h"
#include "harness/inprocess/in_process_port.h"

#include <cstdlib>
#include <filesystem>

#include <gtest/gtest.h>

#include "fixtures/connectors/log_reference_source.h"
#include "fixtures/connectors/reference_source.h"
#include "absl/strings/str_cat.h"
#include "harness/scenario/scenario_file.h"
#include "tests/unit/test_support.h"

namespace weir {
namespace {

using testing::BinaryDir;
using testing::SourceDir;

InProcessPort::Factory Reference(fixtures::Bugs bugs = {}) {
  return [bugs] { return std::make_unique<fixtures::ReferenceSource>(bugs); };
}

RunSpec Spec(const std::string& scenario_name, std::uint64_t seed) {
  RunSpec spec;
  spec.scenario_path = SourceDir() + "/fixtures/scenarios/" + scenario_name;
  auto scenario = LoadScenario(spec.scenario_path);
  EXPECT_TRUE(scenario.ok()) << scenario.status();
  spec.scenario = *scenario;
  spec.seed = seed;
  return spec;
}

TEST(InProcess, ReferenceSourcePassesTheTinySuite) {
  auto report = CertifyInProcess(SourceDir() + "/tests/e2e/tiny.suite", Reference(), 2);
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_EQ(static_cast<std::uint64_t>(report->runs_size()), report->pairs_total());
  for (const auto& run : report->runs()) {
    EXPECT_TRUE(run.passed()) << run.scenario() << " seed " << run.seed() << ": " << run.first_violation()
                              << run.harness_error();
  }
}

TEST(InProcess, AckOnPullIsCaughtInProcessToo) {
  fixtures::Bugs bugs;
  bugs.ack_on_pull = true;
  auto out = RunInProcess(Spec("steady_parcel_scanners.scenario", 7), Reference(bugs));
  ASSERT_TRUE(out.ok()) << out.status();
  EXPECT_GT(out->verdict.at(Invariant::kAckBeforeCommit).violations, 0u);
}

// The design's promise: the in-process host and the gRPC edge are two
// transports for one simulation, so a deterministic source gives the same
// trace digest over both.
TEST(InProcess, SameTraceDigestAsOverGrpc) {
  for (const char* scenario : {"steady_parcel_scanners.scenario", "crash_storm_weather_buoys.scenario"}) {
    RunSpec spec = Spec(scenario, 3);
    auto in_process = RunInProcess(spec, Reference());
    ASSERT_TRUE(in_process.ok()) << in_process.status();
    spec.connector_argv = {BinaryDir() + "/fixtures/connectors/reference_connector"};
    auto over_grpc = RunOverGrpc(spec);
    ASSERT_TRUE(over_grpc.ok()) << over_grpc.status();
    EXPECT_EQ(in_process->digest, over_grpc->digest) << scenario;
    EXPECT_EQ(in_process->events, over_grpc->events) << scenario;
  }
}

// Trace order is time order: every publish and lease expiry is traced before
// whatever the runtime does later in virtual time, over every bundled
// scenario (crashes, commit failures, latency, restarts, idle gaps).
class TimeOrder : public TraceObserver {
 public:
  void OnEvent(const v1::TraceEvent& e) override {
    if (e.t_ns() < last_t && first_bad.empty()) {
      first_bad = absl::StrCat("event #", e.seq(), " at ", e.t_ns(), " ns after event #", e.seq() - 1, " at ",
                               last_t, " ns: ", e.ShortDebugString());
    }
    last_t = std::max(last_t, e.t_ns());
  }
  std::int64_t last_t = 0;
  std::string first_bad;
};

TEST(InProcess, TraceOrderIsTimeOrderInEveryBundledScenario) {
  for (const auto& entry : std::filesystem::directory_iterator(SourceDir() + "/fixtures/scenarios")) {
    if (entry.path().extension() != ".scenario") continue;
    for (std::uint64_t seed : {1, 2}) {
      RunSpec spec = Spec(entry.path().filename().string(), seed);
      TimeOrder order;
      spec.observers = {&order};
      auto out = RunInProcess(spec, Reference());
      ASSERT_TRUE(out.ok()) << out.status();
      EXPECT_EQ(order.first_bad, "") << entry.path().filename() << " seed " << seed;
    }
  }
}

// The log shape in-process: the log reference reads, reports gaps and saves
// bookmarks through the same simulation, with the digest of the gRPC run.
TEST(InProcess, LogReferenceGivesTheSameDigestAsOverGrpc) {
  for (const char* scenario :
       {"log_steady_river_gauges.scenario", "log_retention_race_pollen_traps.scenario"}) {
    RunSpec spec = Spec(scenario, 3);
    auto in_process = RunInProcess(spec, [] { return std::make_unique<fixtures::LogReferenceSource>(); });
    ASSERT_TRUE(in_process.ok()) << in_process.status();
    for (int i = 0; i < static_cast<int>(Invariant::kCount); ++i) {
      EXPECT_EQ(in_process->verdict.at(static_cast<Invariant>(i)).violations, 0u)
          << scenario << ": " << InvariantName(static_cast<Invariant>(i));
    }
    spec.connector_argv = {BinaryDir() + "/fixtures/connectors/log_reference_connector"};
    auto over_grpc = RunOverGrpc(spec);
    ASSERT_TRUE(over_grpc.ok()) << over_grpc.status();
    EXPECT_EQ(in_process->digest, over_grpc->digest) << scenario;
    EXPECT_EQ(in_process->events, over_grpc->events) << scenario;
  }
}

TEST(InProcess, SilentSkipIsCaughtInProcessToo) {
  fixtures::LogBugs bugs;
  bugs.silent_skip = true;
  auto out = RunInProcess(Spec("log_retention_race_pollen_traps.scenario", 1),
                          [bugs] { return std::make_unique<fixtures::LogReferenceSource>(bugs); });
  ASSERT_TRUE(out.ok()) << out.status();
  EXPECT_GT(out->verdict.at(Invariant::kSilentSkip).violations, 0u);
}

}  // namespace
}  // namespace weir
