#include "harness/runtime/runtime_model.h"

#include <algorithm>
#include <functional>
#include <map>

#include <gtest/gtest.h>

#include "harness/oracle/oracle.h"
#include "tests/unit/fake_connector.h"
#include "tests/unit/test_support.h"

namespace weir {
namespace {

using testing::FakeConnector;
using testing::SmallScenario;
using testing::TraceRecorder;

struct Harness {
  explicit Harness(v1::Scenario s)
      : scenario(std::move(s)),
        faults(scenario.faults(), 3, log),
        broker(scenario, 3, log, faults),
        session(broker, log, faults) {
    log.AddObserver(&rec);
  }
  RunSummary Run() {
    RuntimeModel runtime(scenario, broker, session, port, log, faults);
    if (wall_clock) runtime.set_wall_clock(wall_clock);
    return runtime.Run();
  }
  std::function<std::int64_t()> wall_clock;
  v1::Scenario scenario;
  TraceLog log;
  TraceRecorder rec;
  FaultSource faults;
  QueueModel broker;
  BrokerSession session;
  FakeConnector port;
};

TEST(RuntimeModel, CorrectConnectorGetsEveryMessageCommitted) {
  Harness h(SmallScenario(23));
  RunSummary s = h.Run();
  EXPECT_EQ(s.end_reason, "all messages committed");
  EXPECT_EQ(s.published, 23u);
  EXPECT_EQ(s.committed_messages, 23u);
  EXPECT_FALSE(s.connector_failed);
  EXPECT_EQ(h.port.calls.front(), "Start");
  EXPECT_EQ(h.port.calls.back(), "Kill");
}

TEST(RuntimeModel, CheckpointThenCommitThenNoticeThenAcks) {
  Harness h(SmallScenario(23));
  h.Run();
  // For every checkpoint id: taken < committed < notice, and each in that order
  // exactly once; acks for its epoch come after its notice.
  std::map<std::uint64_t, std::vector<std::uint64_t>> order;  // id -> seqs
  for (const auto& e : h.rec.events) {
    if (e.has_checkpoint()) order[e.checkpoint().checkpoint_id()].push_back(e.seq());
    if (e.has_committed()) order[e.committed().checkpoint_id()].push_back(e.seq());
    if (e.has_commit_notice()) order[e.commit_notice().checkpoint_id()].push_back(e.seq());
  }
  ASSERT_FALSE(order.empty());
  for (const auto& [id, seqs] : order) {
    ASSERT_EQ(seqs.size(), 3u) << "checkpoint " << id;
    EXPECT_LT(seqs[0], seqs[1]);
    EXPECT_LT(seqs[1], seqs[2]);
  }
  std::uint64_t last_notice = 0;
  bool saw_ack = false;
  for (const auto& e : h.rec.events) {
    if (e.has_commit_notice()) last_notice = e.seq();
    if (e.has_acked()) {
      saw_ack = true;
      EXPECT_GT(last_notice, 0u) << "ack at #" << e.seq() << " before any commit notice";
    }
  }
  EXPECT_TRUE(saw_ack);
}

TEST(RuntimeModel, CheckpointsEveryNRecords) {
  v1::Scenario s = SmallScenario(20);
  s.mutable_runtime()->set_checkpoint_interval_ms(1000000);  // count only
  s.mutable_workload()->set_publish_interval_ms(1);
  Harness h(s);
  h.Run();
  for (const auto& e : h.rec.Of(v1::TraceEvent::kCheckpoint)) {
    EXPECT_GE(e.checkpoint().records(), 5u);
  }
  EXPECT_GE(h.rec.Of(v1::TraceEvent::kCheckpoint).size(), 2u);
}

TEST(RuntimeModel, SameScenarioAndSeedGiveTheSameTrace) {
  Harness a(SmallScenario(30)), b(SmallScenario(30));
  a.Run();
  b.Run();
  ASSERT_EQ(a.rec.events.size(), b.rec.events.size());
  for (std::size_t i = 0; i < a.rec.events.size(); ++i) {
    ASSERT_EQ(a.rec.events[i].SerializeAsString(), b.rec.events[i].SerializeAsString()) << i;
  }
}

TEST(RuntimeModel, AckOnPullIsCaughtByTheOracle) {
  Harness h(SmallScenario(10));
  h.port.ack_on_pull = true;
  Oracle oracle(h.scenario.profile());
  h.log.AddObserver(&oracle);
  h.Run();
  Verdict v = oracle.Finish();
  EXPECT_GT(v.at(Invariant::kAckBeforeCommit).violations, 0u);
  EXPECT_FALSE(v.passed());
}

TEST(RuntimeModel, CorrectConnectorPassesTheOracle) {
  Harness h(SmallScenario(40));
  Oracle oracle(h.scenario.profile());
  h.log.AddObserver(&oracle);
  h.Run();
  Verdict v = oracle.Finish();
  for (int i = 0; i < kInvariantCount; ++i) {
    EXPECT_EQ(v.results[i].violations, 0u) << InvariantName(static_cast<Invariant>(i));
  }
  EXPECT_TRUE(v.passed());
}

}  // namespace
}  // namespace weir

