// Many readers in-process: the log broker model, the runtime with several
// reader ports (one FakeLogReader each, fake_log_reader.h), and the oracle.
// The correct reader must pass cuts, moves, joins, leaves and crashes; each
// many-reader bug must be refused by the rule written for it. A second part
// feeds the oracle hand-built traces, so each rule is shown to fire on the
// exact history it describes and to stay quiet on the correct one.
#include <gtest/gtest.h>

#include <memory>

#include "harness/broker/broker_session.h"
#include "harness/broker/log/log_model.h"
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

v1::Scenario ReadersScenario(std::uint32_t readers, std::uint32_t partitions) {
  v1::Scenario s;
  s.set_name("tide gauges, many readers");
  auto* w = s.mutable_workload();
  w->set_messages(900);
  w->set_publish_interval_ms(5);
  w->set_payload_bytes(16);
  auto* l = s.mutable_log();
  l->set_partitions(partitions);
  l->set_keys(64);
  l->set_max_read(64);
  l->set_max_wait_ms(1000);
  l->set_broker_restart_ms(500);
  s.mutable_readers()->set_count(readers);
  s.mutable_runtime()->set_checkpoint_every_records(40);
  s.mutable_runtime()->set_checkpoint_interval_ms(300);
  s.mutable_runtime()->set_drain_bound_ms(30000);
  s.mutable_runtime()->set_max_same_time_steps(1000);
  s.mutable_profile()->set_guarantee(v1::Profile::EXACTLY_ONCE);
  s.mutable_profile()->set_watermark_policy(v1::Profile::MONOTONIC);
  return s;
}

struct ReadersRun {
  ReadersRun(v1::Scenario s, LogBugs bugs = {}, std::uint64_t seed = 3)
      : scenario(std::move(s)),
        faults(scenario.faults(), seed, log),
        broker(scenario, seed, log, faults),
        session(broker, log, faults),
        oracle(scenario.profile(), v1::LOG, scenario.readers().count()) {
    for (std::uint32_t r = 0; r < scenario.readers().count(); ++r) {
      ports.push_back(std::make_unique<FakeLogReader>(bugs));
    }
    log.AddObserver(&rec);
    log.AddObserver(&oracle);
  }
  Verdict Run() {
    std::vector<ConnectorPort*> list;
    for (auto& p : ports) list.push_back(p.get());
    RuntimeModel runtime(scenario, broker, session, list, log, faults);
    summary = runtime.Run();
    return oracle.Finish();
  }
  std::size_t Count(v1::TraceEvent::KindCase kind) const { return rec.Of(kind).size(); }

  v1::Scenario scenario;
  TraceLog log;
  TraceRecorder rec;
  FaultSource faults;
  LogModel broker;
  BrokerSession session;
  Oracle oracle;
  std::vector<std::unique_ptr<FakeLogReader>> ports;
  RunSummary summary;
};

v1::Scenario Stormy(std::uint32_t readers) {
  v1::Scenario s = ReadersScenario(readers, 6);
  auto* r = s.mutable_readers();
  r->set_cut_rate(0.08);
  r->set_cut_crash_rate(0.2);
  r->set_move_rate(0.5);
  r->set_move_crash_rate(0.2);
  r->set_membership_rate(0.2);
  s.mutable_faults()->set_crash_rate(0.01);
  s.mutable_faults()->set_checkpoint_crash_rate(0.1);
  s.mutable_faults()->set_commit_failure_rate(0.05);
  return s;
}

TEST(ManyReaders, StartSpreadsPartitionsRoundRobinAndEveryOffsetCommitsOnce) {
  ReadersRun run(ReadersScenario(3, 7));
  const Verdict v = run.Run();
  EXPECT_TRUE(v.passed()) << Failed(v);
  EXPECT_EQ(run.summary.end_reason, "all messages committed");
  EXPECT_EQ(run.summary.committed_messages, 900u);
  // Partition p opens with reader p mod 3: 3, 2 and 2 partitions.
  const auto opened = run.rec.Of(v1::TraceEvent::kOpened);
  ASSERT_EQ(opened.size(), 3u);
  for (const auto& e : opened) {
    for (const auto& span : e.opened().spans()) EXPECT_EQ(span.partition() % 3, e.reader());
    EXPECT_FALSE(e.opened().new_partitions_held());
  }
  EXPECT_EQ(opened[0].opened().spans_size(), 3);
  // Checkpoint k is taken from every live reader: three checkpoint events per commit.
  EXPECT_EQ(run.Count(v1::TraceEvent::kCheckpoint), 3 * run.Count(v1::TraceEvent::kCommitted));
}

