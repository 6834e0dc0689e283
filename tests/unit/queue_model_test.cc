#include "harness/broker/queue/queue_model.h"

#include <gtest/gtest.h>

#include "harness/core/crc32c.h"
#include "tests/unit/test_support.h"

namespace weir {
namespace {

using testing::SmallScenario;
using testing::TraceRecorder;

class BrokerModelTest : public ::testing::Test {
 protected:
  BrokerModelTest()
      : scenario_(SmallScenario(3)), faults_(scenario_.faults(), 11, log_), model_(scenario_, 11, log_, faults_) {
    log_.AddObserver(&rec_);
  }
  v1::PullResponse Pull(VirtualTime now, std::uint32_t n = 10) {
    v1::PullRequest rq;
    rq.set_max_messages(n);
    v1::PullResponse rs;
    model_.Pull(rq, now, &rs);
    return rs;
  }
  void Ack(VirtualTime now, std::uint64_t receipt) {
    v1::AckRequest rq;
    rq.add_receipts(receipt);
    model_.Ack(rq, now);
  }

  v1::Scenario scenario_;
  TraceLog log_;
  TraceRecorder rec_;
  FaultSource faults_;
  QueueModel model_;
};

TEST_F(BrokerModelTest, PublishesOverVirtualTimeOnly) {
  EXPECT_EQ(Pull(0).deliveries_size(), 1);           // message 1 at 0 ms
  EXPECT_EQ(Pull(Millis(15)).deliveries_size(), 1);  // message 2 at 10 ms
  EXPECT_EQ(model_.published(), 2u);
  EXPECT_FALSE(model_.all_published());
  EXPECT_EQ(Pull(Millis(20)).deliveries_size(), 1);
  EXPECT_TRUE(model_.all_published());
}

TEST_F(BrokerModelTest, DeliveryCarriesPayloadWithItsCrc32c) {
  auto rs = Pull(Millis(100));
  ASSERT_EQ(rs.deliveries_size(), 3);
  for (const auto& d : rs.deliveries()) {
    EXPECT_EQ(d.payload().size(), 16u);
    EXPECT_EQ(d.payload_crc32c(), Crc32c(d.payload()));
    EXPECT_EQ(d.attempt(), 1u);
    EXPECT_EQ(d.lease_deadline_ns(), Millis(100) + Millis(1000));
    EXPECT_EQ(d.attributes().at("source"), "buoy-7");
  }
  EXPECT_EQ(rs.now_ns(), Millis(100));
}

TEST_F(BrokerModelTest, ExpiredLeaseMakesMessageDeliverableAgainWithNewReceipt) {
  auto first = Pull(0, 1);
  ASSERT_EQ(first.deliveries_size(), 1);
  const auto receipt = first.deliveries(0).receipt();
  // Before the deadline nothing comes back (message 1 is leased).
  auto before = Pull(Millis(999), 1);
  ASSERT_EQ(before.deliveries_size(), 1);
  EXPECT_NE(before.deliveries(0).message_id(), 1u);
  // At the deadline the lease expires and message 1 is redelivered.
  auto after = Pull(Millis(2500), 10);
  bool redelivered = false;
  for (const auto& d : after.deliveries()) {
    if (d.message_id() == 1) {
      redelivered = true;
      EXPECT_NE(d.receipt(), receipt);
      EXPECT_EQ(d.attempt(), 2u);
    }
  }
  EXPECT_TRUE(redelivered);
  auto expired = rec_.Of(v1::TraceEvent::kLeaseExpired);
  ASSERT_GE(expired.size(), 1u);
  EXPECT_EQ(expired[0].lease_expired().message_id(), 1u);
  EXPECT_EQ(expired[0].t_ns(), Millis(1000));
}

TEST_F(BrokerModelTest, AckRemovesTheMessageForGood) {
  auto rs = Pull(0, 1);
  Ack(Millis(1), rs.deliveries(0).receipt());
  EXPECT_EQ(rec_.Of(v1::TraceEvent::kAcked).size(), 1u);
  auto later = Pull(Millis(10000));
  for (const auto& d : later.deliveries()) EXPECT_NE(d.message_id(), 1u);
  EXPECT_EQ(model_.in_flight(), 2u);
}

TEST_F(BrokerModelTest, AckAfterLeaseExpiryIsIgnoredAndTraced) {
  auto rs = Pull(0, 1);
  Ack(Millis(1500), rs.deliveries(0).receipt());
  EXPECT_TRUE(rec_.Of(v1::TraceEvent::kAcked).empty());
  auto ignored = rec_.Of(v1::TraceEvent::kAckIgnored);
  ASSERT_EQ(ignored.size(), 1u);
  EXPECT_EQ(ignored[0].ack_ignored().receipt(), rs.deliveries(0).receipt());
}

TEST_F(BrokerModelTest, AckOfAReceiptNeverIssuedIsIgnored) {
  Ack(0, 999);
  auto ignored = rec_.Of(v1::TraceEvent::kAckIgnored);
  ASSERT_EQ(ignored.size(), 1u);
  EXPECT_NE(ignored[0].ack_ignored().reason().find("never issued"), std::string::npos);
}

TEST_F(BrokerModelTest, NackMakesTheMessageDeliverableAtOnce) {
  auto rs = Pull(0, 1);
  v1::NackRequest nack;
  nack.add_receipts(rs.deliveries(0).receipt());
  model_.Nack(nack, Millis(1));
  auto again = Pull(Millis(2), 1);
  ASSERT_EQ(again.deliveries_size(), 1);
  EXPECT_EQ(again.deliveries(0).message_id(), 1u);
  EXPECT_EQ(again.deliveries(0).attempt(), 2u);
}

TEST_F(BrokerModelTest, ExtendLeasePostponesExpiry) {
  auto rs = Pull(0, 1);
  v1::ExtendLeaseRequest ext;
  ext.add_receipts(rs.deliveries(0).receipt());
  ext.set_extension_ns(Millis(5000));
  v1::ExtendLeaseResponse ext_rs;
  model_.ExtendLease(ext, Millis(900), &ext_rs);
  EXPECT_EQ(ext_rs.rejected_receipts_size(), 0);
  model_.AdvanceTo(Millis(3000));
  EXPECT_TRUE(rec_.Of(v1::TraceEvent::kLeaseExpired).empty());
  model_.AdvanceTo(Millis(5900));
  EXPECT_EQ(rec_.Of(v1::TraceEvent::kLeaseExpired).size(), 1u);
}

TEST(Workload, SameSeedSameScheduleAndSkewStaysInBound) {
  v1::Workload w;
  w.set_messages(500);
  w.set_publish_interval_ms(20);
  w.set_arrival(v1::Workload::POISSON);
  w.set_max_event_time_skew_ms(100);
  Workload a(w, 5), b(w, 5), c(w, 6);
  bool differs = false;
  VirtualTime last = 0;
  while (a.Peek() != nullptr) {
    ASSERT_NE(b.Peek(), nullptr);
    EXPECT_EQ(a.Peek()->publish_time, b.Peek()->publish_time);
    EXPECT_EQ(a.Peek()->event_time, b.Peek()->event_time);
    EXPECT_GE(a.Peek()->publish_time, last);
    EXPECT_LE(a.Peek()->publish_time - a.Peek()->event_time, Millis(100));
    EXPECT_GE(a.Peek()->publish_time - a.Peek()->event_time, 0);
    if (c.Peek()->publish_time != a.Peek()->publish_time) differs = true;
    last = a.Peek()->publish_time;
    a.Pop();
    b.Pop();
    c.Pop();
  }
  EXPECT_TRUE(differs);
  EXPECT_EQ(a.last_publish_time(), last);
}

}  // namespace
}  // namespace weir
