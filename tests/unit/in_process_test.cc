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
      first_bad = absl::StrCat("event #", e.seq(), " at ", e.t_ns(), " ns after event #", e.seq() - 1, " at ", last_t,
                               " ns: ", e.ShortDebugString());
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
  for (const char* scenario : {"log_steady_river_gauges.scenario", "log_retention_race_pollen_traps.scenario"}) {
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

// Many readers: the in-process port carries Assign, Revoke and Cut to its
// source, and makes one port per reader slot, each with its own source.

// An endpoint with an empty log: every partition listed has no records.
class EmptyLogEndpoint final : public BrokerEndpoint {
 public:
  CallStatus Pull(const v1::PullRequest&, v1::PullResponse*) override { return {}; }
  CallStatus Ack(const v1::AckRequest&, v1::AckResponse*) override { return {}; }
  CallStatus Nack(const v1::NackRequest&, v1::NackResponse*) override { return {}; }
  CallStatus ExtendLease(const v1::ExtendLeaseRequest&, v1::ExtendLeaseResponse*) override { return {}; }
  CallStatus ListPartitions(const v1::ListPartitionsRequest&, v1::ListPartitionsResponse*) override { return {}; }
  CallStatus Read(const v1::ReadRequest& request, v1::ReadResponse* response) override {
    ++reads;
    response->set_partition(request.partition());
    response->set_next_offset(request.offset());
    response->set_readable_end(request.offset());
    return {};
  }
  void OnStrayCall(const std::string&) override {}
  int reads = 0;
};

v1::OpenRequest OpenOfReader(std::uint32_t reader) {
  v1::OpenRequest request;
  request.set_incarnation(1);
  request.set_reader(reader);
  request.set_readers(2);
  v1::Span* span = request.add_spans();
  span->set_partition(4);
  span->set_start_offset(20);
  return request;
}

TEST(InProcessReaders, ThePortCarriesAssignRevokeAndCut) {
  EmptyLogEndpoint broker;
  InProcessPort port([] { return std::make_unique<fixtures::LogReferenceSource>(); });
  v1::CutRequest cut;
  cut.set_partition(4);
  cut.set_at_offset(50);
  v1::CutResponse answer;
  EXPECT_EQ(port.Cut(cut, &answer, broker).kind, ConnectorFailure::Kind::kExited) << "none alive";

  ASSERT_TRUE(port.Start(1).ok());
  v1::OpenResponse opened;
  ASSERT_TRUE(port.Open(OpenOfReader(1), &opened, broker).ok());
  ASSERT_TRUE(port.Cut(cut, &answer, broker).ok());
  EXPECT_EQ(answer.head().partition(), 4u);
  EXPECT_EQ(answer.head().start_offset(), 20u);
  EXPECT_EQ(answer.head().end_offset(), 50u);
  ASSERT_TRUE(answer.has_tail());
  EXPECT_EQ(answer.tail().start_offset(), 50u);
  EXPECT_FALSE(answer.tail().has_end_offset());

  v1::AssignRequest assign;
  v1::Span* span = assign.add_spans();
  span->set_partition(6);
  span->set_start_offset(3);
  span->set_end_offset(9);
  v1::AssignResponse assigned;
  ASSERT_TRUE(port.Assign(assign, &assigned, broker).ok());
  v1::CheckpointRequest checkpoint;
  checkpoint.set_checkpoint_id(1);
  v1::CheckpointResponse state;
  ASSERT_TRUE(port.Checkpoint(checkpoint, &state, broker).ok());
  ASSERT_EQ(state.resume_points_size(), 2);
  EXPECT_EQ(state.resume_points(1).partition(), 6u);
  EXPECT_EQ(state.resume_points(1).next_offset(), 3u);

  v1::RevokeRequest revoke;
  revoke.add_partitions(4);
  v1::RevokeResponse revoked;
  ASSERT_TRUE(port.Revoke(revoke, &revoked, broker).ok());
  checkpoint.set_checkpoint_id(2);
  state.Clear();
  ASSERT_TRUE(port.Checkpoint(checkpoint, &state, broker).ok());
  ASSERT_EQ(state.resume_points_size(), 1);
  EXPECT_EQ(state.resume_points(0).partition(), 6u);
}

TEST(InProcessReaders, ASourceWithoutManyReadersAnswersAssignAsAConnectorError) {
  EmptyLogEndpoint broker;
  InProcessPort port(Reference());
  ASSERT_TRUE(port.Start(1).ok());
  v1::OpenResponse opened;
  ASSERT_TRUE(port.Open(v1::OpenRequest(), &opened, broker).ok());
  v1::AssignResponse assigned;
  const ConnectorFailure assign = port.Assign(v1::AssignRequest(), &assigned, broker);
  EXPECT_EQ(assign.kind, ConnectorFailure::Kind::kConnectorError);
  EXPECT_EQ(assign.code, static_cast<int>(grpc::StatusCode::UNIMPLEMENTED));
  v1::RevokeResponse revoked;
  EXPECT_EQ(port.Revoke(v1::RevokeRequest(), &revoked, broker).code, static_cast<int>(grpc::StatusCode::UNIMPLEMENTED));
  v1::CutRequest cut;
  cut.set_partition(2);
  cut.set_at_offset(7);
  v1::CutResponse answer;
  ASSERT_TRUE(port.Cut(cut, &answer, broker).ok());
  EXPECT_EQ(answer.head().partition(), 2u) << "declines: the whole span";
  EXPECT_FALSE(answer.has_tail());
}

TEST(InProcessReaders, OnePortPerReaderSlotEachWithItsOwnSource) {
  v1::Scenario scenario;
  scenario.mutable_readers()->set_count(3);

  int made = 0;
  auto ports = MakeInProcessPorts(
      [&made] {
        ++made;
        return std::make_unique<fixtures::LogReferenceSource>();
      },
      ReaderCount(scenario));
  ASSERT_EQ(ports.size(), 3u);
  EmptyLogEndpoint broker;
  for (std::uint32_t r = 0; r < 3; ++r) {
    ASSERT_TRUE(ports[r]->Start(1).ok());
    v1::OpenResponse opened;
    ASSERT_TRUE(ports[r]->Open(OpenOfReader(r), &opened, broker).ok());
  }
  EXPECT_EQ(made, 3);
  // A cut of reader 0's span leaves reader 1's whole.
  v1::CutRequest cut;
  cut.set_partition(4);
  cut.set_at_offset(30);
  v1::CutResponse first;
  ASSERT_TRUE(ports[0]->Cut(cut, &first, broker).ok());
  EXPECT_EQ(first.head().end_offset(), 30u);
  cut.set_at_offset(40);
  v1::CutResponse second;
  ASSERT_TRUE(ports[1]->Cut(cut, &second, broker).ok());
  EXPECT_EQ(second.head().end_offset(), 40u);
  EXPECT_EQ(second.tail().start_offset(), 40u);
}

}  // namespace
}  // namespace weir
