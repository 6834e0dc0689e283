// File: queue_model.h
//
// The fake broker in the queue shape (a BrokerModel, broker_model.h): the scenario's workload is published over
// virtual time; Pull hands out deliverable messages with fresh receipts and
// leases; Ack removes a message for good; Nack and lease expiry make it
// deliverable again; ExtendLease moves a deadline. Every change is an event in
// the trace.
//
// Time: the model is lazy. Each operation first calls AdvanceTo(now), which
// applies publishes and lease expiries up to now in time order, so nothing has
// to be scheduled for them.
//
// Faults (each through FaultSource, keyed by position; `position` 0 on a call
// means "not a counted broker call": no per-call faults):
//   - delayed visibility (PUBLISH k = message id): published at its time,
//     deliverable only visibility_delay_ms later;
//   - broker restart (PULL k, before it): every lease dropped (traced as
//     lease_expired), everything unacked deliverable again;
//   - reorder (PULL k): the deliverable messages are shuffled before handing out;
//   - duplicate (PULL k): one of the handed-out slots is another copy, with a
//     new receipt, of a message that is still leased (the new receipt
//     supersedes the old one, as any redelivery does) or that was acked at most
//     broker.redelivery_horizon_ms ago (a "ghost" delivery: acking, nacking or
//     letting it expire changes nothing, so it is never redelivered again);
//   - lost ack (ACK k): the call answers OK and the broker forgets its acks.
//
// Invariants:
//   - a message is in exactly one of: unpublished, hidden (published, not yet
//     visible), ready, leased, acked;
//   - only the newest receipt of a leased message can ack, nack or extend it;
//   - memory holds only published, unacked messages (what is in flight), plus
//     messages acked within the redelivery horizon and their ghost receipts
//     (pruned as virtual time passes).
//
// Thread safety: none; the simulation thread owns the model.
#pragma once

#include <cstdint>
#include <deque>
#include <map>
#include <optional>
#include <string>
#include <utility>
#include <queue>
#include <vector>

#include "absl/container/flat_hash_map.h"
#include "harness/broker/broker_model.h"
#include "harness/broker/workload.h"
#include "harness/core/virtual_time.h"
#include "harness/faults/fault_source.h"
#include "harness/trace/trace_log.h"
#include "weir/v1/broker.pb.h"
#include "weir/v1/scenario.pb.h"

namespace weir {

class QueueModel final : public BrokerModel {
 public:
  // REQUIRES: scenario, trace and faults outlive the model.
  QueueModel(const v1::Scenario& scenario, std::uint64_t seed, TraceLog& trace, FaultSource& faults);

  // Applies every publish and lease expiry at or before now, in time order.
  v1::SourceShape shape() const override { return v1::QUEUE; }
  void AdvanceTo(VirtualTime now) override;

  // Each REQUIRES: now is not earlier than any earlier call's now.
  // `position`: this call's 1-based position among calls of its method (0: none).
  void Pull(const v1::PullRequest& request, VirtualTime now, v1::PullResponse* response, std::uint64_t position = 0);
  void Ack(const v1::AckRequest& request, VirtualTime now, std::uint64_t position = 0);
  void Nack(const v1::NackRequest& request, VirtualTime now);
  void ExtendLease(const v1::ExtendLeaseRequest& request, VirtualTime now, v1::ExtendLeaseResponse* response);

  std::uint64_t total_messages() const override { return workload_.total(); }
  std::uint64_t published() const override { return published_; }
  // A record must name a message id the workload publishes (1 .. total).
  std::optional<RecordKey> Identify(const v1::Record& record, std::string* why) const override;
  // Every message published and each with a committed record.
  bool Drained(const CommittedView& committed) const override {
    return all_published() && committed.distinct() >= total_messages();
  }
  // Acks, nacks and extensions the broker ignored because their receipt held
  // no message (never issued, expired, superseded, already acked); lost-ack
  // faults are not counted.
  std::uint64_t ignored_receipts() const override { return ignored_receipts_; }
  bool all_published() const override { return workload_.Peek() == nullptr; }
  VirtualTime last_publish_time() const override { return workload_.last_publish_time(); }
  // Messages published and not yet acked.
  std::size_t in_flight() const { return messages_.size(); }
  // True when a Pull now would hand out nothing (after AdvanceTo(now)).
  bool nothing_deliverable() const { return ready_.empty(); }
  // True when nothing is ready, nothing waits to become visible and no publish
  // or lease expiry is due at or before now: a Pull now would hand out nothing
  // even after AdvanceTo(now). Does not change the model (no trace events).
  bool IdleAt(VirtualTime now) const override {
    const MessageSpec* next = workload_.Peek();
    return ready_.empty() && hidden_.empty() && (next == nullptr || next->publish_time > now) &&
           (leases_.empty() || leases_.top().deadline > now);
  }
  // Messages acked within the redelivery horizon still remembered (for tests).
  std::size_t remembered_acks() const { return recently_acked_.size(); }

