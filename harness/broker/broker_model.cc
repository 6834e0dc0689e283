#include "harness/broker/broker_model.h"

#include <algorithm>

#include "harness/core/crc32c.h"

namespace weir {

BrokerModel::BrokerModel(const v1::Scenario& scenario, std::uint64_t seed, TraceLog& trace,
                         FaultSource& faults)
    : scenario_(scenario), seed_(seed), trace_(trace), faults_(faults), workload_(scenario.workload(), seed) {}

void BrokerModel::AdvanceTo(VirtualTime now) {
  for (;;) {
    while (!leases_.empty()) {
      const Lease& top = leases_.top();
      auto it = messages_.find(top.message_id);
      if (it != messages_.end() && it->second.state == State::kLeased &&
          it->second.receipt == top.receipt && it->second.lease_deadline == top.deadline) {
        break;
      }
      leases_.pop();  // superseded by an ack, nack, extension or redelivery
    }
    const MessageSpec* next = workload_.Peek();
    const VirtualTime publish_at = next != nullptr ? next->publish_time : kNever;
    const VirtualTime expire_at = leases_.empty() ? kNever : leases_.top().deadline;
    if (std::min(publish_at, expire_at) > now) return;
    if (publish_at <= expire_at) {
      Publish(*next);
      workload_.Pop();
    } else {
      const Lease lease = leases_.top();
      leases_.pop();
      ExpireLease(lease);
    }
  }
}

void BrokerModel::Publish(const MessageSpec& spec) {
  Message m;
  m.publish_time = spec.publish_time;
  m.event_time = spec.event_time;
  messages_.emplace(spec.id, m);
  ready_.push_back(spec.id);
  ++published_;
  auto& e = trace_.Append(spec.publish_time);
  auto* p = e.mutable_published();
  p->set_message_id(spec.id);
  p->set_event_time_ns(spec.event_time);
  p->set_payload_crc32c(Crc32c(MessagePayload(seed_, spec.id, scenario_.workload().payload_bytes())));
  trace_.Commit();
}

void BrokerModel::ExpireLease(const Lease& lease) {
  Message& m = messages_.at(lease.message_id);
  m.state = State::kReady;
  receipt_owner_.erase(lease.receipt);
  ready_.push_back(lease.message_id);
  auto& e = trace_.Append(lease.deadline);
  auto* x = e.mutable_lease_expired();
  x->set_message_id(lease.message_id);
  x->set_receipt(lease.receipt);
  trace_.Commit();
}

void BrokerModel::Pull(const v1::PullRequest& request, VirtualTime now,
                       v1::PullResponse* response) {
  AdvanceTo(now);
  std::uint32_t n = request.max_messages();
  if (scenario_.broker().max_pull() > 0) n = std::min(n, scenario_.broker().max_pull());
  const VirtualDuration lease = Millis(scenario_.broker().lease_ms());
  const std::uint32_t payload_bytes = scenario_.workload().payload_bytes();
  for (std::uint32_t i = 0; i < n && !ready_.empty(); ++i) {
    const std::uint64_t id = ready_.front();
    ready_.pop_front();
    Message& m = messages_.at(id);
    m.state = State::kLeased;
    m.attempts++;
    m.receipt = ++last_receipt_;
    m.lease_deadline = SaturatingAdd(now, lease);
    receipt_owner_[m.receipt] = id;
    leases_.push(Lease{m.lease_deadline, m.receipt, id});

    v1::Delivery* d = response->add_deliveries();
    d->set_message_id(id);
    d->set_receipt(m.receipt);
    d->set_payload(MessagePayload(seed_, id, payload_bytes));
    d->set_payload_crc32c(Crc32c(d->payload()));
    d->set_event_time_ns(m.event_time);
    d->set_publish_time_ns(m.publish_time);
    d->set_lease_deadline_ns(m.lease_deadline);
    d->set_attempt(m.attempts);
    const auto& sources = scenario_.workload().sources();
    if (!sources.empty()) {
      (*d->mutable_attributes())["source"] =
          sources[static_cast<int>((id - 1) % static_cast<std::uint64_t>(sources.size()))];
    }

    auto& e = trace_.Append(now);
    auto* x = e.mutable_delivered();
    x->set_message_id(id);
    x->set_receipt(m.receipt);
    x->set_attempt(m.attempts);
    x->set_lease_deadline_ns(m.lease_deadline);
    trace_.Commit();
  }
  response->set_now_ns(now);
}

BrokerModel::Message* BrokerModel::Holder(std::uint64_t receipt, VirtualTime /*now*/,
                                          std::uint64_t* message_id, const char** reason) {
  *message_id = 0;
  auto owner = receipt_owner_.find(receipt);
  if (owner == receipt_owner_.end()) {
    *reason = receipt == 0 || receipt > last_receipt_ ? "receipt never issued"
                                                      : "receipt expired, superseded or already acked";
    return nullptr;
  }
  *message_id = owner->second;
  auto it = messages_.find(owner->second);
  if (it == messages_.end() || it->second.state != State::kLeased ||
      it->second.receipt != receipt) {
    *reason = "receipt no longer holds the message";
    return nullptr;
  }
  return &it->second;
}

void BrokerModel::TraceIgnored(VirtualTime now, const char* call, std::uint64_t receipt,
                               std::uint64_t message_id, const char* reason) {
  auto& e = trace_.Append(now);
  auto* x = e.mutable_ack_ignored();
  x->set_receipt(receipt);
  x->set_message_id(message_id);
  x->set_reason(std::string(call) + ": " + reason);
  trace_.Commit();
}

void BrokerModel::Ack(const v1::AckRequest& request, VirtualTime now) {
  AdvanceTo(now);
  for (std::uint64_t receipt : request.receipts()) {
    std::uint64_t id;
    const char* reason;
    if (Holder(receipt, now, &id, &reason) == nullptr) {
      TraceIgnored(now, "ack", receipt, id, reason);
      continue;
    }
    messages_.erase(id);
    receipt_owner_.erase(receipt);
    auto& e = trace_.Append(now);
    auto* x = e.mutable_acked();
    x->set_message_id(id);
    x->set_receipt(receipt);
    trace_.Commit();
  }
}

void BrokerModel::Nack(const v1::NackRequest& request, VirtualTime now) {
  AdvanceTo(now);
  for (std::uint64_t receipt : request.receipts()) {
    std::uint64_t id;
    const char* reason;
    Message* m = Holder(receipt, now, &id, &reason);
    if (m == nullptr) {
      TraceIgnored(now, "nack", receipt, id, reason);
      continue;
    }
    m->state = State::kReady;
    receipt_owner_.erase(receipt);
    ready_.push_back(id);
    auto& e = trace_.Append(now);
    auto* x = e.mutable_nacked();
    x->set_message_id(id);
    x->set_receipt(receipt);
    trace_.Commit();
  }
}

void BrokerModel::ExtendLease(const v1::ExtendLeaseRequest& request, VirtualTime now,
                              v1::ExtendLeaseResponse* response) {
  AdvanceTo(now);
  for (std::uint64_t receipt : request.receipts()) {
    std::uint64_t id;
    const char* reason;
    Message* m = Holder(receipt, now, &id, &reason);
    if (m == nullptr || request.extension_ns() <= 0) {
      response->add_rejected_receipts(receipt);
      continue;
    }
    m->lease_deadline = SaturatingAdd(now, request.extension_ns());
    leases_.push(Lease{m->lease_deadline, receipt, id});
    auto& e = trace_.Append(now);
    auto* x = e.mutable_lease_extended();
    x->set_message_id(id);
    x->set_receipt(receipt);
    x->set_lease_deadline_ns(m->lease_deadline);
    trace_.Commit();
  }
  response->set_now_ns(now);
}

}  // namespace weir
