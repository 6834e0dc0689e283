#include "harness/oracle/oracle.h"
#include "harness/report/text_report.h"

#include <algorithm>

#include <gtest/gtest.h>

namespace weir {
namespace {

// Builds a trace by hand and feeds it to an oracle.
class TraceBuilder {
 public:
  explicit TraceBuilder(v1::Profile::Guarantee g = v1::Profile::EXACTLY_ONCE, std::int64_t min_backoff_ms = 0)
      : oracle_(Profile(g, min_backoff_ms)) {}
  explicit TraceBuilder(const v1::Profile& profile) : oracle_(profile) {}

  // The next event happens at t (the others use seq ms).
  TraceBuilder& At(VirtualTime t) {
    next_t_ = t;
    return *this;
  }
  std::uint64_t Record(std::uint64_t id, VirtualTime event_time, std::uint64_t step = 1) {
    auto& e = Next();
    e.mutable_emitted()->set_message_id(id);
    e.mutable_emitted()->set_event_time_ns(event_time);
    e.mutable_emitted()->set_step(step);
    return Send(e);
  }
  // The end of a step; resume_at defaults to the step's own time.
  std::uint64_t Stepped(std::optional<std::int64_t> watermark, bool broker_idle,
                        std::optional<VirtualTime> resume_at = std::nullopt) {
    auto& e = Next();
    auto* x = e.mutable_stepped();
    x->set_step(++step_);
    if (watermark.has_value()) x->set_watermark_ns(*watermark);
    x->set_broker_idle(broker_idle);
    x->set_resume_at_ns(resume_at.value_or(e.t_ns()));
    return Send(e);
  }
  std::uint64_t AckIgnored(std::uint64_t receipt, const std::string& reason) {
    auto& e = Next();
    e.mutable_ack_ignored()->set_receipt(receipt);
    e.mutable_ack_ignored()->set_reason(reason);
    return Send(e);
  }

  std::uint64_t Published(std::uint64_t id, std::int64_t event_time = 0) {
    auto& e = Next();
    e.mutable_published()->set_message_id(id);
    e.mutable_published()->set_event_time_ns(event_time);
    return Send(e);
  }
  std::uint64_t Delivered(std::uint64_t id, std::uint64_t receipt) {
    auto& e = Next();
    e.mutable_delivered()->set_message_id(id);
    e.mutable_delivered()->set_receipt(receipt);
    e.mutable_delivered()->set_attempt(1);
    return Send(e);
  }
  std::uint64_t Emitted(std::uint64_t id) {
    auto& e = Next();
    e.mutable_emitted()->set_message_id(id);
    return Send(e);
  }
  std::uint64_t Watermark(std::int64_t w) {
    auto& e = Next();
    e.mutable_stepped()->set_watermark_ns(w);
    return Send(e);
  }
  std::uint64_t Checkpoint(std::uint64_t cp, std::int64_t watermark = 0) {
    auto& e = Next();
    e.mutable_checkpoint()->set_checkpoint_id(cp);
    e.mutable_checkpoint()->set_watermark_ns(watermark);
    return Send(e);
  }
  std::uint64_t Committed(std::uint64_t cp) {
    auto& e = Next();
    e.mutable_committed()->set_checkpoint_id(cp);
    return Send(e);
  }
  std::uint64_t CommitFailed(std::uint64_t cp) {
    auto& e = Next();
    e.mutable_commit_failed()->set_checkpoint_id(cp);
    return Send(e);
  }
  std::uint64_t Acked(std::uint64_t id, std::uint64_t receipt) {
    auto& e = Next();
    e.mutable_acked()->set_message_id(id);
    e.mutable_acked()->set_receipt(receipt);
    return Send(e);
  }
  std::uint64_t Crashed() {
    auto& e = Next();
    e.mutable_crashed()->set_point("test");
    return Send(e);
  }
  std::uint64_t Opened(std::uint64_t cp, std::optional<std::int64_t> watermark) {
    ++incarnation_;
    auto& e = Next();
    e.mutable_opened()->set_restored(cp != 0);
    e.mutable_opened()->set_checkpoint_id(cp);
    if (watermark.has_value()) e.mutable_opened()->set_watermark_ns(*watermark);
    return Send(e);
  }
  // Broker calls at explicit virtual times (the other events use seq ms).
  std::uint64_t BrokerCall(const std::string& method, VirtualTime t, std::uint64_t position = 1) {
    auto& e = Next();
    e.set_t_ns(t);
    e.mutable_broker_call()->set_method(method);
    e.mutable_broker_call()->set_position(position);
    return Send(e);
  }
  std::uint64_t BrokerCallFailed(const std::string& method, VirtualTime t, int code, VirtualDuration retry_after = 0) {
    auto& e = Next();
    e.set_t_ns(t);
    e.mutable_broker_call_failed()->set_method(method);
    e.mutable_broker_call_failed()->set_code(code);
    e.mutable_broker_call_failed()->set_retry_after_ns(retry_after);
    return Send(e);
  }
  // A step that answers "finished".
  std::uint64_t Finished() {
    auto& e = Next();
    e.mutable_stepped()->set_step(++step_);
    e.mutable_stepped()->set_finished(true);
    e.mutable_stepped()->set_resume_at_ns(kNever);
    return Send(e);
  }
  std::uint64_t ConnectorError(const std::string& call, int code, const std::string& detail) {
    auto& e = Next();
    e.mutable_connector_error()->set_call(call);
    e.mutable_connector_error()->set_code(code);
    e.mutable_connector_error()->set_detail(detail);
    return Send(e);
  }
  std::uint64_t ProtocolError(const std::string& call, const std::string& detail) {
    auto& e = Next();
    e.mutable_protocol_error()->set_call(call);
    e.mutable_protocol_error()->set_detail(detail);
    return Send(e);
  }
  Verdict End() {
    auto& e = Next();
    e.mutable_run_ended()->set_reason("test over");
    Send(e);
    return oracle_.Finish();
  }