 private:
  enum class State : std::uint8_t { kHidden, kReady, kLeased };
  struct Message {
    VirtualTime publish_time = 0;
    VirtualTime event_time = 0;
    std::uint32_t attempts = 0;
    State state = State::kReady;
    std::uint64_t receipt = 0;  // newest receipt; 0 before the first delivery
    VirtualTime lease_deadline = 0;
    // CRC-32C of the payload, computed once at publish: deliveries regenerate
    // the payload bytes but need not checksum them again.
    std::uint32_t payload_crc32c = 0;
  };
  struct Lease {
    VirtualTime deadline;
    std::uint64_t receipt;
    std::uint64_t message_id;
    bool operator>(const Lease& o) const {
      return deadline != o.deadline ? deadline > o.deadline : receipt > o.receipt;
    }
  };

  struct Acked {
    Message message;  // as it was when acked (times, attempts)
    VirtualTime acked_at = 0;
  };
  struct Ghost {  // a delivery of an already acked message
    std::uint64_t message_id = 0;
    VirtualTime deadline = 0;
  };
  struct Reveal {  // a hidden message becoming visible
    VirtualTime at;
    std::uint64_t message_id;
    bool operator>(const Reveal& o) const { return at != o.at ? at > o.at : message_id > o.message_id; }
  };

  void Publish(const MessageSpec& spec);
  void Prune(VirtualTime now);
  void Restart(VirtualTime now);
  void Shuffle(std::uint64_t position);
  // Hands out message `id` (ready or leased) as a new delivery.
  void Deliver(std::uint64_t id, VirtualTime now, v1::PullResponse* response);
  bool HasDuplicateCandidate() const;
  // Hands out one more copy of a leased or recently acked message, if any.
  bool Duplicate(std::uint64_t position, VirtualTime now, v1::PullResponse* response);
  void FillDelivery(std::uint64_t id, const Message& m, v1::PullResponse* response) const;
  void TraceDelivered(VirtualTime now, std::uint64_t id, std::uint64_t receipt, std::uint32_t attempt,
                      VirtualTime deadline);
  void ExpireLease(const Lease& lease);
  // The leased message this receipt currently holds, or nullptr (and the reason).
  Message* Holder(std::uint64_t receipt, VirtualTime now, std::uint64_t* message_id, const char** reason);
  void TraceIgnored(VirtualTime now, const char* call, std::uint64_t receipt, std::uint64_t message_id,
                    const char* reason);

  const v1::Scenario& scenario_;
  const std::uint64_t seed_;
  TraceLog& trace_;
  FaultSource& faults_;
  Workload workload_;
  absl::flat_hash_map<std::uint64_t, Message> messages_;
  absl::flat_hash_map<std::uint64_t, std::uint64_t> receipt_owner_;  // live receipts only
  std::deque<std::uint64_t> ready_;
  std::priority_queue<Lease, std::vector<Lease>, std::greater<Lease>> leases_;
  std::priority_queue<Reveal, std::vector<Reveal>, std::greater<Reveal>> hidden_;
  absl::flat_hash_map<std::uint64_t, Acked> recently_acked_;
  std::deque<std::pair<VirtualTime, std::uint64_t>> ack_order_;  // (acked_at, id), time order
  std::map<std::uint64_t, Ghost> ghosts_;                        // by receipt; ordered so pruning is deterministic
  std::uint64_t published_ = 0;
  std::uint64_t last_receipt_ = 0;
  std::uint64_t ignored_receipts_ = 0;
};

}  // namespace weir
