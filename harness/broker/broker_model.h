// File: broker_model.h
//
// The fake broker in queue mode: the scenario's workload is published over
// virtual time; Pull hands out deliverable messages with fresh receipts and
// leases; Ack removes a message for good; Nack and lease expiry make it
// deliverable again; ExtendLease moves a deadline. Every change is an event in
// the trace.
//
// Time: the model is lazy. Each operation first calls AdvanceTo(now), which
// applies publishes and lease expiries up to now in time order, so nothing has
// to be scheduled for them.
//
// Invariants:
//   - a message is in exactly one of: unpublished, ready, leased, acked;
//   - only the newest receipt of a leased message can ack, nack or extend it;
//   - memory holds only published, unacked messages (what is in flight).
//
// Thread safety: none; the simulation thread owns the model.
#pragma once

#include <cstdint>
#include <deque>
#include <queue>
#include <vector>

#include "absl/container/flat_hash_map.h"
#include "harness/broker/workload.h"
#include "harness/core/virtual_time.h"
#include "harness/faults/fault_source.h"
#include "harness/trace/trace_log.h"
#include "weir/v1/broker.pb.h"
#include "weir/v1/scenario.pb.h"

namespace weir {

class BrokerModel {
 public:
  // REQUIRES: scenario, trace and faults outlive the model.
  BrokerModel(const v1::Scenario& scenario, std::uint64_t seed, TraceLog& trace, FaultSource& faults);

  // Applies every publish and lease expiry at or before now, in time order.
  void AdvanceTo(VirtualTime now);

  // Each REQUIRES: now is not earlier than any earlier call's now.
  void Pull(const v1::PullRequest& request, VirtualTime now, v1::PullResponse* response);
  void Ack(const v1::AckRequest& request, VirtualTime now);
  void Nack(const v1::NackRequest& request, VirtualTime now);
  void ExtendLease(const v1::ExtendLeaseRequest& request, VirtualTime now,
                   v1::ExtendLeaseResponse* response);

  std::uint64_t total_messages() const { return workload_.total(); }
  std::uint64_t published() const { return published_; }
  bool all_published() const { return workload_.Peek() == nullptr; }
  VirtualTime last_publish_time() const { return workload_.last_publish_time(); }
  // Messages published and not yet acked.
  std::size_t in_flight() const { return messages_.size(); }
  // True when a Pull now would hand out nothing (after AdvanceTo(now)).
  bool nothing_deliverable() const { return ready_.empty(); }

 private:
  enum class State : std::uint8_t { kReady, kLeased };
  struct Message {
    VirtualTime publish_time = 0;
    VirtualTime event_time = 0;
    std::uint32_t attempts = 0;
    State state = State::kReady;
    std::uint64_t receipt = 0;  // newest receipt; 0 before the first delivery
    VirtualTime lease_deadline = 0;
    std::uint32_t source_index = 0;
  };
  struct Lease {
    VirtualTime deadline;
    std::uint64_t receipt;
    std::uint64_t message_id;
    bool operator>(const Lease& o) const {
      return deadline != o.deadline ? deadline > o.deadline : receipt > o.receipt;
    }
  };

  void Publish(const MessageSpec& spec);
  void ExpireLease(const Lease& lease);
  // The leased message this receipt currently holds, or nullptr (and the reason).
  Message* Holder(std::uint64_t receipt, VirtualTime now, std::uint64_t* message_id,
                  const char** reason);
  void TraceIgnored(VirtualTime now, const char* call, std::uint64_t receipt,
                    std::uint64_t message_id, const char* reason);

  const v1::Scenario& scenario_;
  const std::uint64_t seed_;
  TraceLog& trace_;
  FaultSource& faults_;
  Workload workload_;
  absl::flat_hash_map<std::uint64_t, Message> messages_;
  absl::flat_hash_map<std::uint64_t, std::uint64_t> receipt_owner_;  // live receipts only
  std::deque<std::uint64_t> ready_;
  std::priority_queue<Lease, std::vector<Lease>, std::greater<Lease>> leases_;
  std::uint64_t published_ = 0;
  std::uint64_t last_receipt_ = 0;
};

}  // namespace weir