 private:
  static v1::Profile Profile(v1::Profile::Guarantee g, std::int64_t min_backoff_ms) {
    v1::Profile p;
    p.set_guarantee(g);
    p.set_min_backoff_ms(min_backoff_ms);
    return p;
  }
  v1::TraceEvent& Next() {
    event_.Clear();
    event_.set_seq(seq_);
    event_.set_t_ns(next_t_.value_or(Millis(static_cast<std::int64_t>(seq_))));
    next_t_.reset();
    event_.set_incarnation(incarnation_);
    return event_;
  }
  std::uint64_t Send(const v1::TraceEvent& e) {
    oracle_.OnEvent(e);
    return seq_++;
  }
  Oracle oracle_;
  v1::TraceEvent event_;
  std::uint64_t seq_ = 0;
  std::uint64_t incarnation_ = 1;
  std::uint64_t step_ = 0;
  std::optional<VirtualTime> next_t_;
};

std::vector<std::uint64_t> Seqs(const Violation& v) {
  std::vector<std::uint64_t> out;
  for (const auto& e : v.evidence) out.push_back(e.seq);
  return out;
}

TEST(Oracle, AckBeforeCommitNamesDeliveryRecordAndAck) {
  TraceBuilder t;
  t.Published(1);
  const auto d = t.Delivered(1, 10);
  const auto e = t.Emitted(1);
  const auto a = t.Acked(1, 10);
  t.Checkpoint(1);
  t.Committed(1);
  Verdict v = t.End();
  const auto& r = v.at(Invariant::kAckBeforeCommit);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_EQ(Seqs(r.first[0]), (std::vector<std::uint64_t>{d, e, a}));
  EXPECT_NE(r.first[0].sentence.find("message 1"), std::string::npos);
  EXPECT_EQ(v.at(Invariant::kLostMessage).violations, 0u);
}

TEST(Oracle, AckAfterCommitHolds) {
  TraceBuilder t;
  t.Published(1);
  t.Delivered(1, 10);
  t.Emitted(1);
  t.Checkpoint(1);
  t.Committed(1);
  t.Acked(1, 10);
  Verdict v = t.End();
  EXPECT_TRUE(v.passed());
}

TEST(Oracle, AckOfAnyReceiptMatchesByMessageId) {
  TraceBuilder t;
  t.Published(1);
  t.Delivered(1, 10);
  t.Delivered(1, 11);  // a duplicate delivery: another receipt, same message
  t.Emitted(1);
  t.Checkpoint(1);
  t.Committed(1);
  t.Acked(1, 11);
  EXPECT_TRUE(t.End().passed());
}

TEST(Oracle, AckWhileCheckpointTakenButNotCommittedIsAViolation) {
  TraceBuilder t;
  t.Published(1);
  t.Delivered(1, 10);
  t.Emitted(1);
  t.Checkpoint(1);
  t.Acked(1, 10);  // checkpoint taken, not committed yet
  t.Committed(1);
  EXPECT_EQ(t.End().at(Invariant::kAckBeforeCommit).violations, 1u);
}

TEST(Oracle, MessageWithoutCommittedRecordAtTheEndIsLost) {
  TraceBuilder t;
  const auto p = t.Published(1);
  t.Published(2);
  t.Delivered(2, 20);
  t.Emitted(2);
  t.Checkpoint(1);
  t.Committed(1);
  Verdict v = t.End();
  const auto& r = v.at(Invariant::kLostMessage);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_EQ(r.first[0].evidence.front().seq, p);
}

TEST(Oracle, CrashDiscardsTheOpenEpoch) {
  TraceBuilder t;
  t.Published(1);
  t.Delivered(1, 10);
  t.Emitted(1);
  t.Crashed();
  t.Opened(0, std::nullopt);
  t.Checkpoint(1);  // the new incarnation checkpoints nothing of message 1
  t.Committed(1);
  EXPECT_EQ(t.End().at(Invariant::kLostMessage).violations, 1u);
}

TEST(Oracle, FailedCommitDiscardsItsEpoch) {
  TraceBuilder t;
  t.Published(1);
  t.Delivered(1, 10);
  t.Emitted(1);
  t.Checkpoint(1);
  t.CommitFailed(1);
  EXPECT_EQ(t.End().at(Invariant::kLostMessage).violations, 1u);
}

TEST(Oracle, SecondCommittedRecordIsADuplicateUnderExactlyOnce) {
  TraceBuilder t;
  t.Published(1);
  t.Delivered(1, 10);
  t.Emitted(1);
  t.Checkpoint(1);
  t.Committed(1);
  t.Delivered(1, 11);
  t.Emitted(1);
  t.Checkpoint(2);
  t.Committed(2);
  Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kDuplicateOutput).violations, 1u);
  EXPECT_EQ(v.duplicate_records, 1u);
}

std::vector<std::uint64_t> EvidenceSeqs(const Verdict& v, Invariant inv) {
  std::vector<std::uint64_t> seqs;
  if (v.at(inv).first.empty()) return seqs;
  for (const Evidence& e : v.at(inv).first[0].evidence) seqs.push_back(e.seq);
  return seqs;
}

// The evidence of a duplicate: the first record and the commit that made it
// durable, then the second record and its commit (the event that saw it).
TEST(Oracle, ADuplicateCitesTheFirstRecordAndItsCommit) {
  TraceBuilder t;
  t.Published(1);
  t.Delivered(1, 10);
  const std::uint64_t first = t.Emitted(1);
  t.Checkpoint(1);
  const std::uint64_t first_commit = t.Committed(1);
  t.Delivered(1, 11);  // redelivered: its ack never came
  const std::uint64_t second = t.Emitted(1);
  t.Checkpoint(2);
  const std::uint64_t second_commit = t.Committed(2);
  const Verdict v = t.End();
  EXPECT_EQ(EvidenceSeqs(v, Invariant::kDuplicateOutput),
            (std::vector<std::uint64_t>{first, first_commit, second, second_commit}));
}

TEST(Oracle, ADuplicateOfAnAckedMessageStillCitesItsFirstRecord) {
  TraceBuilder t;
  t.Published(1);
  t.Delivered(1, 10);
  const std::uint64_t first = t.Emitted(1);
  t.Checkpoint(1);
  const std::uint64_t first_commit = t.Committed(1);
  t.Acked(1, 10);      // committed and acked: retired from the in-flight table
  t.Delivered(1, 11);  // a duplicate delivery after the ack
  const std::uint64_t second = t.Emitted(1);
  t.Checkpoint(2);
  const std::uint64_t second_commit = t.Committed(2);
  const Verdict v = t.End();
  EXPECT_EQ(EvidenceSeqs(v, Invariant::kDuplicateOutput),
            (std::vector<std::uint64_t>{first, first_commit, second, second_commit}));
}

