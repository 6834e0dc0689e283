// Runtime faults: commit failures and crash points, driven through
// the in-process fake connector. Each scripted fault must happen exactly at
// its planned position, be followed by a new incarnation opened from the last
// committed checkpoint, and keep the events around it in the right order; a
// correct connector must still lose nothing under seeded crash and
// commit-failure rates.
#include <algorithm>
#include <optional>
#include <string>

#include <gtest/gtest.h>

#include "harness/oracle/oracle.h"
#include "harness/runtime/runtime_model.h"
#include "tests/unit/fake_connector.h"
#include "tests/unit/test_support.h"

namespace weir {
namespace {

using testing::FakeConnector;
using testing::SmallScenario;
using testing::TraceRecorder;
using v1::TraceEvent;

struct Harness {
  Harness(v1::Scenario s, std::uint64_t seed)
      : scenario(std::move(s)),
        faults(scenario.faults(), seed, log),
        broker(scenario, seed, log, faults),
        session(broker, log, faults),
        oracle(scenario.profile()) {
    log.AddObserver(&rec);
    log.AddObserver(&oracle);
  }
  RunSummary Run() {
    RuntimeModel runtime(scenario, broker, session, port, log, faults);
    RunSummary s = runtime.Run();
    verdict = oracle.Finish();
    return s;
  }
  // Index in rec.events of the first event of `kind` matching `pred`, or -1.
  template <typename Pred>
  int Find(TraceEvent::KindCase kind, Pred pred, int from = 0) const {
    for (int i = from; i < static_cast<int>(rec.events.size()); ++i) {
      if (rec.events[i].kind_case() == kind && pred(rec.events[i])) return i;
    }
    return -1;
  }
  int Find(TraceEvent::KindCase kind, int from = 0) const {
    return Find(
        kind, [](const TraceEvent&) { return true; }, from);
  }
  int Crash(const std::string& point) const {
    return Find(TraceEvent::kCrashed, [&](const TraceEvent& e) { return e.crashed().point() == point; });
  }
  // The last checkpoint committed before event index `before`, if any.
  std::optional<std::uint64_t> LastCommittedBefore(int before) const {
    std::optional<std::uint64_t> out;
    for (int i = 0; i < before; ++i) {
      if (rec.events[i].has_committed()) out = rec.events[i].committed().checkpoint_id();
    }
    return out;
  }
  // Checks: event `crash` is followed by an opened event restored from the
  // last checkpoint committed before it, in the next incarnation.
  void ExpectRestartAfter(int crash) const {
    ASSERT_GE(crash, 0);
    const int opened = Find(TraceEvent::kOpened, crash);
    ASSERT_GT(opened, crash);
    const auto& o = rec.events[opened];
    EXPECT_GT(o.incarnation(), rec.events[crash].incarnation());
    const auto last = LastCommittedBefore(crash);
    EXPECT_EQ(o.opened().restored(), last.has_value());
    if (last.has_value()) {
      EXPECT_EQ(o.opened().checkpoint_id(), *last);
    }
  }
  bool Holds(Invariant i) const { return verdict.at(i).violations == 0; }