TEST(ManyReaders, CorrectReadersPassCutsMovesJoinsLeavesAndCrashes) {
  std::size_t cuts = 0, moves = 0, left = 0, joined = 0, crashes = 0;
  for (std::uint64_t seed : {1, 2, 3, 4, 5, 6}) {
    ReadersRun run(Stormy(4), {}, seed);
    const Verdict v = run.Run();
    EXPECT_TRUE(v.passed()) << "seed " << seed << "\n" << Failed(v);
    EXPECT_EQ(run.summary.committed_messages, 900u) << "seed " << seed;
    for (const auto& e : run.rec.Of(v1::TraceEvent::kCut)) cuts += e.cut().has_tail();
    for (const auto& e : run.rec.Of(v1::TraceEvent::kAssigned)) moves += e.assigned().why() == "move";
    left += run.Count(v1::TraceEvent::kReaderLeft);
    joined += run.Count(v1::TraceEvent::kReaderJoined);
    crashes += run.summary.crashes;
  }
  // The storm did happen (else passing proves nothing).
  EXPECT_GT(cuts, 5u);
  EXPECT_GT(moves, 5u);
  EXPECT_GT(left, 0u);
  EXPECT_GT(joined, 0u);
  EXPECT_GT(crashes, 5u);
}

TEST(ManyReaders, ReplayOfTheSameSeedIsIdentical) {
  ReadersRun a(Stormy(3), {}, 9), b(Stormy(3), {}, 9);
  a.Run();
  b.Run();
  const auto& x = a.rec.events;
  const auto& y = b.rec.events;
  ASSERT_EQ(x.size(), y.size());
  for (std::size_t i = 0; i < x.size(); ++i) {
    ASSERT_EQ(x[i].SerializeAsString(), y[i].SerializeAsString()) << "event " << i;
  }
}

struct BugCase {
  const char* name;
  LogBugs bugs;
  Invariant expected;
  v1::Scenario scenario;
};

v1::Scenario CutHeavy() {
  v1::Scenario s = ReadersScenario(3, 4);
  s.mutable_readers()->set_cut_rate(0.1);
  return s;
}
v1::Scenario MoveHeavy(double crash_rate) {
  v1::Scenario s = ReadersScenario(3, 6);
  s.mutable_readers()->set_move_rate(0.7);
  s.mutable_faults()->set_crash_rate(crash_rate);
  return s;
}

TEST(ManyReaders, EachBugIsRefusedByItsRule) {
  const BugCase cases[] = {
      {"cut_tail_emit", LogBugs{.cut_tail_emit = true}, Invariant::kRecordOutsideSpan, CutHeavy()},
      {"cut_overlap", LogBugs{.cut_overlap = true}, Invariant::kCutConservation, CutHeavy()},
      {"cut_drops_first", LogBugs{.cut_drops_first = true}, Invariant::kCutConservation, CutHeavy()},
      {"keeps_revoked", LogBugs{.keeps_revoked = true}, Invariant::kRecordOutsideSpan, MoveHeavy(0)},
      {"checkpoint_forgets_assigned", LogBugs{.checkpoint_forgets_assigned = true}, Invariant::kCheckpointCoverage,
       MoveHeavy(0)},
      {"trusts_state", LogBugs{.trusts_state = true}, Invariant::kRecordOutsideSpan, MoveHeavy(0.03)},
  };
  for (const BugCase& c : cases) {
    ReadersRun run(c.scenario, c.bugs);
    const Verdict v = run.Run();
    EXPECT_GT(v.at(c.expected).violations, 0u) << c.name << "\n" << Failed(v);
    // And the correct reader passes the very same scenario and seed.
    ReadersRun good(c.scenario);
    const Verdict w = good.Run();
    EXPECT_TRUE(w.passed()) << c.name << " (correct reader)\n" << Failed(w);
  }
}

