#include "buoy_source.h"

#include <algorithm>
#include <sstream>

namespace buoys {

using weir::adapter::Context;

grpc::Status BuoySource::Open(const weir::adapter::OpenInfo& info, Context& ctx) {
  // A new incarnation keeps nothing but the committed checkpoint.
  watermark_.reset();
  emitted_.clear();
  epoch_.clear();
  pending_.clear();
  to_ack_.clear();
  last_input_ns_ = ctx.now();
  // Seeded from the incarnation, never from a clock: runs must replay.
  pull_gate_.emplace(weir::adapter::MixSeed(info.incarnation, 1));
  ack_gate_.emplace(weir::adapter::MixSeed(info.incarnation, 2));
  if (info.restore) {
    // State: the watermark ("-" for none), then the ids with a record.
    std::istringstream in(info.checkpoint_state);
    std::string watermark;
    if (!(in >> watermark)) {
      return grpc::Status(grpc::StatusCode::INVALID_ARGUMENT, "empty buoy checkpoint");
    }
    if (watermark != "-") watermark_ = std::stoll(watermark);
    for (std::uint64_t id; in >> id;) emitted_.insert(id);
  }
  return grpc::Status::OK;
}

void BuoySource::Advance(Context& ctx) {
  FlushAcks(ctx);
  std::vector<weir::v1::Delivery> got;
  if (pull_gate_->open(ctx.now())) {
    weir::adapter::BrokerStatus status = ctx.broker().Pull(64, &got);
    if (status.ok()) {
      pull_gate_->OnSuccess();
    } else {  // throttled: wait the retry-after; transient: back off
      pull_gate_->OnFailure(status, ctx.now());
    }
  }
  for (const weir::v1::Delivery& d : got) {
    // A redelivered report is acked after the next commit, never emitted twice.
    epoch_.push_back(d.receipt());
    if (emitted_.insert(d.message_id()).second) {
      ctx.Emit(d.message_id(), d.event_time_ns(), d.payload());
      watermark_ = std::max(watermark_.value_or(d.event_time_ns()), d.event_time_ns());
    }
  }
  if (bugs_.ack_on_pull && !got.empty()) {
    std::vector<std::uint64_t> receipts;
    for (const weir::v1::Delivery& d : got) receipts.push_back(d.receipt());
    (void)ctx.broker().Ack(receipts);
  }
  if (!got.empty()) {
    last_input_ns_ = ctx.now();
  } else if (ctx.now() - last_input_ns_ >= kIdleTimeoutNs) {
    // Idle: the watermark must still move, or windows downstream never close.
    watermark_ = std::max(watermark_.value_or(ctx.now() - kIdleLagNs), ctx.now() - kIdleLagNs);
  }
  if (watermark_) ctx.SetWatermark(*watermark_);
  std::int64_t next = got.empty() ? ctx.now() + kIdlePollNs : ctx.now();
  next = std::max(next, pull_gate_->not_before());
  if (!to_ack_.empty()) next = std::min(next, std::max(ctx.now(), ack_gate_->not_before()));
  ctx.ResumeAt(next);
}

std::string BuoySource::Checkpoint(std::uint64_t checkpoint_id, Context&) {
  pending_[checkpoint_id] = std::move(epoch_);
  epoch_.clear();
  std::ostringstream out;
  if (watermark_) {
    out << *watermark_;
  } else {
    out << '-';
  }
  for (std::uint64_t id : emitted_) out << ' ' << id;
  return out.str();
}

void BuoySource::Committed(std::uint64_t checkpoint_id, Context& ctx) {
  // Only now are these records durable: their messages may be acked.
  for (auto it = pending_.begin(); it != pending_.end() && it->first <= checkpoint_id;) {
    to_ack_.insert(to_ack_.end(), it->second.begin(), it->second.end());
    it = pending_.erase(it);
  }
  FlushAcks(ctx);
}

void BuoySource::FlushAcks(Context& ctx) {
  if (to_ack_.empty() || !ack_gate_->open(ctx.now())) return;
  weir::adapter::BrokerStatus status = ctx.broker().Ack(to_ack_);
  if (status.ok()) {
    ack_gate_->OnSuccess();
    to_ack_.clear();
  } else {
    ack_gate_->OnFailure(status, ctx.now());
  }
}

}  // namespace buoys