// Memory stays bounded: only the last 4,096 retired messages keep their
// first record (Oracle::kRetiredEvidence); an older one's duplicate is still
// a violation, cited by its second record alone.
TEST(Oracle, RetiredEvidenceIsBounded) {
  TraceBuilder t;
  constexpr std::uint64_t kMessages = 4096 + 10;
  for (std::uint64_t id = 1; id <= kMessages; ++id) {
    t.Published(id);
    t.Delivered(id, 100 + id);
    t.Emitted(id);
  }
  t.Checkpoint(1);
  t.Committed(1);
  for (std::uint64_t id = 1; id <= kMessages; ++id) t.Acked(id, 100 + id);
  t.Delivered(1, 99999);
  const std::uint64_t second = t.Emitted(1);
  t.Checkpoint(2);
  const std::uint64_t second_commit = t.Committed(2);
  const Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kDuplicateOutput).violations, 1u);
  EXPECT_EQ(EvidenceSeqs(v, Invariant::kDuplicateOutput), (std::vector<std::uint64_t>{second, second_commit}));
}

TEST(Oracle, DuplicatesAreOnlyCountedUnderAtLeastOnce) {
  TraceBuilder t(v1::Profile::AT_LEAST_ONCE);
  t.Published(1);
  t.Delivered(1, 10);
  t.Emitted(1);
  t.Emitted(1);
  t.Checkpoint(1);
  t.Committed(1);
  Verdict v = t.End();
  EXPECT_FALSE(v.at(Invariant::kDuplicateOutput).checked);
  EXPECT_EQ(v.duplicate_records, 1u);
  EXPECT_TRUE(v.passed());
}

TEST(Oracle, WatermarkGoingBackWithinAnIncarnationIsARegression) {
  TraceBuilder t;
  const auto high = t.Watermark(Millis(50));
  const auto low = t.Watermark(Millis(40));
  Verdict v = t.End();
  const auto& r = v.at(Invariant::kWatermarkRegression);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_EQ(Seqs(r.first[0]), (std::vector<std::uint64_t>{high, low}));
}

TEST(Oracle, RestoredWatermarkBelowTheCommittedOneIsARegression) {
  TraceBuilder t;
  t.Watermark(Millis(50));
  t.Checkpoint(1, Millis(50));
  t.Committed(1);
  t.Crashed();
  t.Opened(1, Millis(50));
  t.Watermark(Millis(10));
  EXPECT_EQ(t.End().at(Invariant::kWatermarkRegression).violations, 1u);
}

TEST(Oracle, RestartMayResumeBelowTheLastUncommittedWatermark) {
  TraceBuilder t;
  t.Watermark(Millis(50));
  t.Checkpoint(1, Millis(50));
  t.Committed(1);
  t.Watermark(Millis(90));  // not committed
  t.Crashed();
  t.Opened(1, Millis(50));
  t.Watermark(Millis(60));  // above the committed 50: fine
  EXPECT_EQ(t.End().at(Invariant::kWatermarkRegression).violations, 0u);
}

TEST(Oracle, KeepsOnlyTheFirstFewViolationsButCountsAll) {
  TraceBuilder t;
  for (std::uint64_t id = 1; id <= 10; ++id) t.Published(id);
  Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kLostMessage).violations, 10u);
  EXPECT_EQ(v.at(Invariant::kLostMessage).first.size(), Oracle::kKeptViolations);
  EXPECT_EQ(v.at(Invariant::kLostMessage).first[0].evidence.front().what.rfind("published message 1", 0), 0u);
}

constexpr int kThrottled = 8, kUnavailable = 14, kDeadlineExceeded = 4;

TEST(Oracle, CallingAThrottledMethodBeforeItsRetryAfterIsAThrottleViolation) {
  TraceBuilder t;
  t.BrokerCall("Pull", Millis(100), 1);
  const auto failed = t.BrokerCallFailed("Pull", Millis(100), kThrottled, Millis(50));
  const auto early = t.BrokerCall("Pull", Millis(120), 2);
  Verdict v = t.End();
  const auto& r = v.at(Invariant::kThrottleViolation);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_EQ(Seqs(r.first[0]), (std::vector<std::uint64_t>{failed, early}));
  EXPECT_NE(r.first[0].sentence.find("Pull"), std::string::npos);
  EXPECT_FALSE(v.passed());
}

TEST(Oracle, ThrottleHoldsAfterTheRetryAfterAndForOtherMethods) {
  TraceBuilder t;
  t.BrokerCall("Pull", Millis(100), 1);
  t.BrokerCallFailed("Pull", Millis(100), kThrottled, Millis(50));
  t.BrokerCall("Ack", Millis(101), 1);   // a throttled pull does not forbid acks
  t.BrokerCall("Pull", Millis(150), 2);  // exactly at the retry-after: fine
  t.BrokerCall("Pull", Millis(151), 3);
  Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kThrottleViolation).violations, 0u);
}

TEST(Oracle, ANewIncarnationStartsWithoutThrottles) {
  TraceBuilder t;
  t.BrokerCallFailed("Pull", Millis(100), kThrottled, Millis(500));
  t.Crashed();
  t.Opened(0, std::nullopt);
  t.BrokerCall("Pull", Millis(200), 2);
  EXPECT_EQ(t.End().at(Invariant::kThrottleViolation).violations, 0u);
}

TEST(Oracle, RetryingATransientFailureTooSoonIsARetryStorm) {
  TraceBuilder t(v1::Profile::EXACTLY_ONCE, /*min_backoff_ms=*/20);
  t.BrokerCall("Ack", Millis(100), 1);
  const auto failed = t.BrokerCallFailed("Ack", Millis(100), kUnavailable);
  const auto retry = t.BrokerCall("Ack", Millis(105), 2);
  Verdict v = t.End();
  const auto& r = v.at(Invariant::kRetryStorm);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_EQ(Seqs(r.first[0]), (std::vector<std::uint64_t>{failed, retry}));
  EXPECT_NE(r.first[0].sentence.find("Ack"), std::string::npos);
  EXPECT_FALSE(v.passed());
}

TEST(Oracle, BackingOffLongEnoughAfterATransientFailureHolds) {
  TraceBuilder t(v1::Profile::EXACTLY_ONCE, /*min_backoff_ms=*/20);
  t.BrokerCallFailed("Pull", Millis(100), kDeadlineExceeded);
  t.BrokerCall("Ack", Millis(101), 1);   // another method: not a retry
  t.BrokerCall("Pull", Millis(120), 2);  // waited the minimum backoff
  t.BrokerCall("Pull", Millis(121), 3);  // not after a failure: free
  Verdict v = t.End();
  EXPECT_TRUE(v.at(Invariant::kRetryStorm).checked);
  EXPECT_EQ(v.at(Invariant::kRetryStorm).violations, 0u);
  EXPECT_TRUE(v.passed());
}

