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
    case CallKind::kAssign: return "Assign";
    case CallKind::kRevoke: return "Revoke";
    case CallKind::kCut: return "Cut";
  }
  return "?";
}

BrokerStatus Unimplemented(const char* method) {
  BrokerStatus out;
  out.code = grpc::StatusCode::UNIMPLEMENTED;
  out.message = std::string(method) + " is not implemented by this broker client (log shape)";
  return out;
}

}  // namespace

BrokerStatus BrokerClient::ListPartitions(std::vector<v1::PartitionInfo>* out) {
  out->clear();
  return Unimplemented("ListPartitions");
}

BrokerStatus BrokerClient::Read(std::uint32_t, std::uint64_t, const ReadOptions&, ReadResult* out) {
  out->records.clear();
  return Unimplemented("Read");
}

BrokerStatus BrokerClient::SaveBookmarks(const std::vector<Bookmark>&) { return Unimplemented("SaveBookmarks"); }

BrokerStatus BrokerClient::LoadBookmarks(std::vector<Bookmark>* out) {
  out->clear();
  return Unimplemented("LoadBookmarks");
}

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

void Context::EmitLogRecord(std::uint32_t partition, std::uint64_t offset, std::int64_t event_time_ns,
                            std::string value) {
  if (!AllowedHere("EmitLogRecord")) return;
  v1::Record& r = records_.emplace_back();
  r.set_partition(partition);
  r.set_offset(offset);
  r.set_event_time_ns(event_time_ns);
  r.set_value(std::move(value));
}

void Context::ReportGap(std::uint32_t partition, std::uint64_t from_offset, std::uint64_t to_offset) {
  if (!AllowedHere("ReportGap")) return;
  v1::Gap& g = gaps_.emplace_back();
  g.set_partition(partition);
  g.set_from_offset(from_offset);
  g.set_to_offset(to_offset);
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
  for (v1::Gap& g : gaps_) *response->add_gaps() = std::move(g);
  gaps_.clear();
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

BrokerStatus Context::ClockedBroker::ExtendLease(const std::vector<std::uint64_t>& receipts, std::int64_t extension_ns,
                                                 std::vector<std::uint64_t>* rejected) {
  return Observe(inner_.ExtendLease(receipts, extension_ns, rejected));
}

}  // namespace weir::adapter

namespace weir::adapter {

BrokerStatus Context::ClockedBroker::ListPartitions(std::vector<v1::PartitionInfo>* out) {
  return Observe(inner_.ListPartitions(out));
}

BrokerStatus Context::ClockedBroker::Read(std::uint32_t partition, std::uint64_t offset, const ReadOptions& options,
                                          ReadResult* out) {
  return Observe(inner_.Read(partition, offset, options, out));
}

BrokerStatus Context::ClockedBroker::SaveBookmarks(const std::vector<Bookmark>& bookmarks) {
  return Observe(inner_.SaveBookmarks(bookmarks));
}

BrokerStatus Context::ClockedBroker::LoadBookmarks(std::vector<Bookmark>* out) {
  return Observe(inner_.LoadBookmarks(out));
}

OpenInfo OpenInfoFrom(const v1::OpenRequest& request) {
  OpenInfo info;
  info.incarnation = request.incarnation();
  info.restore = request.restore();
  info.checkpoint_id = request.checkpoint_id();
  info.checkpoint_state = request.checkpoint_state();
  info.redelivery_horizon_ns = request.redelivery_horizon_ns();
  info.spans.reserve(static_cast<std::size_t>(request.spans_size()));
  for (const v1::Span& s : request.spans()) {
    Span& span = info.spans.emplace_back();
    span.partition = s.partition();
    span.start_offset = s.start_offset();
    if (s.has_end_offset()) span.end_offset = s.end_offset();
  }
  info.new_partitions_held = request.new_partitions_held();
  info.reader = request.reader();
  info.readers = std::max<std::uint32_t>(1, request.readers());
  return info;
}

void WriteOpen(const Source& source, v1::OpenResponse* response) {
  // A queue source leaves the shape unset (the same as QUEUE), so its answers
  // stay byte for byte what they were before the log shape.
  if (source.shape() == SourceShape::kLog) response->set_shape(v1::LOG);
}

void RunCheckpoint(Source& source, std::uint64_t checkpoint_id, Context& ctx, v1::CheckpointResponse* response) {
  response->set_state(source.Checkpoint(checkpoint_id, ctx));
  for (const ResumePoint& p : source.ResumePoints()) {
    v1::ResumePoint* out = response->add_resume_points();
    out->set_partition(p.partition);
    out->set_next_offset(p.next_offset);
  }
}

}  // namespace weir::adapter