// Hand-built traces: two readers, partition 0.
class Trace {
 public:
  Trace() : oracle_(Profile(), v1::LOG, 2) {}
  static v1::Profile Profile() {
    v1::Profile p;
    p.set_guarantee(v1::Profile::EXACTLY_ONCE);
    return p;
  }
  v1::TraceEvent& Next(std::uint32_t reader) {
    e_.Clear();
    e_.set_seq(seq_++);
    e_.set_t_ns(Millis(static_cast<std::int64_t>(seq_)));
    e_.set_reader(reader);
    e_.set_incarnation(reader + 1);
    return e_;
  }
  void Send() { oracle_.OnEvent(e_); }
  static void Fill(v1::SpanHeld* s, std::uint64_t start, std::optional<std::uint64_t> end) {
    s->set_partition(0);
    s->set_start_offset(start);
    if (end.has_value()) s->set_end_offset(*end);
  }
  void Open(std::uint32_t r, std::optional<std::pair<std::uint64_t, std::optional<std::uint64_t>>> span) {
    auto* x = Next(r).mutable_opened();
    if (span.has_value()) Fill(x->add_spans(), span->first, span->second);
    Send();
  }
  void Append(std::uint64_t n) {
    for (std::uint64_t o = 0; o < n; ++o) {
      auto* x = Next(0).mutable_appended();
      x->set_offset(o);
      Send();
    }
  }
  void Read(std::uint32_t r, std::uint64_t from, std::uint64_t to) {
    auto* x = Next(r).mutable_log_read();
    x->set_offset(from);
    x->set_records(static_cast<std::uint32_t>(to - from));
    x->set_next_offset(to);
    Send();
  }
  void Emit(std::uint32_t r, std::uint64_t from, std::uint64_t to) {
    for (std::uint64_t o = from; o < to; ++o) {
      auto* x = Next(r).mutable_emitted();
      x->set_offset(o);
      x->set_step(1);
      Send();
    }
  }
  void Cut(std::uint32_t r, std::pair<std::uint64_t, std::optional<std::uint64_t>> held,
           std::pair<std::uint64_t, std::uint64_t> head,
           std::optional<std::pair<std::uint64_t, std::optional<std::uint64_t>>> tail) {
    auto* x = Next(r).mutable_cut();
    Fill(x->mutable_held(), held.first, held.second);
    Fill(x->mutable_head(), head.first, head.second);
    if (tail.has_value()) Fill(x->mutable_tail(), tail->first, tail->second);
    x->set_to_reader(1 - r);
    Send();
  }
  void Assign(std::uint32_t r, std::uint64_t start, std::optional<std::uint64_t> end) {
    auto* x = Next(r).mutable_assigned();
    Fill(x->add_spans(), start, end);
    x->set_why("cut");
    Send();
  }
  void Checkpoint(std::uint32_t r, std::uint64_t id, std::vector<std::pair<std::uint32_t, std::uint64_t>> points) {
    auto* x = Next(r).mutable_checkpoint();
    x->set_checkpoint_id(id);
    for (const auto& [p, next] : points) {
      auto* y = x->add_resume_points();
      y->set_partition(p);
      y->set_next_offset(next);
    }
    Send();
  }
  void Commit(std::uint64_t id) {
    Next(0).mutable_committed()->set_checkpoint_id(id);
    Send();
  }
  void End() {
    Next(0).mutable_run_ended()->set_reason("all messages committed");
    Send();
  }
  Verdict Finish() { return oracle_.Finish(); }

 private:
  Oracle oracle_;
  v1::TraceEvent e_;
  std::uint64_t seq_ = 0;
};

// A correct cut: reader 0 emitted [0, 4), keeps [0, 6), gives [6, open) to reader 1.
void CorrectCutHistory(Trace& t) {
  t.Append(10);
  t.Open(0, std::make_pair(0, std::nullopt));
  t.Open(1, std::nullopt);
  t.Read(0, 0, 6);
  t.Emit(0, 0, 4);
  t.Cut(0, {0, std::nullopt}, {0, 6}, std::make_pair(6, std::nullopt));
  t.Assign(1, 6, std::nullopt);
  t.Emit(0, 4, 6);
  t.Read(1, 6, 10);
  t.Emit(1, 6, 10);
  t.Checkpoint(0, 1, {{0, 6}});
  t.Checkpoint(1, 1, {{0, 10}});
  t.Commit(1);
  t.End();
}

TEST(ReaderRules, ACorrectCutAndHandOverPassesEveryRule) {
  Trace t;
  CorrectCutHistory(t);
  const Verdict v = t.Finish();
  EXPECT_TRUE(v.passed()) << Failed(v);
  for (Invariant i : {Invariant::kRecordOutsideSpan, Invariant::kDoubleHolding, Invariant::kCutConservation,
                      Invariant::kCheckpointCoverage}) {
    EXPECT_TRUE(v.at(i).applies) << InvariantName(i);
  }
}

TEST(ReaderRules, ARecordPastTheHeadIsOutsideTheSpan) {
  Trace t;
  t.Append(10);
  t.Open(0, std::make_pair(0, std::nullopt));
  t.Open(1, std::nullopt);
  t.Read(0, 0, 10);
  t.Emit(0, 0, 4);
  t.Cut(0, {0, std::nullopt}, {0, 6}, std::make_pair(6, std::nullopt));
  t.Assign(1, 6, std::nullopt);
  t.Emit(0, 4, 8);  // 6 and 7 were given away
  const Verdict v = t.Finish();
  EXPECT_EQ(v.at(Invariant::kRecordOutsideSpan).violations, 2u) << Failed(v);
}