TEST(Oracle, RetryStormIsNotCheckedWithoutAMinimumBackoff) {
  TraceBuilder t;  // min_backoff_ms 0
  t.BrokerCallFailed("Pull", Millis(100), kUnavailable);
  t.BrokerCall("Pull", Millis(100), 2);
  Verdict v = t.End();
  EXPECT_FALSE(v.at(Invariant::kRetryStorm).checked);
  EXPECT_EQ(v.at(Invariant::kRetryStorm).violations, 0u);
}

// ---- profiles: watermark-stall ------------------------------------------------

v1::Profile StallProfile(std::int64_t timeout_ms, std::optional<std::int64_t> lag_ms = std::nullopt) {
  v1::Profile p;
  p.set_guarantee(v1::Profile::EXACTLY_ONCE);
  p.set_watermark_policy(v1::Profile::MONOTONIC);
  p.set_idle_timeout_ms(timeout_ms);
  if (lag_ms.has_value()) p.set_idle_max_lag_ms(*lag_ms);
  return p;
}

TEST(Oracle, WatermarkStuckThroughALongIdlePeriodIsAStall) {
  TraceBuilder t(StallProfile(1000));
  t.At(Millis(10)).Published(1);
  t.At(Millis(10)).Delivered(1, 10);
  t.At(Millis(10)).Record(1, Millis(5));
  const auto begin = t.At(Millis(10)).Stepped(Millis(5), /*broker_idle=*/true);
  t.At(Millis(500)).Stepped(Millis(5), true);                     // idle 490 ms: within the timeout
  const auto late = t.At(Millis(1500)).Stepped(Millis(5), true);  // idle 1.49 s, watermark 1.495 s behind
  t.At(Millis(2500)).Stepped(Millis(5), true);                    // same idle period: not reported again
  Verdict v = t.End();
  const auto& r = v.at(Invariant::kWatermarkStall);
  ASSERT_TRUE(r.checked);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_EQ(Seqs(r.first[0]), (std::vector<std::uint64_t>{begin, late}));
  EXPECT_NE(r.first[0].sentence.find("idle"), std::string::npos);
  EXPECT_FALSE(v.passed());
}

TEST(Oracle, WatermarkThatAdvancesWhileIdleHolds) {
  TraceBuilder t(StallProfile(1000));
  t.At(Millis(10)).Published(1);
  t.At(Millis(10)).Delivered(1, 10);
  t.At(Millis(10)).Record(1, Millis(5));
  t.At(Millis(10)).Stepped(Millis(5), true);
  t.At(Millis(1500)).Stepped(Millis(600), true);  // 900 ms behind now: within the 1 s lag
  t.At(Millis(3000)).Stepped(Millis(2500), true);
  t.At(Millis(3000)).Checkpoint(1);
  t.At(Millis(3000)).Committed(1);
  Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kWatermarkStall).violations, 0u);
  EXPECT_TRUE(v.passed());
}

TEST(Oracle, NotIdleWhileADeliveredMessageHasNoRecordOrTheBrokerHasWork) {
  TraceBuilder t(StallProfile(1000));
  t.At(Millis(10)).Published(1);
  t.At(Millis(10)).Delivered(1, 10);
  t.At(Millis(10)).Stepped(std::nullopt, true);  // message 1 still has no record: busy
  t.At(Millis(2000)).Stepped(std::nullopt, true);
  t.At(Millis(2000)).Record(1, Millis(5));
  t.At(Millis(2000)).Stepped(Millis(5), false);  // the broker has work: busy
  t.At(Millis(4000)).Stepped(Millis(5), false);
  t.At(Millis(4000)).Stepped(Millis(5), true);  // idle starts here
  t.At(Millis(4500)).Published(2);              // and ends here
  t.At(Millis(5500)).Stepped(Millis(5), true);  // a new idle period starts
  Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kWatermarkStall).violations, 0u);
}

TEST(Oracle, StallUsesTheExplicitLagAndIsNotCheckedWithoutAWatermarkPolicy) {
  {
    TraceBuilder t(StallProfile(1000, /*lag_ms=*/100));
    t.At(0).Stepped(Millis(0), true);
    t.At(Millis(1500)).Stepped(Millis(1300), true);  // 200 ms behind: more than 100
    EXPECT_EQ(t.End().at(Invariant::kWatermarkStall).violations, 1u);
  }
  {
    v1::Profile p = StallProfile(1000);
    p.set_watermark_policy(v1::Profile::NO_WATERMARK);
    TraceBuilder t(p);
    t.At(0).Stepped(std::nullopt, true);
    t.At(Millis(5000)).Stepped(std::nullopt, true);
    Verdict v = t.End();
    EXPECT_FALSE(v.at(Invariant::kWatermarkStall).checked);
    EXPECT_EQ(v.at(Invariant::kWatermarkStall).violations, 0u);
  }
}

// ---- late-record ----------------------------------------------------------------

v1::Profile Lateness(std::int64_t allowed_ms) {
  v1::Profile p;
  p.set_guarantee(v1::Profile::EXACTLY_ONCE);
  p.set_watermark_policy(v1::Profile::BOUNDED_LATENESS);
  p.set_allowed_lateness_ms(allowed_ms);
  return p;
}

TEST(Oracle, RecordFurtherBelowTheWatermarkThanAllowedIsLate) {
  TraceBuilder t(Lateness(10));
  t.Published(1);
  t.Published(2);
  t.Delivered(1, 10);
  t.Delivered(2, 20);
  t.Record(1, Millis(100), 1);
  const auto wm = t.Stepped(Millis(100), false);
  const auto late = t.Record(2, Millis(80), 2);  // 20 ms below: more than 10
  t.Stepped(Millis(100), false);
  Verdict v = t.End();
  const auto& r = v.at(Invariant::kLateRecord);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_EQ(Seqs(r.first[0]), (std::vector<std::uint64_t>{wm, late}));
  EXPECT_NE(r.first[0].sentence.find("message 2"), std::string::npos);
  EXPECT_EQ(v.late_records, 1u);
}

TEST(Oracle, AStepsOwnWatermarkAppliesAfterItsRecordsAndSmallLatenessIsAllowed) {
  TraceBuilder t(Lateness(10));
  t.Published(1);
  t.Published(2);
  t.Delivered(1, 10);
  t.Delivered(2, 20);
  t.Record(1, Millis(50), 1);
  t.Record(2, Millis(40), 1);  // below the step's own watermark of 100: not late
  t.Stepped(Millis(100), false);
  Verdict v = t.End();
  EXPECT_EQ(v.late_records, 0u);
  EXPECT_EQ(v.at(Invariant::kLateRecord).violations, 0u);

  TraceBuilder u(Lateness(10));
  u.Published(1);
  u.Published(2);
  u.Delivered(1, 10);
  u.Delivered(2, 20);
  u.Record(1, Millis(100), 1);
  u.Stepped(Millis(100), false);
  u.Record(2, Millis(95), 2);  // 5 ms late: counted, allowed
  Verdict w = u.End();
  EXPECT_EQ(w.late_records, 1u);
  EXPECT_EQ(w.at(Invariant::kLateRecord).violations, 0u);
}

