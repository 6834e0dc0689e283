#include <algorithm>
#include <limits>
#include <utility>

#include "weir/adapter/source.h"

namespace weir::adapter {
namespace {

const char* CallName(CallKind call) {
  switch (call) {
    case CallKind::kOpen: return "Open";
    case CallKind::kAdvance: return "Advance";
    case CallKind::kCheckpoint: return "Checkpoint";
    case CallKind::kCommitted: return "Committed";
  }
  return "?";
}

}  // namespace

Context::Context(CallKind call, std::int64_t now_ns, BrokerClient& broker)
    : call_(call), now_ns_(now_ns), clocked_(broker, *this) {}

bool Context::AllowedHere(const char* method) {
  if (call_ == CallKind::kAdvance) return true;
  if (misuse_.empty()) {
    misuse_ = std::string(method) + " called during " + CallName(call_) +
              "; it shapes a step and is allowed only during Advance";
  }
  return false;
}

void Context::Emit(std::uint64_t message_id, std::int64_t event_time_ns, std::string value) {
  if (!AllowedHere("Emit")) return;
  v1::Record& r = records_.emplace_back();
  r.set_message_id(message_id);
  r.set_event_time_ns(event_time_ns);
  r.set_value(std::move(value));
}

void Context::SetWatermark(std::int64_t watermark_ns) {
  if (!AllowedHere("SetWatermark")) return;
  watermark_ns_ = watermark_ns;
}

void Context::ResumeAt(std::int64_t at_ns) {
  if (!AllowedHere("ResumeAt")) return;
  resume_at_ns_ = at_ns;
  finished_ = false;
}

void Context::Finish() {
  if (!AllowedHere("Finish")) return;
  finished_ = true;
  resume_at_ns_.reset();
}

void Context::WriteStep(v1::AdvanceResponse* response) {
  for (v1::Record& r : records_) *response->add_records() = std::move(r);
  records_.clear();
  if (watermark_ns_.has_value()) response->set_watermark_ns(*watermark_ns_);
  if (finished_) {
    response->set_finished(true);
    return;
  }
  std::int64_t at;
  if (resume_at_ns_.has_value()) {
    at = std::max(*resume_at_ns_, now_ns_);
  } else {
    at = now_ns_ > std::numeric_limits<std::int64_t>::max() - kDefaultResumeDelayNs
             ? std::numeric_limits<std::int64_t>::max()
             : now_ns_ + kDefaultResumeDelayNs;
  }
  response->set_resume_at_ns(at);
}

BrokerStatus Context::ClockedBroker::Observe(BrokerStatus status) {
  if (status.now_ns.has_value()) ctx_.now_ns_ = std::max(ctx_.now_ns_, *status.now_ns);
  return status;
}

BrokerStatus Context::ClockedBroker::Pull(std::uint32_t max, std::vector<v1::Delivery>* out) {
  return Observe(inner_.Pull(max, out));
}

BrokerStatus Context::ClockedBroker::Ack(const std::vector<std::uint64_t>& receipts) {
  return Observe(inner_.Ack(receipts));
}

BrokerStatus Context::ClockedBroker::Nack(const std::vector<std::uint64_t>& receipts) {
  return Observe(inner_.Nack(receipts));
}

BrokerStatus Context::ClockedBroker::ExtendLease(const std::vector<std::uint64_t>& receipts,
                                                 std::int64_t extension_ns,
                                                 std::vector<std::uint64_t>* rejected) {
  return Observe(inner_.ExtendLease(receipts, extension_ns, rejected));
}

}  // namespace weir::adapter