namespace weir::adapter {
namespace {

Span SpanFrom(const v1::Span& s) {
  Span span;
  span.partition = s.partition();
  span.start_offset = s.start_offset();
  if (s.has_end_offset()) span.end_offset = s.end_offset();
  return span;
}

void WriteSpan(const Span& span, v1::Span* out) {
  out->set_partition(span.partition);
  out->set_start_offset(span.start_offset);
  if (span.end_offset.has_value()) out->set_end_offset(*span.end_offset);
}

bool ByPartition(const Span& a, const Span& b) { return a.partition < b.partition; }

}  // namespace

grpc::Status Source::Assign(const std::vector<Span>&, Context&) {
  return grpc::Status(grpc::StatusCode::UNIMPLEMENTED,
                      "this source does not take spans by Assign (several readers need it)");
}

grpc::Status Source::Revoke(const std::vector<std::uint32_t>&, Context&) {
  return grpc::Status(grpc::StatusCode::UNIMPLEMENTED,
                      "this source does not give up spans by Revoke (several readers need it)");
}

CutAnswer Source::Cut(const Span& held, std::uint64_t, Context&) { return CutAnswer::Decline(held); }

void SpansTold::Opened(const OpenInfo& info) {
  spans_.clear();
  Assigned(info.spans);
}

void SpansTold::Assigned(const std::vector<Span>& spans) {
  for (const Span& span : spans) {
    auto it = std::lower_bound(spans_.begin(), spans_.end(), span, ByPartition);
    if (it != spans_.end() && it->partition == span.partition) {
      *it = span;
    } else {
      spans_.insert(it, span);
    }
  }
}

void SpansTold::Revoked(const std::vector<std::uint32_t>& partitions) {
  for (std::uint32_t partition : partitions) {
    auto it = std::lower_bound(spans_.begin(), spans_.end(), Span{partition, 0, {}}, ByPartition);
    if (it != spans_.end() && it->partition == partition) spans_.erase(it);
  }
}

void SpansTold::Cut(const CutAnswer& answer) { Assigned({answer.head}); }

Span SpansTold::Held(std::uint32_t partition) const {
  auto it = std::lower_bound(spans_.begin(), spans_.end(), Span{partition, 0, {}}, ByPartition);
  if (it != spans_.end() && it->partition == partition) return *it;
  return Span{partition, 0, std::nullopt};
}

grpc::Status RunAssign(Source& source, const v1::AssignRequest& request, Context& ctx, SpansTold* told) {
  std::vector<Span> spans;
  spans.reserve(static_cast<std::size_t>(request.spans_size()));
  for (const v1::Span& s : request.spans()) spans.push_back(SpanFrom(s));
  grpc::Status status = source.Assign(spans, ctx);
  if (status.ok()) told->Assigned(spans);
  return status;
}

grpc::Status RunRevoke(Source& source, const v1::RevokeRequest& request, Context& ctx, SpansTold* told) {
  const std::vector<std::uint32_t> partitions(request.partitions().begin(), request.partitions().end());
  grpc::Status status = source.Revoke(partitions, ctx);
  if (status.ok()) told->Revoked(partitions);
  return status;
}

void RunCut(Source& source, const v1::CutRequest& request, Context& ctx, SpansTold* told, v1::CutResponse* response) {
  const CutAnswer answer = source.Cut(told->Held(request.partition()), request.at_offset(), ctx);
  told->Cut(answer);
  WriteSpan(answer.head, response->mutable_head());
  if (answer.tail.has_value()) WriteSpan(*answer.tail, response->mutable_tail());
}

}  // namespace weir::adapter