TEST(ReaderRules, OverlappingHeadAndTailBreakConservationAndAreHeldTwice) {
  Trace t;
  t.Append(10);
  t.Open(0, std::make_pair(0, std::nullopt));
  t.Open(1, std::nullopt);
  t.Read(0, 0, 4);
  t.Emit(0, 0, 4);
  t.Cut(0, {0, std::nullopt}, {0, 7}, std::make_pair(6, std::nullopt));
  t.Assign(1, 6, std::nullopt);
  const Verdict v = t.Finish();
  EXPECT_EQ(v.at(Invariant::kCutConservation).violations, 1u) << Failed(v);
  EXPECT_NE(v.at(Invariant::kCutConservation).first[0].sentence.find("overlap"), std::string::npos);
  EXPECT_EQ(v.at(Invariant::kDoubleHolding).violations, 1u) << Failed(v);
}

TEST(ReaderRules, ATailThatSkipsAnOffsetBreaksConservation) {
  Trace t;
  t.Append(10);
  t.Open(0, std::make_pair(0, std::nullopt));
  t.Open(1, std::nullopt);
  t.Cut(0, {0, std::nullopt}, {0, 6}, std::make_pair(7, std::nullopt));
  const Verdict v = t.Finish();
  ASSERT_EQ(v.at(Invariant::kCutConservation).violations, 1u) << Failed(v);
  EXPECT_NE(v.at(Invariant::kCutConservation).first[0].sentence.find("belong to neither"), std::string::npos);
  EXPECT_EQ(v.at(Invariant::kDoubleHolding).violations, 0u);
}

TEST(ReaderRules, AHeadThatEndsBeforeWhatWasEmittedBreaksConservation) {
  Trace t;
  t.Append(10);
  t.Open(0, std::make_pair(0, std::nullopt));
  t.Open(1, std::nullopt);
  t.Read(0, 0, 6);
  t.Emit(0, 0, 6);
  t.Cut(0, {0, std::nullopt}, {0, 4}, std::make_pair(4, std::nullopt));
  const Verdict v = t.Finish();
  ASSERT_EQ(v.at(Invariant::kCutConservation).violations, 1u) << Failed(v);
  EXPECT_NE(v.at(Invariant::kCutConservation).first[0].sentence.find("already emitted up to offset 5"),
            std::string::npos);
}

TEST(ReaderRules, AssigningWhatAnotherReaderHoldsIsDoubleHolding) {
  Trace t;
  t.Append(10);
  t.Open(0, std::make_pair(0, std::nullopt));
  t.Open(1, std::nullopt);
  t.Assign(1, 3, std::nullopt);
  const Verdict v = t.Finish();
  EXPECT_EQ(v.at(Invariant::kDoubleHolding).violations, 1u) << Failed(v);
}

TEST(ReaderRules, ACheckpointMustNameEverySpanHeldAndNoOther) {
  {
    Trace t;
    t.Append(10);
    t.Open(0, std::make_pair(0, 5));
    t.Open(1, std::nullopt);
    t.Assign(1, 5, std::nullopt);
    t.Checkpoint(0, 1, {{0, 0}});
    t.Checkpoint(1, 1, {});  // forgets the span it was given
    const Verdict v = t.Finish();
    EXPECT_EQ(v.at(Invariant::kCheckpointCoverage).violations, 1u) << Failed(v);
  }
  {
    Trace t;
    t.Append(10);
    t.Open(0, std::make_pair(0, 5));
    t.Open(1, std::nullopt);
    t.Checkpoint(1, 1, {{0, 5}});  // names a partition it does not hold
    const Verdict v = t.Finish();
    EXPECT_EQ(v.at(Invariant::kCheckpointCoverage).violations, 1u) << Failed(v);
  }
  {
    Trace t;
    t.Append(10);
    t.Open(0, std::make_pair(0, 5));
    t.Open(1, std::nullopt);
    t.Checkpoint(0, 1, {{0, 7}});  // a resume point past its span's end
    const Verdict v = t.Finish();
    EXPECT_EQ(v.at(Invariant::kCheckpointCoverage).violations, 1u) << Failed(v);
  }
}

TEST(ReaderRules, OneReaderRunsDoNotApplyTheSpanRules) {
  Oracle oracle(Trace::Profile(), v1::LOG, 1);
  const Verdict v = oracle.Finish();
  for (Invariant i : {Invariant::kRecordOutsideSpan, Invariant::kDoubleHolding, Invariant::kCutConservation,
                      Invariant::kCheckpointCoverage}) {
    EXPECT_FALSE(v.at(i).applies) << InvariantName(i);
  }
}

}  // namespace
}  // namespace weir