  v1::Scenario scenario;
  TraceLog log;
  TraceRecorder rec;
  FaultSource faults;
  QueueModel broker;
  BrokerSession session;
  FakeConnector port;
  Oracle oracle;
  Verdict verdict;
};

v1::Scenario Base() {
  v1::Scenario s = SmallScenario(40);
  // The fake keeps no dedup memory across a restart: judge at-least-once.
  s.mutable_profile()->set_guarantee(v1::Profile::AT_LEAST_ONCE);
  return s;
}

void Script(v1::Scenario* s, v1::Site site, std::uint64_t position, v1::CrashPoint point,
            std::uint32_t after_calls = 0) {
  auto* d = s->mutable_faults()->add_scripted();
  d->set_site(site);
  d->set_position(position);
  d->mutable_crash()->set_point(point);
  d->mutable_crash()->set_after_calls(after_calls);
}

// Every fault_applied event is at the scripted (site, position) and is followed
// by the crash it asked for; the run ends well and loses nothing.
void ExpectCleanEnd(const Harness& h, const RunSummary& s) {
  EXPECT_FALSE(s.connector_failed) << s.end_reason;
  EXPECT_EQ(s.end_reason, "all messages committed");
  EXPECT_TRUE(h.Holds(Invariant::kLostMessage));
  EXPECT_TRUE(h.Holds(Invariant::kAckBeforeCommit));
  EXPECT_TRUE(h.Holds(Invariant::kUnexpectedExit));
  EXPECT_TRUE(h.Holds(Invariant::kProtocolError));
  EXPECT_TRUE(h.rec.Of(TraceEvent::kExited).empty());
}

TEST(RuntimeFaults, BeforeStepCrashesBeforeTheKthAdvance) {
  v1::Scenario sc = Base();
  Script(&sc, v1::STEP, 4, v1::BEFORE_STEP);
  Harness h(sc, 5);
  RunSummary s = h.Run();
  ExpectCleanEnd(h, s);
  EXPECT_EQ(s.crashes, 1u);
  EXPECT_EQ(s.incarnations, 2u);
  const int crash = h.Crash("before-step");
  ASSERT_GE(crash, 0);
  // Steps 1..3 happened, step 4 never did; the fault precedes the crash.
  EXPECT_GE(h.Find(TraceEvent::kStepped, [](const TraceEvent& e) { return e.stepped().step() == 3; }), 0);
  EXPECT_LT(h.Find(TraceEvent::kStepped, [](const TraceEvent& e) { return e.stepped().step() == 3; }), crash);
  EXPECT_EQ(h.Find(TraceEvent::kStepped, [](const TraceEvent& e) { return e.stepped().step() == 4; }), -1);
  const int fault = h.Find(TraceEvent::kFaultApplied);
  ASSERT_GE(fault, 0);
  EXPECT_EQ(fault + 1, crash);
  EXPECT_EQ(h.rec.events[fault].fault_applied().decision().position(), 4u);
  h.ExpectRestartAfter(crash);
}

TEST(RuntimeFaults, InStepAfterBrokerCallKillsRightAfterTheNthCall) {
  v1::Scenario sc = Base();
  sc.mutable_workload()->set_publish_interval_ms(1);
  // The fake pulls once per step, then acks nothing: after the 1st call.
  Script(&sc, v1::STEP, 3, v1::IN_STEP_AFTER_BROKER_CALL, 1);
  Harness h(sc, 5);
  h.port.ack_on_pull = false;
  RunSummary s = h.Run();
  ExpectCleanEnd(h, s);
  EXPECT_EQ(s.crashes, 1u);
  const int crash = h.Crash("in-step-after-broker-call");
  ASSERT_GE(crash, 0);
  // The step's records are discarded: no stepped event for step 3.
  EXPECT_EQ(h.Find(TraceEvent::kStepped, [](const TraceEvent& e) { return e.stepped().step() == 3; }), -1);
  // The pull of step 3 reached the broker before the crash.
  bool delivered_in_incarnation = false;
  for (int i = 0; i < crash; ++i) {
    const auto& e = h.rec.events[i];
    if (e.has_delivered() && e.incarnation() == h.rec.events[crash].incarnation()) {
      delivered_in_incarnation = true;
    }
  }
  EXPECT_TRUE(delivered_in_incarnation);
  EXPECT_NE(std::find(h.port.calls.begin(), h.port.calls.end(), "Crashed in Advance"), h.port.calls.end());
  h.ExpectRestartAfter(crash);
}

TEST(RuntimeFaults, InStepWithFewerCallsThanAskedDoesNotCrash) {
  v1::Scenario sc = Base();
  Script(&sc, v1::STEP, 3, v1::IN_STEP_AFTER_BROKER_CALL, 5);  // the fake makes 1 call
  Harness h(sc, 5);
  RunSummary s = h.Run();
  ExpectCleanEnd(h, s);
  EXPECT_EQ(s.crashes, 0u);
  EXPECT_EQ(s.incarnations, 1u);
}

TEST(RuntimeFaults, AfterCheckpointBeforeCommitDropsTheCheckpoint) {
  v1::Scenario sc = Base();
  Script(&sc, v1::CHECKPOINT, 2, v1::AFTER_CHECKPOINT_BEFORE_COMMIT);
  Harness h(sc, 5);
  RunSummary s = h.Run();
  ExpectCleanEnd(h, s);
  const int crash = h.Crash("after-checkpoint-before-commit");
  ASSERT_GE(crash, 0);
  const auto id2 = [](const TraceEvent& e) { return e.checkpoint().checkpoint_id() == 2; };
  EXPECT_GE(h.Find(TraceEvent::kCheckpoint, id2), 0);
  EXPECT_LT(h.Find(TraceEvent::kCheckpoint, id2), crash);
  EXPECT_EQ(h.Find(TraceEvent::kCommitted, [](const TraceEvent& e) { return e.committed().checkpoint_id() == 2; }), -1);
  EXPECT_EQ(
      h.Find(TraceEvent::kCommitNotice, [](const TraceEvent& e) { return e.commit_notice().checkpoint_id() == 2; }),
      -1);
  h.ExpectRestartAfter(crash);
  EXPECT_EQ(*h.LastCommittedBefore(crash), 1u);
}

TEST(RuntimeFaults, AfterCommitBeforeNoticeCommitsButNeverNotices) {
  v1::Scenario sc = Base();
  Script(&sc, v1::CHECKPOINT, 2, v1::AFTER_COMMIT_BEFORE_NOTICE);
  Harness h(sc, 5);
  RunSummary s = h.Run();
  ExpectCleanEnd(h, s);
  const int crash = h.Crash("after-commit-before-notice");
  ASSERT_GE(crash, 0);
  const int committed =
      h.Find(TraceEvent::kCommitted, [](const TraceEvent& e) { return e.committed().checkpoint_id() == 2; });
  ASSERT_GE(committed, 0);
  EXPECT_LT(committed, crash);
  EXPECT_EQ(
      h.Find(TraceEvent::kCommitNotice, [](const TraceEvent& e) { return e.commit_notice().checkpoint_id() == 2; }),
      -1);
  h.ExpectRestartAfter(crash);
  const int opened = h.Find(TraceEvent::kOpened, crash);
  EXPECT_EQ(h.rec.events[opened].opened().checkpoint_id(), 2u);
}

TEST(RuntimeFaults, InNoticeAfterAckKillsAfterTheNthAck) {
  v1::Scenario sc = Base();
  Script(&sc, v1::CHECKPOINT, 1, v1::IN_NOTICE_AFTER_ACK, 2);
  Harness h(sc, 5);
  h.port.ack_batch = 1;  // one ack call per receipt: the epoch makes >= 5
  RunSummary s = h.Run();
  ExpectCleanEnd(h, s);
  const int crash = h.Crash("in-notice-after-ack");
  ASSERT_GE(crash, 0);
  const int notice =
      h.Find(TraceEvent::kCommitNotice, [](const TraceEvent& e) { return e.commit_notice().checkpoint_id() == 1; });
  ASSERT_GE(notice, 0);
  EXPECT_LT(notice, crash);
  // Exactly two ack calls reached the broker between the notice and the crash.
  int acks = 0;
  for (int i = notice; i < crash; ++i) acks += h.rec.events[i].has_acked() ? 1 : 0;
  EXPECT_EQ(acks, 2);
  h.ExpectRestartAfter(crash);
  EXPECT_EQ(h.rec.events[h.Find(TraceEvent::kOpened, crash)].opened().checkpoint_id(), 1u);
}

TEST(RuntimeFaults, CommitFailureDiscardsTheEpochAndRestarts) {
  v1::Scenario sc = Base();
  auto* d = sc.mutable_faults()->add_scripted();
  d->set_site(v1::CHECKPOINT);
  d->set_position(3);
  d->set_commit_failure(true);
  Harness h(sc, 5);
  RunSummary s = h.Run();
  ExpectCleanEnd(h, s);
  const int failed = h.Find(TraceEvent::kCommitFailed);
  ASSERT_GE(failed, 0);
  EXPECT_EQ(h.rec.events[failed].commit_failed().checkpoint_id(), 3u);
  EXPECT_EQ(h.Find(TraceEvent::kCommitted, [](const TraceEvent& e) { return e.committed().checkpoint_id() == 3; }), -1);
  EXPECT_EQ(
      h.Find(TraceEvent::kCommitNotice, [](const TraceEvent& e) { return e.commit_notice().checkpoint_id() == 3; }),
      -1);
  const int crash = h.Crash("commit-failed");
  ASSERT_GT(crash, failed);
  h.ExpectRestartAfter(crash);
  EXPECT_EQ(h.rec.events[h.Find(TraceEvent::kOpened, crash)].opened().checkpoint_id(), 2u);
}

TEST(RuntimeFaults, CrashesAreNeverUnexpectedExits) {
  v1::Scenario sc = Base();
  Script(&sc, v1::STEP, 2, v1::BEFORE_STEP);
  Script(&sc, v1::STEP, 6, v1::IN_STEP_AFTER_BROKER_CALL, 1);
  Script(&sc, v1::CHECKPOINT, 2, v1::AFTER_COMMIT_BEFORE_NOTICE);
  Harness h(sc, 9);
  RunSummary s = h.Run();
  ExpectCleanEnd(h, s);
  EXPECT_EQ(s.crashes, 3u);
  EXPECT_EQ(h.rec.Of(TraceEvent::kCrashed).size(), 3u);
  EXPECT_EQ(h.rec.Of(TraceEvent::kOpened).size(), 4u);
}

TEST(RuntimeFaults, CorrectConnectorLosesNothingUnderSeededFaults) {
  std::uint64_t crashes = 0, failures = 0;
  for (std::uint64_t seed = 1; seed <= 20; ++seed) {
    v1::Scenario sc = Base();
    sc.mutable_faults()->set_crash_rate(0.05);
    sc.mutable_faults()->set_commit_failure_rate(0.1);
    sc.mutable_faults()->set_checkpoint_crash_rate(0.1);
    Harness h(sc, seed);
    RunSummary s = h.Run();
    EXPECT_FALSE(s.connector_failed) << "seed " << seed << ": " << s.end_reason;
    EXPECT_TRUE(h.Holds(Invariant::kLostMessage)) << "seed " << seed;
    EXPECT_TRUE(h.Holds(Invariant::kAckBeforeCommit)) << "seed " << seed;
    EXPECT_TRUE(h.Holds(Invariant::kUnexpectedExit)) << "seed " << seed;
    crashes += s.crashes;
    failures += h.rec.Of(TraceEvent::kCommitFailed).size();
    // Every crash is followed by an opened event.
    for (std::size_t i = 0; i < h.rec.events.size(); ++i) {
      if (h.rec.events[i].has_crashed()) h.ExpectRestartAfter(static_cast<int>(i));
    }
  }
  EXPECT_GT(crashes, 5u);
  EXPECT_GT(failures, 0u);
}

TEST(RuntimeFaults, SameSeedSameTraceUnderFaults) {
  v1::Scenario sc = Base();
  sc.mutable_faults()->set_crash_rate(0.05);
  sc.mutable_faults()->set_commit_failure_rate(0.1);
  sc.mutable_faults()->set_checkpoint_crash_rate(0.1);
  Harness a(sc, 4), b(sc, 4);
  a.Run();
  b.Run();
  ASSERT_EQ(a.rec.events.size(), b.rec.events.size());
  for (std::size_t i = 0; i < a.rec.events.size(); ++i) {
    ASSERT_EQ(a.rec.events[i].SerializeAsString(), b.rec.events[i].SerializeAsString()) << i;
  }
}

TEST(RuntimeFaults, AnExitNoCrashPointCausedEndsTheRunAsUnexpected) {
  v1::Scenario sc = Base();
  Script(&sc, v1::STEP, 2, v1::BEFORE_STEP);  // a planned crash first
  Harness h(sc, 5);
  h.port.exit_on_step = 6;
  RunSummary s = h.Run();
  EXPECT_TRUE(s.connector_failed);
  EXPECT_EQ(s.end_reason, "connector failed");
  EXPECT_EQ(s.crashes, 1u);
  EXPECT_EQ(h.rec.Of(TraceEvent::kCrashed).size(), 1u);
  ASSERT_EQ(h.rec.Of(TraceEvent::kExited).size(), 1u);
  EXPECT_EQ(h.verdict.at(Invariant::kUnexpectedExit).violations, 1u);
  EXPECT_EQ(h.port.calls.back(), "Kill");
  EXPECT_TRUE(h.rec.events.back().has_run_ended());
}

TEST(RuntimeFaults, CrashLoopEndsTheRun) {
  v1::Scenario sc = Base();
  sc.mutable_faults()->set_crash_rate(1.0);
  Harness h(sc, 1);
  RunSummary s = h.Run();
  EXPECT_FALSE(s.connector_failed);
  EXPECT_NE(s.end_reason.find("crash loop"), std::string::npos) << s.end_reason;
  EXPECT_EQ(h.port.calls.back(), "Kill");
}

}  // namespace
}  // namespace weir
