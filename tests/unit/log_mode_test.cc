// The log shape end to end in-process: the log broker model, the runtime and
// the oracle's log rules, driven by a small log reader (fake_log_reader.h)
// that is correct by default and has one switch per classic bug. Each bug must
// be refused by the rule written for it, and the correct reader must pass the
// same scenarios.
#include "harness/broker/log/log_model.h"

#include <gtest/gtest.h>

#include <cstdio>
#include <string>

#include "harness/broker/broker_session.h"
#include "harness/core/offset_ranges.h"
#include "harness/oracle/oracle.h"
#include "harness/runtime/runtime_model.h"
#include "tests/unit/fake_log_reader.h"
#include "tests/unit/test_support.h"

namespace weir {
namespace {

using testing::Failed;
using testing::FakeLogReader;
using testing::LogBugs;
using testing::TraceRecorder;

v1::Scenario LogScenario(std::uint64_t records, std::uint32_t partitions) {
  v1::Scenario s;
  s.set_name("tide gauges");
  auto* w = s.mutable_workload();
  w->set_messages(records);
  w->set_publish_interval_ms(10);
  w->set_payload_bytes(16);
  auto* l = s.mutable_log();
  l->set_partitions(partitions);
  l->set_keys(32);
  l->set_max_read(64);
  l->set_max_wait_ms(1000);
  l->set_broker_restart_ms(500);
  s.mutable_runtime()->set_checkpoint_every_records(20);
  s.mutable_runtime()->set_checkpoint_interval_ms(300);
  s.mutable_runtime()->set_drain_bound_ms(20000);
  s.mutable_profile()->set_guarantee(v1::Profile::EXACTLY_ONCE);
  return s;
}

struct LogRun {
  LogRun(v1::Scenario s, LogBugs bugs = {}, std::uint64_t seed = 5)
      : scenario(std::move(s)),
        faults(scenario.faults(), seed, log),
        broker(scenario, seed, log, faults),
        session(broker, log, faults),
        oracle(scenario.profile(), v1::LOG),
        port(bugs) {
    log.AddObserver(&rec);
    log.AddObserver(&oracle);
  }
  Verdict Run() {
    RuntimeModel runtime(scenario, broker, session, port, log, faults);
    summary = runtime.Run();
    return oracle.Finish();
  }
  std::uint64_t Violations(const Verdict& v, Invariant i) const { return v.at(i).violations; }