TEST(Oracle, LateRecordsAreOnlyCountedWithoutBoundedLateness) {
  TraceBuilder t;  // no watermark policy
  t.Published(1);
  t.Published(2);
  t.Delivered(1, 10);
  t.Delivered(2, 20);
  t.Record(1, Millis(100), 1);
  t.Stepped(Millis(100), false);
  t.Record(2, Millis(10), 2);
  Verdict v = t.End();
  EXPECT_FALSE(v.at(Invariant::kLateRecord).checked);
  EXPECT_EQ(v.late_records, 1u);
}

TEST(Oracle, ARestoredIncarnationJudgesLatenessAgainstTheCommittedWatermark) {
  TraceBuilder t(Lateness(0));
  t.Published(1);
  t.Crashed();
  t.Opened(1, Millis(100));
  t.Delivered(1, 10);
  t.Record(1, Millis(50), 1);
  EXPECT_EQ(t.End().at(Invariant::kLateRecord).violations, 1u);
}

// ---- protocol-error details ------------------------------------------------------

TEST(Oracle, ARecordOfAMessageNotDeliveredToThisIncarnationIsAProtocolError) {
  TraceBuilder t;
  t.Published(1);
  const auto d = t.Delivered(1, 10);
  t.Crashed();
  t.Opened(0, std::nullopt);
  const auto e = t.Emitted(1);  // the new incarnation never got message 1
  Verdict v = t.End();
  const auto& r = v.at(Invariant::kProtocolError);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_EQ(Seqs(r.first[0]), (std::vector<std::uint64_t>{0, d, e}));
  EXPECT_NE(r.first[0].sentence.find("never delivered to incarnation 2"), std::string::npos);
}

TEST(Oracle, ARecordOfAnUnpublishedMessageIsAProtocolError) {
  TraceBuilder t;
  t.Emitted(7);
  EXPECT_EQ(t.End().at(Invariant::kProtocolError).violations, 1u);
}

TEST(Oracle, RecordsOfRedeliveredAndRetiredMessagesAreFine) {
  TraceBuilder t;
  t.Published(1);
  t.Delivered(1, 10);
  t.Crashed();
  t.Opened(0, std::nullopt);
  t.Delivered(1, 11);  // redelivered to the new incarnation
  t.Emitted(1);
  t.Checkpoint(1);
  t.Committed(1);
  t.Acked(1, 11);  // retired
  Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kProtocolError).violations, 0u);
  EXPECT_TRUE(v.passed());
}

TEST(Oracle, AnAckOfAReceiptNeverIssuedIsAProtocolError) {
  TraceBuilder t;
  t.AckIgnored(99, "ack: receipt never issued");
  t.AckIgnored(5, "ack: receipt expired, superseded or already acked");  // a race: fine
  t.AckIgnored(6, "ack: lost by a fault; the lease will run out");
  Verdict v = t.End();
  const auto& r = v.at(Invariant::kProtocolError);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_NE(r.first[0].sentence.find("receipt 99"), std::string::npos);
}

TEST(Oracle, WatermarksAndResumeTimesMoreThanAHundredYearsAwayAreProtocolErrors) {
  constexpr VirtualDuration kYear = 365LL * 24 * 3600 * 1'000'000'000LL;
  TraceBuilder t;
  t.At(0).Stepped(-101 * kYear, false);
  t.At(0).Stepped(std::nullopt, false, /*resume_at=*/kNever - 1);
  t.At(0).Stepped(Millis(-50), false, 99 * kYear);  // a negative event time is fine
  Verdict v = t.End();
  const auto& r = v.at(Invariant::kProtocolError);
  EXPECT_EQ(r.violations, 2u);
  EXPECT_EQ(v.at(Invariant::kWatermarkRegression).violations, 0u);  // the bad one is dropped
}

}  // namespace
}  // namespace weir

namespace weir {
namespace {

// A connector that answers with an error status of its own (an exception in
// its code) is a connector-error, named as its own failure, not a malformed
// exchange; garbage on the wire stays a protocol-error.
TEST(Oracle, AnErrorStatusFromTheConnectorIsAConnectorErrorNotAProtocolError) {
  TraceBuilder t;
  const auto e =
      t.ConnectorError("Advance", 13, "Advance answered INTERNAL: source raised during advance: RuntimeError: x");
  const Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kProtocolError).violations, 0u);
  const auto& r = v.at(Invariant::kConnectorError);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_EQ(Seqs(r.first[0]).back(), e);
  EXPECT_EQ(r.first[0].sentence.find("Malformed"), std::string::npos) << r.first[0].sentence;
  EXPECT_NE(r.first[0].sentence.find("own failure in Advance: Advance answered INTERNAL"), std::string::npos)
      << r.first[0].sentence;
}

TEST(Oracle, AGarbledAnswerIsStillAProtocolError) {
  TraceBuilder t;
  t.ProtocolError("Open", "Open answered no message, or bytes that are not a weir.v1.OpenResponse message");
  const Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kProtocolError).violations, 1u);
  EXPECT_EQ(v.at(Invariant::kConnectorError).violations, 0u);
}

TEST(Oracle, AConnectorErrorInOpenFromACommittedCheckpointIsABadCheckpoint) {
  TraceBuilder t;
  t.Opened(3, std::nullopt);
  t.ConnectorError("Open", 3, "Open answered INVALID_ARGUMENT: cannot parse the checkpoint");
  const Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kBadCheckpoint).violations, 1u);
  EXPECT_EQ(v.at(Invariant::kConnectorError).violations, 0u);
}

}  // namespace
}  // namespace weir

