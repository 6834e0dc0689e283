// The harness as a library: a C++ source certified in-process, with the same
// simulation, trace and oracle as over gRPC.
#include "harness/edge/grpc_run.h"
#include "harness/inprocess/in_process_port.h"

#include <cstdlib>

#include <gtest/gtest.h>

#include "fixtures/connectors/reference_source.h"
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

}  // namespace
}  // namespace weir