  v1::Scenario scenario;
  TraceLog log;
  TraceRecorder rec;
  FaultSource faults;
  LogModel broker;
  BrokerSession session;
  Oracle oracle;
  FakeLogReader port;
  RunSummary summary;
};

// FNV-1a 32-bit check values: the FNV reference test vectors (Fowler, Noll,
// Vo; "FNV hash" test suite: "" -> 0x811c9dc5, "a" -> 0xe40c292c,
// "foobar" -> 0xbf9cf968).
TEST(LogPlacement, Fnv1a32MatchesTheReferenceVectors) {
  EXPECT_EQ(Fnv1a32(""), 0x811c9dc5u);
  EXPECT_EQ(Fnv1a32("a"), 0xe40c292cu);
  EXPECT_EQ(Fnv1a32("foobar"), 0xbf9cf968u);
}

TEST(OffsetRanges, MergesAdjacentRangesAndCountsWhatWasHeld) {
  OffsetRanges r;
  EXPECT_EQ(r.Insert(0, 10), 0u);
  EXPECT_EQ(r.Insert(12, 15), 0u);
  EXPECT_EQ(r.ranges(), 2u);
  EXPECT_EQ(r.Insert(8, 13), 3u);  // 8, 9, 12 held; 10, 11 new
  EXPECT_EQ(r.ranges(), 1u);
  EXPECT_EQ(r.size(), 15u);
  EXPECT_TRUE(r.Covers(0, 15));
  EXPECT_FALSE(r.Covers(0, 16));
  EXPECT_EQ(r.FirstMissing(3), 15u);
  EXPECT_FALSE(r.Insert(14));
  EXPECT_TRUE(r.Insert(20));
  const auto missing = r.Missing(0, 22);
  ASSERT_EQ(missing.size(), 2u);
  EXPECT_EQ(missing[0], std::make_pair(std::uint64_t{15}, std::uint64_t{20}));
  EXPECT_EQ(missing[1], std::make_pair(std::uint64_t{21}, std::uint64_t{22}));
}

TEST(LogModel, AppendsEveryRecordOnceAtConsecutiveOffsetsPerPartition) {
  v1::Scenario s = LogScenario(500, 7);
  TraceLog log;
  TraceRecorder rec;
  log.AddObserver(&rec);
  FaultSource faults(s.faults(), 9, log);
  LogModel model(s, 9, log, faults);
  model.AdvanceTo(Millis(100000));
  std::map<std::uint32_t, std::uint64_t> next;
  for (const auto& e : rec.Of(v1::TraceEvent::kAppended)) {
    EXPECT_EQ(e.appended().offset(), next[e.appended().partition()]++);
  }
  std::uint64_t total = 0;
  for (std::uint32_t p = 0; p < model.partition_count(); ++p) {
    EXPECT_EQ(model.next_offset(p), next[p]);
    total += model.next_offset(p);
  }
  EXPECT_EQ(total, 500u);
  EXPECT_TRUE(model.all_published());
}

TEST(LogModel, ReadBelowRetentionFailsNamingTheFirstRetainedOffset) {
  v1::Scenario s = LogScenario(100, 1);
  s.mutable_log()->set_retention_ms(200);  // records older than 200 ms go
  TraceLog log;
  FaultSource faults(s.faults(), 1, log);
  LogModel model(s, 1, log, faults);
  v1::ReadRequest rq;
  rq.set_partition(0);
  rq.set_offset(0);
  v1::ReadResponse rs;
  VirtualTime now = Millis(990);  // 100 records appended at 0, 10, …, 990 ms
  CallStatus st = model.Read(rq, &now, &rs, 1);
  EXPECT_EQ(st.code, CallCode::kOutOfRange);
  EXPECT_EQ(st.first_retained_offset, model.first_retained(0));
  EXPECT_GT(model.first_retained(0), 70u);
  EXPECT_NE(st.message.find("first retained offset is " + std::to_string(model.first_retained(0))), std::string::npos)
      << st.message;
  rq.set_offset(model.first_retained(0));
  st = model.Read(rq, &now, &rs, 2);
  EXPECT_TRUE(st.ok()) << st.message;
  ASSERT_GT(rs.records_size(), 0);
  EXPECT_EQ(rs.records(0).offset(), model.first_retained(0));
}

TEST(LogModel, ReadAtTheEndWaitsUntilARecordOfThePartitionArrives) {
  v1::Scenario s = LogScenario(10, 1);
  s.mutable_workload()->set_publish_interval_ms(400);
  TraceLog log;
  FaultSource faults(s.faults(), 1, log);
  LogModel model(s, 1, log, faults);
  v1::ReadRequest rq;
  rq.set_partition(0);
  rq.set_offset(1);  // offset 0 is appended at 0 ms, offset 1 at 400 ms
  rq.set_max_wait_ns(Millis(1000));
  v1::ReadResponse rs;
  VirtualTime now = Millis(5);
  CallStatus st = model.Read(rq, &now, &rs, 1);
  ASSERT_TRUE(st.ok());
  EXPECT_EQ(now, Millis(400));
  ASSERT_EQ(rs.records_size(), 1);
  EXPECT_EQ(rs.records(0).offset(), 1u);
}

TEST(LogModel, PartitionsAddedMidRunAreTracedAndReceiveRecords) {
  v1::Scenario s = LogScenario(400, 2);
  auto* g = s.mutable_log()->add_growth();
  g->set_at_ms(1000);
  g->set_count(3);
  TraceLog log;
  TraceRecorder rec;
  log.AddObserver(&rec);
  FaultSource faults(s.faults(), 4, log);
  LogModel model(s, 4, log, faults);
  model.AdvanceTo(Millis(10000));
  EXPECT_EQ(model.partition_count(), 5u);
  ASSERT_EQ(rec.Of(v1::TraceEvent::kPartitionAdded).size(), 3u);
  EXPECT_EQ(rec.Of(v1::TraceEvent::kPartitionAdded).front().t_ns(), Millis(1000));
  std::uint64_t in_new = 0;
  for (std::uint32_t p = 2; p < 5; ++p) in_new += model.next_offset(p);
  EXPECT_GT(in_new, 0u);
}

TEST(LogMode, CorrectReaderPassesASteadyLog) {
  LogRun run(LogScenario(600, 4));
  const Verdict v = run.Run();
  EXPECT_TRUE(v.passed()) << Failed(v);
  EXPECT_EQ(run.summary.end_reason, "all messages committed");
  EXPECT_EQ(run.summary.committed_messages, 600u);
  EXPECT_EQ(v.duplicate_records, 0u);
}

TEST(LogMode, CorrectReaderPassesCrashesGrowthRetentionAndFaults) {
  v1::Scenario s = LogScenario(800, 3);
  auto* g = s.mutable_log()->add_growth();
  g->set_at_ms(2000);
  g->set_count(2);
  s.mutable_log()->set_retention_ms(1500);
  auto* f = s.mutable_faults();
  f->set_crash_rate(0.02);
  f->set_checkpoint_crash_rate(0.2);
  f->set_commit_failure_rate(0.1);
  f->set_unavailable_rate(0.05);
  f->set_partition_outage_rate(0.05);
  f->set_max_partition_outage_ms(300);
  f->set_empty_read_rate(0.05);
  f->set_lost_bookmark_rate(0.1);
  f->mutable_latency()->set_rate(0.2);
  f->mutable_latency()->set_fixed_ms(30);
  for (std::uint64_t seed : {1, 2, 3, 4, 5}) {
    LogRun run(s, {}, seed);
    const Verdict v = run.Run();
    EXPECT_TRUE(v.passed()) << "seed " << seed << "\n" << Failed(v);
    EXPECT_GT(run.summary.crashes, 0u) << "seed " << seed;
  }
}

TEST(LogMode, ResumeAtCheckpointPlusOneIsASkip) {
  v1::Scenario s = LogScenario(600, 3);
  s.mutable_faults()->set_crash_rate(0.02);
  LogRun run(s, LogBugs{.resume_plus_one = true});
  const Verdict v = run.Run();
  EXPECT_GT(run.Violations(v, Invariant::kResumeExact), 0u) << Failed(v);
  ASSERT_FALSE(v.at(Invariant::kResumeExact).first.empty());
  EXPECT_NE(v.at(Invariant::kResumeExact).first[0].sentence.find("a skip of 1 offset"), std::string::npos)
      << v.at(Invariant::kResumeExact).first[0].sentence;
  EXPECT_GT(run.Violations(v, Invariant::kOffsetGap), 0u);
}

// A duplicate's evidence: a record of the run that held its first record,
// the commit that made that run durable, then the second record, all of the
// duplicate's partition and in that order.
TEST(LogMode, ADuplicateCitesTheFirstRecordItsCommitAndTheSecond) {
  v1::Scenario s = LogScenario(600, 3);
  s.mutable_faults()->set_crash_rate(0.02);
  LogRun run(s, LogBugs{.resume_minus_one = true});
  const Verdict v = run.Run();
  ASSERT_FALSE(v.at(Invariant::kDuplicateOutput).first.empty()) << Failed(v);
  const Violation& dup = v.at(Invariant::kDuplicateOutput).first[0];
  unsigned partition = 0;
  unsigned long long offset = 0;
  ASSERT_EQ(std::sscanf(dup.sentence.c_str(), "Partition %u offset %llu", &partition, &offset), 2) << dup.sentence;
  const std::string of_partition = "partition " + std::to_string(partition) + " offset ";
  std::vector<const Evidence*> emitted;
  std::uint64_t commit_between = 0;
  for (const Evidence& e : dup.evidence) {
    if (e.what.find("emitted a record of") != std::string::npos) {
      EXPECT_NE(e.what.find(of_partition), std::string::npos) << e.what;
      emitted.push_back(&e);
    } else if (emitted.size() == 1 && e.what.find("committed checkpoint") != std::string::npos) {
      commit_between = e.seq;
    }
  }
  ASSERT_EQ(emitted.size(), 2u) << dup.sentence;
  EXPECT_GT(commit_between, emitted[0]->seq);
  EXPECT_LT(commit_between, emitted[1]->seq);
  // Each cited record begins the run that holds the offset: at or before it.
  for (const Evidence* e : emitted) {
    const auto at = e->what.find(of_partition) + of_partition.size();
    EXPECT_LE(std::stoull(e->what.substr(at)), offset) << e->what;
  }
}

TEST(LogMode, ResumeAtCheckpointMinusOneIsARewindAndADuplicate) {
  v1::Scenario s = LogScenario(600, 3);
  s.mutable_faults()->set_crash_rate(0.02);
  LogRun run(s, LogBugs{.resume_minus_one = true});
  const Verdict v = run.Run();
  EXPECT_GT(run.Violations(v, Invariant::kResumeExact), 0u) << Failed(v);
  EXPECT_GT(run.Violations(v, Invariant::kDuplicateOutput), 0u);

  // Under at-least-once a rewind is counted, not failed.
  s.mutable_profile()->set_guarantee(v1::Profile::AT_LEAST_ONCE);
  LogRun lax(s, LogBugs{.resume_minus_one = true});
  const Verdict w = lax.Run();
  EXPECT_EQ(lax.Violations(w, Invariant::kResumeExact), 0u) << Failed(w);
  EXPECT_GT(w.rewinds, 0u);
  EXPECT_GT(w.duplicate_records, 0u);
}

TEST(LogMode, BookmarkSavedWhenReadIsPositionBeforeCommit) {
  LogRun run(LogScenario(300, 2), LogBugs{.bookmark_on_read = true});
  const Verdict v = run.Run();
  EXPECT_GT(run.Violations(v, Invariant::kPositionBeforeCommit), 0u) << Failed(v);
}

TEST(LogMode, IgnoringNewPartitionsIsNamed) {
  v1::Scenario s = LogScenario(600, 2);
  auto* g = s.mutable_log()->add_growth();
  g->set_at_ms(1500);
  g->set_count(2);
  LogRun run(s, LogBugs{.ignore_new_partitions = true});
  const Verdict v = run.Run();
  ASSERT_GT(run.Violations(v, Invariant::kNewPartition), 0u) << Failed(v);
  EXPECT_NE(v.at(Invariant::kNewPartition).first[0].sentence.find("was never read"), std::string::npos);
}

TEST(LogMode, JumpingPastDeletedRecordsSilentlyIsCaughtAndReportingThemIsNot) {
  v1::Scenario s = LogScenario(600, 2);
  s.mutable_log()->set_retention_ms(300);
  s.mutable_faults()->mutable_latency()->set_rate(0.2);  // a reader that stalls now and then
  s.mutable_faults()->mutable_latency()->set_fixed_ms(500);
  LogRun bad(s, LogBugs{.silent_skip = true});
  const Verdict v = bad.Run();
  EXPECT_GT(bad.Violations(v, Invariant::kSilentSkip), 0u) << Failed(v);

  LogRun good(s);
  const Verdict w = good.Run();
  EXPECT_EQ(good.Violations(w, Invariant::kSilentSkip), 0u) << Failed(w);
  EXPECT_GT(w.gap_offsets + w.deleted_unread, 0u);
}

TEST(LogMode, WatermarkFromTheFastestPartitionMakesLateRecords) {
  v1::Scenario s = LogScenario(600, 4);
  s.mutable_log()->set_max_partition_lag_ms(3000);
  auto* p = s.mutable_profile();
  p->set_watermark_policy(v1::Profile::BOUNDED_LATENESS);
  p->set_allowed_lateness_ms(0);
  LogRun bad(s, LogBugs{.fastest_watermark = true});
  const Verdict v = bad.Run();
  EXPECT_GT(bad.Violations(v, Invariant::kLateRecord), 0u) << Failed(v);
  LogRun good(s);
  good.port.idle_lag = Millis(4000);  // covers the partitions' lag
  const Verdict w = good.Run();
  EXPECT_TRUE(w.passed()) << Failed(w);
}

TEST(LogMode, AnIdlePartitionMustNotHoldTheWatermarkBack) {
  v1::Scenario s = LogScenario(1500, 3);
  s.mutable_log()->add_idle_partitions(2);
  auto* p = s.mutable_profile();
  p->set_watermark_policy(v1::Profile::MONOTONIC);
  p->set_idle_timeout_ms(2000);
  p->set_idle_max_lag_ms(1000);
  LogRun bad(s, LogBugs{.idle_stalls = true});
  const Verdict v = bad.Run();
  EXPECT_GT(bad.Violations(v, Invariant::kWatermarkStall), 0u) << Failed(v);
  LogRun good(s);
  const Verdict w = good.Run();
  EXPECT_TRUE(w.passed()) << Failed(w);
}

TEST(LogMode, OneResumePointForEveryPartitionLosesOffsets) {
  v1::Scenario s = LogScenario(600, 3);
  s.mutable_log()->set_max_partition_lag_ms(0);
  s.mutable_faults()->set_crash_rate(0.02);
  LogRun run(s, LogBugs{.global_resume_point = true});
  const Verdict v = run.Run();
  EXPECT_GT(run.Violations(v, Invariant::kOffsetGap) + run.Violations(v, Invariant::kResumeExact), 0u) << Failed(v);
  EXPECT_GT(run.Violations(v, Invariant::kOffsetGap), 0u) << Failed(v);
}

TEST(LogMode, QueueCallsAgainstALogAreRefusedAsProtocolErrors) {
  v1::Scenario s = LogScenario(10, 1);
  TraceLog log;
  TraceRecorder rec;
  log.AddObserver(&rec);
  FaultSource faults(s.faults(), 1, log);
  LogModel model(s, 1, log, faults);
  BrokerSession session(model, log, faults);
  session.BeginCall(0);
  v1::PullResponse rs;
  CallStatus st = session.Pull({}, &rs);
  session.EndCall();
  EXPECT_EQ(st.code, CallCode::kFailedPrecondition);
  ASSERT_EQ(rec.Of(v1::TraceEvent::kProtocolError).size(), 1u);
  EXPECT_NE(st.message.find("this run's broker is a log"), std::string::npos) << st.message;
}

}  // namespace
}  // namespace weir