namespace weir {
namespace {

v1::Profile MonotonicProfile(std::int64_t max_lead_ms = 0) {
  v1::Profile p;
  p.set_guarantee(v1::Profile::AT_LEAST_ONCE);
  p.set_watermark_policy(v1::Profile::MONOTONIC);
  p.set_max_watermark_lead_ms(max_lead_ms);
  return p;
}

// A watermark computed from the wall clock: about 1.8e9 s while virtual time
// is about 120 s. Every record published later would be late.
TEST(Oracle, AWatermarkPastVirtualNowIsWatermarkAhead) {
  TraceBuilder t(MonotonicProfile());
  t.At(Seconds(120));
  const auto s = t.Stepped(Seconds(1'800'000'000), false);
  t.At(Seconds(121));
  t.Stepped(Seconds(1'800'000'001), false);  // the same stretch: not a second cause
  const Verdict v = t.End();
  const auto& r = v.at(Invariant::kWatermarkAhead);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_EQ(Seqs(r.first[0]), (std::vector<std::uint64_t>{s}));
  EXPECT_NE(r.first[0].sentence.find("past virtual now"), std::string::npos) << r.first[0].sentence;
  EXPECT_EQ(v.at(Invariant::kProtocolError).violations, 0u);
}

TEST(Oracle, AWatermarkAtOrBelowNowPlusTheAllowanceHolds) {
  TraceBuilder t(MonotonicProfile(/*max_lead_ms=*/500));
  t.At(Seconds(10));
  t.Stepped(Seconds(10), false);
  t.At(Seconds(11));
  t.Stepped(Seconds(11) + Millis(500), false);
  EXPECT_EQ(t.End().at(Invariant::kWatermarkAhead).violations, 0u);
}

TEST(Oracle, AWatermarkThatFallsBackWithinTheBoundAndRunsAheadAgainIsTwoCauses) {
  TraceBuilder t(MonotonicProfile(/*max_lead_ms=*/1000));
  t.At(Seconds(1));
  t.Stepped(Seconds(5), false);  // ahead by 4 s
  t.At(Seconds(5));
  t.Stepped(Seconds(5), false);  // within the bound again
  t.At(Seconds(6));
  t.Stepped(Seconds(60), false);  // ahead again
  EXPECT_EQ(t.End().at(Invariant::kWatermarkAhead).violations, 2u);
}

}  // namespace
}  // namespace weir

namespace weir {
namespace {

// A connector that said it was finished while a message had no committed
// record: the lost-message cites the step that ended the work.
TEST(Oracle, ALostMessageCitesTheStepThatAnsweredFinished) {
  TraceBuilder t;
  const auto p = t.Published(1);
  t.Published(2);
  const auto d = t.Delivered(1, 10);
  t.Emitted(1);
  t.Checkpoint(1);
  t.Committed(1);
  t.Acked(1, 10);
  const auto f = t.Finished();
  const Verdict v = t.End();
  const auto& r = v.at(Invariant::kLostMessage);
  ASSERT_EQ(r.violations, 1u);
  const auto seqs = Seqs(r.first[0]);
  EXPECT_NE(std::find(seqs.begin(), seqs.end(), f), seqs.end());
  EXPECT_NE(r.first[0].sentence.find("step 1 had answered that the connector was finished"), std::string::npos)
      << r.first[0].sentence;
  (void)p;
  (void)d;
}

}  // namespace
}  // namespace weir

namespace weir {
namespace {

// One regression, then nine more steps still below the high mark: one
// violation (a distinct cause), nine echoes.
TEST(Oracle, OneWatermarkRegressionIsOneViolationAndItsRepeatsAreEchoes) {
  TraceBuilder t;
  t.Stepped(Seconds(10), false);
  const auto r1 = t.Stepped(Seconds(5), false);
  for (int i = 0; i < 9; ++i) t.Stepped(Seconds(5) + Millis(i), false);
  const Verdict v = t.End();
  const auto& r = v.at(Invariant::kWatermarkRegression);
  EXPECT_EQ(r.violations, 1u);
  EXPECT_EQ(r.echoes, 9u);
  ASSERT_EQ(r.first.size(), 1u);
  EXPECT_EQ(r.first[0].detected_seq, r1);
}

TEST(Oracle, AWatermarkThatFallsFurtherIsASecondRegression) {
  TraceBuilder t;
  t.Stepped(Seconds(10), false);
  t.Stepped(Seconds(5), false);
  t.Stepped(Seconds(3), false);  // below the last value reported: a new drop
  EXPECT_EQ(t.End().at(Invariant::kWatermarkRegression).violations, 2u);
}

// A connector that ignores one throttle keeps calling: the first premature
// call is the violation; the ones until it respects a retry-after are echoes.
TEST(Oracle, OneThrottleMisuseIsOneViolationUntilTheConnectorWaits) {
  TraceBuilder t;
  t.BrokerCallFailed("Pull", Millis(100), 8, Millis(500));
  t.BrokerCall("Pull", Millis(110), 2);
  t.BrokerCallFailed("Pull", Millis(110), 8, Millis(500));
  for (int i = 0; i < 5; ++i) t.BrokerCall("Pull", Millis(120 + i), 3 + i);
  EXPECT_EQ(t.End().at(Invariant::kThrottleViolation).violations, 1u);

  TraceBuilder u;
  u.BrokerCallFailed("Pull", Millis(100), 8, Millis(500));
  u.BrokerCall("Pull", Millis(110), 2);  // misuse 1
  u.BrokerCall("Pull", Millis(700), 3);  // waited: served its time
  u.BrokerCallFailed("Pull", Millis(700), 8, Millis(500));
  u.BrokerCall("Pull", Millis(710), 4);  // misuse 2: a new cause
  const Verdict v = u.End();
  EXPECT_EQ(v.at(Invariant::kThrottleViolation).violations, 2u);
  EXPECT_EQ(v.at(Invariant::kThrottleViolation).echoes, 0u);
}

TEST(Oracle, ARetryStormIsOneViolationUntilARetryWaits) {
  TraceBuilder t(v1::Profile::EXACTLY_ONCE, /*min_backoff_ms=*/100);
  for (int i = 0; i < 6; ++i) {
    t.BrokerCallFailed("Pull", Millis(10 * i), 14);
    t.BrokerCall("Pull", Millis(10 * i + 1), i + 2);
  }
  const Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kRetryStorm).violations, 1u);
  EXPECT_EQ(v.at(Invariant::kRetryStorm).echoes, 5u);
}

// Causes before consequences: a connector that exited, and the messages it
// then lost. The exit started it; the lost messages were seen at the end.
TEST(Oracle, ViolationsAreOrderedByTheEventThatStartedThem) {
  TraceBuilder t;
  t.Published(1);
  t.Published(2);
  t.Delivered(1, 10);
  const auto exit = t.ConnectorError("Advance", 13, "Advance answered INTERNAL: boom");
  const Verdict v = t.End();
  const auto order = FailedByCause(v);
  ASSERT_EQ(order.size(), 2u);
  EXPECT_EQ(order[0], Invariant::kConnectorError);
  EXPECT_EQ(order[1], Invariant::kLostMessage);
  const auto& lost = v.at(Invariant::kLostMessage);
  ASSERT_FALSE(lost.first.empty());
  EXPECT_EQ(lost.first[0].cause_seq, exit);
  const auto all = ViolationsByCause(v);
  ASSERT_EQ(all.size(), 3u);
  EXPECT_EQ(all[0]->invariant, Invariant::kConnectorError);
  const std::string text = FormatViolations(v);
  EXPECT_LT(text.find("FAILED connector-error"), text.find("FAILED lost-message")) << text;
}

}  // namespace
}  // namespace weir

namespace weir {
namespace {

v1::Profile StrictProfile() {
  v1::Profile p;
  p.set_guarantee(v1::Profile::EXACTLY_ONCE);
  p.set_watermark_policy(v1::Profile::BOUNDED_LATENESS);
  p.set_allowed_lateness_ms(1000);
  return p;
}

// Message 1 (event time 1 s) is delivered to incarnation 1, which dies; the
// dead incarnation's lease holds it while incarnation 2's watermark moves to
// 10 s on other data; when it comes back, its record is 9 s late. No
// connector could avoid that: counted as forced, not failed.
TEST(Oracle, LatenessForcedByACrashIsCountedNotFailed) {
  TraceBuilder t(StrictProfile());
  t.Published(1, Seconds(1));
  t.Published(2, Seconds(9));
  t.Delivered(1, 10);
  t.Crashed();
  t.Opened(0, std::nullopt);
  t.Delivered(2, 11);
  t.Record(2, Seconds(9), 1);
  t.Stepped(Seconds(10), false);
  t.Delivered(1, 12);  // the dead incarnation's lease ran out
  t.Record(1, Seconds(1), 2);
  const Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kLateRecord).violations, 0u);
  EXPECT_EQ(v.late_records, 1u);
  EXPECT_EQ(v.forced_late_records, 1u);
}

// The same, but after the message came back the connector moved its
// watermark further (to 20 s) before emitting it: that part it could have
// avoided.
TEST(Oracle, LatenessAddedAfterTheMessageCameBackFails) {
  TraceBuilder t(StrictProfile());
  t.Published(1, Seconds(1));
  t.Published(2, Seconds(9));
  t.Delivered(1, 10);
  t.Crashed();
  t.Opened(0, std::nullopt);
  t.Delivered(2, 11);
  t.Record(2, Seconds(9), 1);
  t.Stepped(Seconds(10), false);
  t.Delivered(1, 12);
  t.Stepped(Seconds(20), false);  // held message 1, moved past it
  t.Record(1, Seconds(1), 3);
  const Verdict v = t.End();
  const auto& r = v.at(Invariant::kLateRecord);
  ASSERT_EQ(r.violations, 1u);
  EXPECT_NE(r.first[0].sentence.find("came back from a dead incarnation"), std::string::npos) << r.first[0].sentence;
  EXPECT_EQ(v.forced_late_records, 0u);
}

// Without a crash there is no excuse: the message's first delivery.
TEST(Oracle, LatenessWithoutACrashFails) {
  TraceBuilder t(StrictProfile());
  t.Published(1, Seconds(1));
  t.Published(2, Seconds(9));
  t.Delivered(2, 11);
  t.Record(2, Seconds(9), 1);
  t.Stepped(Seconds(10), false);
  t.Delivered(1, 12);
  t.Record(1, Seconds(1), 2);
  const Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kLateRecord).violations, 1u);
  EXPECT_EQ(v.forced_late_records, 0u);
}

