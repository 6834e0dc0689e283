#include "harness/oracle/oracle.h"

#include <gtest/gtest.h>

namespace weir {
namespace {

// Builds a trace by hand and feeds it to an oracle.
class TraceBuilder {
 public:
  explicit TraceBuilder(v1::Profile::Guarantee g = v1::Profile::EXACTLY_ONCE,
                        std::int64_t min_backoff_ms = 0)
      : oracle_(Profile(g, min_backoff_ms)) {}

  std::uint64_t Published(std::uint64_t id) {
    auto& e = Next();
    e.mutable_published()->set_message_id(id);
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
  std::uint64_t BrokerCallFailed(const std::string& method, VirtualTime t, int code,
                                 VirtualDuration retry_after = 0) {
    auto& e = Next();
    e.set_t_ns(t);
    e.mutable_broker_call_failed()->set_method(method);
    e.mutable_broker_call_failed()->set_code(code);
    e.mutable_broker_call_failed()->set_retry_after_ns(retry_after);
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
    event_.set_t_ns(Millis(static_cast<std::int64_t>(seq_)));
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

TEST(Oracle, DuplicatesAreOnlyCountedUnderAtLeastOnce) {
  TraceBuilder t(v1::Profile::AT_LEAST_ONCE);
  t.Published(1);
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
  t.BrokerCall("Ack", Millis(101), 1);          // a throttled pull does not forbid acks
  t.BrokerCall("Pull", Millis(150), 2);         // exactly at the retry-after: fine
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

}  // namespace
}  // namespace weir
