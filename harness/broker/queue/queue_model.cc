#include "harness/broker/queue/queue_model.h"

#include <algorithm>
#include <string_view>

#include "harness/core/crc32c.h"

namespace weir {

QueueModel::QueueModel(const v1::Scenario& scenario, std::uint64_t seed, TraceLog& trace, FaultSource& faults)
    : scenario_(scenario), seed_(seed), trace_(trace), faults_(faults), workload_(scenario.workload(), seed) {}

void QueueModel::AdvanceTo(VirtualTime now) {
  Prune(now);
  for (;;) {
    while (!leases_.empty()) {
      const Lease& top = leases_.top();
      auto it = messages_.find(top.message_id);
      if (it != messages_.end() && it->second.state == State::kLeased && it->second.receipt == top.receipt &&
          it->second.lease_deadline == top.deadline) {
        break;
      }
      leases_.pop();  // superseded by an ack, nack, extension, redelivery or restart
    }
    const MessageSpec* next = workload_.Peek();
    const VirtualTime publish_at = next != nullptr ? next->publish_time : kNever;
    const VirtualTime reveal_at = hidden_.empty() ? kNever : hidden_.top().at;
    const VirtualTime expire_at = leases_.empty() ? kNever : leases_.top().deadline;
    if (std::min({publish_at, reveal_at, expire_at}) > now) return;
    // Ties: publish, then reveal, then expire — a fixed order keeps traces stable.
    if (publish_at <= reveal_at && publish_at <= expire_at) {
      Publish(*next);
      workload_.Pop();
    } else if (reveal_at <= expire_at) {
      const std::uint64_t id = hidden_.top().message_id;
      hidden_.pop();
      messages_.at(id).state = State::kReady;
      ready_.push_back(id);
    } else {
      const Lease lease = leases_.top();
      leases_.pop();
      ExpireLease(lease);
    }
  }
}

void QueueModel::Prune(VirtualTime now) {
  // A duplicate of an acked message may come at most the horizon after its
  // ack; past that the broker has no reason to remember it.
  const VirtualDuration horizon = Millis(scenario_.broker().redelivery_horizon_ms());
  while (!ack_order_.empty() && SaturatingAdd(ack_order_.front().first, horizon) < now) {
    recently_acked_.erase(ack_order_.front().second);
    ack_order_.pop_front();
  }
  for (auto it = ghosts_.begin(); it != ghosts_.end();) {
    it = it->second.deadline <= now ? ghosts_.erase(it) : std::next(it);
  }
}

void QueueModel::Publish(const MessageSpec& spec) {
  Message m;
  m.publish_time = spec.publish_time;
  m.event_time = spec.event_time;
  m.payload_crc32c = Crc32c(MessagePayload(seed_, spec.id, scenario_.workload().payload_bytes()));
  ++published_;
  auto& e = trace_.Append(spec.publish_time);
  auto* p = e.mutable_published();
  p->set_message_id(spec.id);
  p->set_event_time_ns(spec.event_time);
  p->set_payload_crc32c(m.payload_crc32c);
  trace_.Commit();

  const auto& cfg = faults_.config();
  auto delay = faults_.Decide(
      v1::PUBLISH, spec.id, v1::FaultDecision::kVisibilityDelayMs, spec.publish_time, [&](v1::FaultDecision* out) {
        if (cfg.max_visibility_delay_ms() <= 0) return false;
        if (!faults_.Chance("visibility_delay", spec.id, cfg.visibility_delay_rate())) return false;
        out->set_visibility_delay_ms(faults_.Int("visibility_delay", spec.id, 1, cfg.max_visibility_delay_ms()));
        return true;
      });
  if (delay.has_value() && delay->visibility_delay_ms() > 0) {
    m.state = State::kHidden;
    hidden_.push(Reveal{SaturatingAdd(spec.publish_time, Millis(delay->visibility_delay_ms())), spec.id});
    messages_.emplace(spec.id, m);
    return;
  }
  messages_.emplace(spec.id, m);
  ready_.push_back(spec.id);
}

void QueueModel::ExpireLease(const Lease& lease) {
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

void QueueModel::Restart(VirtualTime now) {
  std::vector<std::uint64_t> leased;
  for (const auto& [id, m] : messages_) {
    if (m.state == State::kLeased) leased.push_back(id);
  }
  std::sort(leased.begin(), leased.end());  // hash order must not reach the trace
  for (std::uint64_t id : leased) {
    Message& m = messages_.at(id);
    m.state = State::kReady;
    receipt_owner_.erase(m.receipt);
    ready_.push_back(id);
    auto& e = trace_.Append(now);
    auto* x = e.mutable_lease_expired();
    x->set_message_id(id);
    x->set_receipt(m.receipt);
    trace_.Commit();
  }
  ghosts_.clear();
}

void QueueModel::Shuffle(std::uint64_t position) {
  // Fisher–Yates with one position-keyed draw per slot: replaying the same
  // pull position gives the same order.
  std::vector<std::uint64_t> ids(ready_.begin(), ready_.end());
  for (std::size_t i = ids.size(); i > 1; --i) {
    const auto j =
        static_cast<std::size_t>(faults_.Int("reorder.shuffle", position, 0, static_cast<std::int64_t>(i - 1), i));
    std::swap(ids[i - 1], ids[j]);
  }
  ready_.assign(ids.begin(), ids.end());
}

void QueueModel::FillDelivery(std::uint64_t id, const Message& m, v1::PullResponse* response) const {
  v1::Delivery* d = response->add_deliveries();
  d->set_message_id(id);
  d->set_receipt(m.receipt);
  d->set_payload(MessagePayload(seed_, id, scenario_.workload().payload_bytes()));
  d->set_payload_crc32c(m.payload_crc32c);
  d->set_event_time_ns(m.event_time);
  d->set_publish_time_ns(m.publish_time);
  d->set_lease_deadline_ns(m.lease_deadline);
  d->set_attempt(m.attempts);
  const auto& sources = scenario_.workload().sources();
  if (!sources.empty()) {
    (*d->mutable_attributes())["source"] =
        sources[static_cast<int>((id - 1) % static_cast<std::uint64_t>(sources.size()))];
  }
}

void QueueModel::TraceDelivered(VirtualTime now, std::uint64_t id, std::uint64_t receipt, std::uint32_t attempt,
                                VirtualTime deadline) {
  auto& e = trace_.Append(now);
  auto* x = e.mutable_delivered();
  x->set_message_id(id);
  x->set_receipt(receipt);
  x->set_attempt(attempt);
  x->set_lease_deadline_ns(deadline);
  trace_.Commit();
}

void QueueModel::Deliver(std::uint64_t id, VirtualTime now, v1::PullResponse* response) {
  Message& m = messages_.at(id);
  if (m.state == State::kLeased) receipt_owner_.erase(m.receipt);  // superseded
  m.state = State::kLeased;
  m.attempts++;
  m.receipt = ++last_receipt_;
  m.lease_deadline = SaturatingAdd(now, Millis(scenario_.broker().lease_ms()));
  receipt_owner_[m.receipt] = id;
  leases_.push(Lease{m.lease_deadline, m.receipt, id});
  FillDelivery(id, m, response);
  TraceDelivered(now, id, m.receipt, m.attempts, m.lease_deadline);
}

bool QueueModel::HasDuplicateCandidate() const {
  if (!recently_acked_.empty()) return true;
  for (const auto& [id, m] : messages_) {
    if (m.state == State::kLeased) return true;
  }
  return false;
}

bool QueueModel::Duplicate(std::uint64_t position, VirtualTime now, v1::PullResponse* response) {
  std::vector<std::uint64_t> candidates;
  for (const auto& [id, m] : messages_) {
    if (m.state == State::kLeased) candidates.push_back(id);
  }
  for (const auto& [id, a] : recently_acked_) candidates.push_back(id);  // pruned: within horizon
  if (candidates.empty()) return false;
  std::sort(candidates.begin(), candidates.end());
  const std::uint64_t id = candidates[static_cast<std::size_t>(
      faults_.Int("duplicate.pick", position, 0, static_cast<std::int64_t>(candidates.size() - 1)))];
  if (messages_.contains(id)) {
    Deliver(id, now, response);
    return true;
  }
  Message& m = recently_acked_.at(id).message;
  m.attempts++;
  m.receipt = ++last_receipt_;
  m.lease_deadline = SaturatingAdd(now, Millis(scenario_.broker().lease_ms()));
  ghosts_[m.receipt] = Ghost{id, m.lease_deadline};
  FillDelivery(id, m, response);
  TraceDelivered(now, id, m.receipt, m.attempts, m.lease_deadline);
  return true;
}

void QueueModel::Pull(const v1::PullRequest& request, VirtualTime now, v1::PullResponse* response,
                      std::uint64_t position) {
  AdvanceTo(now);
  std::uint32_t n = request.max_messages();
  if (scenario_.broker().max_pull() > 0) n = std::min(n, scenario_.broker().max_pull());
  const auto& cfg = faults_.config();
  if (position > 0) {
    if (faults_.Decide(v1::PULL, position, v1::FaultDecision::kBrokerRestart, now, [&](v1::FaultDecision* out) {
          if (!faults_.Chance("broker_restart", position, cfg.broker_restart_rate())) return false;
          out->set_broker_restart(true);
          return true;
        })) {
      Restart(now);
    }
    if (faults_.Decide(v1::PULL, position, v1::FaultDecision::kReorder, now, [&](v1::FaultDecision* out) {
          if (ready_.size() < 2) return false;  // nothing to reorder
          if (!faults_.Chance("reorder", position, cfg.reorder_rate())) return false;
          out->set_reorder(true);
          return true;
        })) {
      Shuffle(position);
    }
    if (n > 0 && faults_.Decide(v1::PULL, position, v1::FaultDecision::kDuplicate, now, [&](v1::FaultDecision* out) {
          if (!faults_.Chance("duplicate", position, cfg.duplicate_rate())) return false;
          if (!HasDuplicateCandidate()) return false;
          out->set_duplicate(true);
          return true;
        })) {
      // The copy takes one of the n slots: a connector never gets more than it asked for.
      if (Duplicate(position, now, response)) --n;
    }
  }
  for (std::uint32_t i = 0; i < n && !ready_.empty(); ++i) {
    const std::uint64_t id = ready_.front();
    ready_.pop_front();
    Deliver(id, now, response);
  }
  response->set_now_ns(now);
}

QueueModel::Message* QueueModel::Holder(std::uint64_t receipt, VirtualTime /*now*/, std::uint64_t* message_id,
                                        const char** reason) {
  *message_id = 0;
  auto owner = receipt_owner_.find(receipt);
  if (owner == receipt_owner_.end()) {
    *reason = receipt == 0 || receipt > last_receipt_ ? "receipt never issued"
                                                      : "receipt expired, superseded or already acked";
    return nullptr;
  }
  *message_id = owner->second;
  auto it = messages_.find(owner->second);
  if (it == messages_.end() || it->second.state != State::kLeased || it->second.receipt != receipt) {
    *reason = "receipt no longer holds the message";
    return nullptr;
  }
  return &it->second;
}

void QueueModel::TraceIgnored(VirtualTime now, const char* call, std::uint64_t receipt, std::uint64_t message_id,
                              const char* reason) {
  if (std::string_view(reason).rfind("lost by a fault", 0) != 0) ++ignored_receipts_;
  auto& e = trace_.Append(now);
  auto* x = e.mutable_ack_ignored();
  x->set_receipt(receipt);
  x->set_message_id(message_id);
  x->set_reason(std::string(call) + ": " + reason);
  trace_.Commit();
}

void QueueModel::Ack(const v1::AckRequest& request, VirtualTime now, std::uint64_t position) {
  AdvanceTo(now);
  if (position > 0 && faults_.Decide(v1::ACK, position, v1::FaultDecision::kLostAck, now, [&](v1::FaultDecision* out) {
        if (!faults_.Chance("lost_ack", position, faults_.config().lost_ack_rate())) return false;
        out->set_lost_ack(true);
        return true;
      })) {
    for (std::uint64_t receipt : request.receipts()) {
      auto owner = receipt_owner_.find(receipt);
      TraceIgnored(now, "ack", receipt, owner != receipt_owner_.end() ? owner->second : 0,
                   "lost by a fault; the lease will run out");
    }
    return;
  }
  const bool remember = scenario_.broker().redelivery_horizon_ms() > 0;
  for (std::uint64_t receipt : request.receipts()) {
    if (auto g = ghosts_.find(receipt); g != ghosts_.end()) {
      // A copy of an acked message: acking it again is harmless.
      auto& e = trace_.Append(now);
      e.mutable_acked()->set_message_id(g->second.message_id);
      e.mutable_acked()->set_receipt(receipt);
      trace_.Commit();
      ghosts_.erase(g);
      continue;
    }
    std::uint64_t id;
    const char* reason;
    Message* m = Holder(receipt, now, &id, &reason);
    if (m == nullptr) {
      TraceIgnored(now, "ack", receipt, id, reason);
      continue;
    }
    if (remember) {
      recently_acked_[id] = Acked{*m, now};
      ack_order_.emplace_back(now, id);
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

void QueueModel::Nack(const v1::NackRequest& request, VirtualTime now) {
  AdvanceTo(now);
  for (std::uint64_t receipt : request.receipts()) {
    if (auto g = ghosts_.find(receipt); g != ghosts_.end()) {
      TraceIgnored(now, "nack", receipt, g->second.message_id,
                   "copy of an already acked message; nothing to redeliver");
      ghosts_.erase(g);
      continue;
    }
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

void QueueModel::ExtendLease(const v1::ExtendLeaseRequest& request, VirtualTime now,
                             v1::ExtendLeaseResponse* response) {
  AdvanceTo(now);
  for (std::uint64_t receipt : request.receipts()) {
    if (auto g = ghosts_.find(receipt); g != ghosts_.end() && request.extension_ns() > 0) {
      g->second.deadline = SaturatingAdd(now, request.extension_ns());
      auto& e = trace_.Append(now);
      auto* x = e.mutable_lease_extended();
      x->set_message_id(g->second.message_id);
      x->set_receipt(receipt);
      x->set_lease_deadline_ns(g->second.deadline);
      trace_.Commit();
      continue;
    }
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

std::optional<RecordKey> QueueModel::Identify(const v1::Record& record, std::string* why) const {
  if (record.message_id() == 0 || record.message_id() > total_messages() || record.message_id() > kMaxOffset) {
    *why = "names message " + std::to_string(record.message_id()) + ", which the broker never published";
    return std::nullopt;
  }
  return RecordKey{record.message_id()};
}

}  // namespace weir