// A connector cannot hide lateness behind a crash: incarnation 1 held message
// 1 and moved its own watermark past it before it died.
TEST(Oracle, NoExcuseWhenTheDeadIncarnationMovedPastTheMessageItHeld) {
  TraceBuilder t(StrictProfile());
  t.Published(1, Seconds(1));
  t.Delivered(1, 10);
  t.Stepped(Seconds(10), false);  // held message 1 without a record, moved past it
  t.Crashed();
  t.Opened(0, std::nullopt);
  t.Stepped(Seconds(10), false);
  t.Delivered(1, 12);
  t.Record(1, Seconds(1), 2);
  const Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kLateRecord).violations, 1u);
  EXPECT_EQ(v.forced_late_records, 0u);
}

}  // namespace
}  // namespace weir

namespace weir {
namespace {

// Coverage (docs/coverage.md): a rule that never had a chance to fail reads
// "not exercised", never "held".

TEST(OracleCoverage, ThrottleViolationHasAChanceOnlyWhenTheThrottledMethodIsCalledAgain) {
  {
    TraceBuilder t;
    t.BrokerCallFailed("Pull", Millis(100), 8, Millis(50));  // throttled, never called again
    const Verdict v = t.End();
    EXPECT_EQ(v.at(Invariant::kThrottleViolation).chances, 0u);
    EXPECT_FALSE(v.at(Invariant::kThrottleViolation).exercised());
    EXPECT_NE(FormatVerdictTable(v).find("throttle-violation     not exercised"), std::string::npos)
        << FormatVerdictTable(v);
  }
  {
    TraceBuilder t;
    t.BrokerCallFailed("Pull", Millis(100), 8, Millis(50));
    t.BrokerCall("Ack", Millis(110), 1);   // another method: no chance for Pull's throttle
    t.BrokerCall("Pull", Millis(200), 2);  // after the retry-after: judged, held
    const Verdict v = t.End();
    EXPECT_EQ(v.at(Invariant::kThrottleViolation).chances, 1u);
    EXPECT_EQ(v.at(Invariant::kThrottleViolation).violations, 0u);
    EXPECT_NE(FormatVerdictTable(v).find("throttle-violation     held"), std::string::npos) << FormatVerdictTable(v);
  }
}

TEST(OracleCoverage, RetryStormCountsOnlyWhenTheProfileSetsABackoff) {
  for (std::int64_t backoff : {0, 100}) {
    TraceBuilder t(v1::Profile::EXACTLY_ONCE, backoff);
    t.BrokerCallFailed("Pull", Millis(100), 14);
    t.BrokerCall("Pull", Millis(300), 2);
    const Verdict v = t.End();
    EXPECT_EQ(v.at(Invariant::kRetryStorm).chances, backoff > 0 ? 1u : 0u) << backoff;
    EXPECT_EQ(v.at(Invariant::kRetryStorm).checked, backoff > 0);
  }
}

TEST(OracleCoverage, AckBeforeCommitHasAChanceWhenACrashFallsBetweenEmissionAndCommit) {
  {
    // Emitted, committed, acked; no fault in between: ack-before-commit could
    // not have turned into a loss.
    TraceBuilder t;
    t.Published(1);
    t.Delivered(1, 11);
    t.Emitted(1);
    t.Checkpoint(1);
    t.Committed(1);
    t.Acked(1, 11);
    const Verdict v = t.End();
    EXPECT_EQ(v.at(Invariant::kAckBeforeCommit).chances, 0u);
    EXPECT_EQ(v.at(Invariant::kBadCheckpoint).chances, 0u);
  }
  {
    TraceBuilder t;
    t.Published(1);
    t.Delivered(1, 11);
    t.Emitted(1);
    t.Checkpoint(1);
    t.CommitFailed(1);  // the epoch is gone, its message in flight
    t.Crashed();
    t.Opened(0, std::nullopt);
    const Verdict v = t.End();
    EXPECT_EQ(v.at(Invariant::kAckBeforeCommit).chances, 1u);  // the crash found nothing in flight
    EXPECT_EQ(v.at(Invariant::kLostMessage).chances, 1u);
    EXPECT_EQ(v.at(Invariant::kBadCheckpoint).chances, 0u);  // a fresh Open, not a restore
  }
}

TEST(OracleCoverage, RestoreGivesBadCheckpointWatermarkAndDuplicateChances) {
  TraceBuilder t;
  t.Published(1);
  t.Delivered(1, 11);
  t.Emitted(1);
  t.Checkpoint(1, 5);
  t.Committed(1);
  t.Crashed();
  t.Opened(1, 5);
  const Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kBadCheckpoint).chances, 1u);
  EXPECT_EQ(v.at(Invariant::kWatermarkRegression).chances, 1u);
  EXPECT_EQ(v.at(Invariant::kDuplicateOutput).chances, 1u);  // restored after a commit
}