namespace weir {
namespace {

std::size_t Count(const std::vector<std::string>& calls, const std::string& name) {
  return static_cast<std::size_t>(std::count(calls.begin(), calls.end(), name));
}

// A connector that asks to be called again at once and never moves virtual
// time is stopped after the default 1,000 such steps (not 100,000), and the
// verdict says livelock.
TEST(RuntimeModel, ALivelockIsStoppedAfterTheDefaultThousandSteps) {
  v1::Scenario s = SmallScenario(5);
  s.mutable_runtime()->clear_max_same_time_steps();
  Harness h(s);
  Oracle oracle(h.scenario.profile());
  h.log.AddObserver(&oracle);
  h.port.livelock = true;
  h.Run();
  EXPECT_EQ(Count(h.port.calls, "Advance"), kDefaultMaxSameTimeSteps + 1);
  const auto events = h.rec.Of(v1::TraceEvent::kLivelock);
  ASSERT_EQ(events.size(), 1u);
  EXPECT_EQ(events[0].livelock().steps(), kDefaultMaxSameTimeSteps + 1);
  EXPECT_FALSE(events[0].livelock().by_wall_time());
  const Verdict v = oracle.Finish();
  ASSERT_EQ(v.at(Invariant::kLivelock).violations, 1u);
  EXPECT_NE(v.at(Invariant::kLivelock).first[0].sentence.find("runtime.max_same_time_steps is 1000"), std::string::npos)
      << v.at(Invariant::kLivelock).first[0].sentence;
  EXPECT_EQ(v.at(Invariant::kProtocolError).violations, 0u);
}

TEST(RuntimeModel, TheScenarioSetsTheLivelockStepBound) {
  v1::Scenario s = SmallScenario(5);
  s.mutable_runtime()->set_max_same_time_steps(50);
  Harness h(s);
  h.port.livelock = true;
  h.Run();
  EXPECT_EQ(Count(h.port.calls, "Advance"), 51u);
}

// The wall-time bound: a fake clock that moves 2 s per step passes 10 s
// after six steps at one virtual time.
TEST(RuntimeModel, ALivelockIsStoppedAfterTheWallTimeBound) {
  v1::Scenario s = SmallScenario(5);
  s.mutable_runtime()->set_max_same_time_steps(1000000);
  s.mutable_runtime()->set_max_same_time_wall_ms(10000);
  Harness h(s);
  std::int64_t wall = 0;
  h.wall_clock = [&wall] { return wall += 2000; };
  h.port.livelock = true;
  h.Run();
  const auto events = h.rec.Of(v1::TraceEvent::kLivelock);
  ASSERT_EQ(events.size(), 1u);
  EXPECT_TRUE(events[0].livelock().by_wall_time());
  EXPECT_GT(events[0].livelock().wall_ms(), 10000);
  EXPECT_LT(Count(h.port.calls, "Advance"), 10u);
}

// Draining a backlog at one virtual time is not a livelock below the bound.
TEST(RuntimeModel, ACorrectConnectorDrainingABacklogIsNoLivelock) {
  v1::Scenario s = SmallScenario(300);
  s.mutable_workload()->set_publish_interval_ms(1);
  s.mutable_broker()->set_max_pull(1);
  Harness h(s);
  h.Run();
  EXPECT_TRUE(h.rec.Of(v1::TraceEvent::kLivelock).empty());
}

}  // namespace
}  // namespace weir