TEST(OracleCoverage, LateRecordCountsOutOfOrderArrivals) {
  TraceBuilder t;
  t.Published(1, Millis(10));
  t.Published(2, Millis(30));
  t.Published(3, Millis(20));  // below one published before it
  t.Published(4, Millis(40));
  EXPECT_EQ(t.End().at(Invariant::kLateRecord).chances, 1u);
}

TEST(OracleCoverage, EveryStepIsAChanceForTheCallRules) {
  TraceBuilder t;
  t.Stepped(std::nullopt, false);
  t.Stepped(Millis(1), false);
  const Verdict v = t.End();
  EXPECT_EQ(v.at(Invariant::kStepTimeout).chances, 2u);
  EXPECT_EQ(v.at(Invariant::kProtocolError).chances, 2u);
  EXPECT_EQ(v.at(Invariant::kWatermarkAhead).chances, 1u);  // one step reported a watermark
}

TEST(OracleCoverage, WatermarkStallIsJudgedOnlyOnceTheSourceWasIdleLongerThanTheTimeout) {
  v1::Profile p;
  p.set_guarantee(v1::Profile::EXACTLY_ONCE);
  p.set_watermark_policy(v1::Profile::MONOTONIC);
  p.set_idle_timeout_ms(1000);
  {
    TraceBuilder t(p);
    t.At(Millis(0)).Stepped(Millis(0), true);
    t.At(Millis(500)).Stepped(Millis(0), true);  // idle 0.5 s: not yet judged
    EXPECT_EQ(t.End().at(Invariant::kWatermarkStall).chances, 0u);
  }
  {
    TraceBuilder t(p);
    t.At(Millis(0)).Stepped(Millis(0), true);
    t.At(Millis(1500)).Stepped(Millis(1000), true);  // idle 1.5 s, watermark within the lag: held
    const Verdict v = t.End();
    EXPECT_EQ(v.at(Invariant::kWatermarkStall).chances, 1u);
    EXPECT_EQ(v.at(Invariant::kWatermarkStall).violations, 0u);
  }
}

TEST(OracleCoverage, FaultsAppliedAreCountedByKindAndPlace) {
  Oracle oracle(v1::Profile{});
  v1::TraceEvent e;
  e.set_seq(1);
  auto* d = e.mutable_fault_applied()->mutable_decision();
  d->set_site(v1::PULL);
  d->set_throttle_retry_after_ms(100);
  oracle.OnEvent(e);
  oracle.OnEvent(e);
  d->Clear();
  d->set_site(v1::CHECKPOINT);
  d->mutable_crash()->set_point(v1::AFTER_CHECKPOINT_BEFORE_COMMIT);
  oracle.OnEvent(e);
  const Verdict v = oracle.Finish();
  ASSERT_EQ(v.faults_applied.size(), 2u);
  EXPECT_EQ(v.faults_applied.at("throttle_retry_after_ms at PULL"), 2u);
  EXPECT_EQ(v.faults_applied.at("crash at AFTER_CHECKPOINT_BEFORE_COMMIT"), 1u);
}

TEST(OracleCoverage, ADelayedAppendIsOneLateRecordChanceAndAZeroDelayNone) {
  // A log record held back by a visibility delay shows as a fault_applied
  // event and an appended event with visible_at_ns: one situation, one chance.
  // A plan's delay of 0 (a weakened decision) holds nothing back: no chance.
  Oracle oracle(v1::Profile{}, v1::LOG);
  std::uint64_t seq = 0;
  const auto delay = [&](std::int64_t ms) {
    v1::TraceEvent e;
    e.set_seq(++seq);
    auto* d = e.mutable_fault_applied()->mutable_decision();
    d->set_site(v1::APPEND);
    d->set_position(seq);
    d->set_visibility_delay_ms(ms);
    oracle.OnEvent(e);
  };
  const auto append = [&](std::uint64_t offset, std::int64_t visible_at_ns) {
    v1::TraceEvent e;
    e.set_seq(++seq);
    e.set_t_ns(Millis(10));
    auto* x = e.mutable_appended();
    x->set_offset(offset);
    x->set_event_time_ns(Millis(10) + static_cast<std::int64_t>(offset));  // in order
    if (visible_at_ns > 0) x->set_visible_at_ns(visible_at_ns);
    oracle.OnEvent(e);
  };
  delay(50);
  append(0, Millis(60));
  delay(0);
  append(1, 0);
  const Verdict v = oracle.Finish();
  EXPECT_EQ(v.at(Invariant::kLateRecord).chances, 1u);
  EXPECT_EQ(v.faults_applied.at("visibility_delay_ms at APPEND"), 2u);
}

}  // namespace
}  // namespace weir
