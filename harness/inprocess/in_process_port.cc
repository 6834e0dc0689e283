#include "harness/inprocess/in_process_port.h"

#include "absl/strings/str_cat.h"
#include "harness/suite/certify.h"

namespace weir {
namespace {

// The adapter's BrokerClient over the simulation's BrokerEndpoint.
class EndpointClient : public adapter::BrokerClient {
 public:
  explicit EndpointClient(BrokerEndpoint& broker) : broker_(broker) {}

  adapter::BrokerStatus Pull(std::uint32_t max, std::vector<v1::Delivery>* out) override {
    v1::PullRequest rq;
    rq.set_max_messages(max);
    v1::PullResponse rs;
    adapter::BrokerStatus st = Convert(broker_.Pull(rq, &rs));
    if (st.ok()) {
      for (auto& d : *rs.mutable_deliveries()) out->push_back(std::move(d));
    }
    return st;
  }
  adapter::BrokerStatus Ack(const std::vector<std::uint64_t>& receipts) override {
    v1::AckRequest rq;
    for (auto r : receipts) rq.add_receipts(r);
    v1::AckResponse rs;
    return Convert(broker_.Ack(rq, &rs));
  }
  adapter::BrokerStatus Nack(const std::vector<std::uint64_t>& receipts) override {
    v1::NackRequest rq;
    for (auto r : receipts) rq.add_receipts(r);
    v1::NackResponse rs;
    return Convert(broker_.Nack(rq, &rs));
  }
  adapter::BrokerStatus ExtendLease(const std::vector<std::uint64_t>& receipts, std::int64_t extension_ns,
                                    std::vector<std::uint64_t>* rejected) override {
    v1::ExtendLeaseRequest rq;
    for (auto r : receipts) rq.add_receipts(r);
    rq.set_extension_ns(extension_ns);
    v1::ExtendLeaseResponse rs;
    adapter::BrokerStatus st = Convert(broker_.ExtendLease(rq, &rs));
    if (rejected != nullptr) rejected->assign(rs.rejected_receipts().begin(), rs.rejected_receipts().end());
    return st;
  }
  adapter::BrokerStatus ListPartitions(std::vector<v1::PartitionInfo>* out) override {
    out->clear();
    v1::ListPartitionsResponse rs;
    adapter::BrokerStatus st = Convert(broker_.ListPartitions(v1::ListPartitionsRequest(), &rs));
    if (st.ok()) {
      for (auto& p : *rs.mutable_partitions()) out->push_back(std::move(p));
    }
    return st;
  }
  adapter::BrokerStatus Read(std::uint32_t partition, std::uint64_t offset, const adapter::ReadOptions& options,
                             adapter::ReadResult* out) override {
    out->records.clear();
    out->next_offset = offset;
    v1::ReadRequest rq;
    rq.set_partition(partition);
    rq.set_offset(offset);
    rq.set_max_records(options.max_records);
    rq.set_max_bytes(options.max_bytes);
    rq.set_max_wait_ns(options.max_wait_ns);
    v1::ReadResponse rs;
    adapter::BrokerStatus st = Convert(broker_.Read(rq, &rs));
    if (st.ok()) {
      for (auto& r : *rs.mutable_records()) out->records.push_back(std::move(r));
      out->next_offset = rs.next_offset();
      out->first_retained_offset = rs.first_retained_offset();
      out->readable_end = rs.readable_end();
    }
    return st;
  }
  adapter::BrokerStatus SaveBookmarks(const std::vector<adapter::Bookmark>& bookmarks) override {
    v1::SaveBookmarksRequest rq;
    for (const auto& b : bookmarks) {
      v1::Bookmark* out = rq.add_bookmarks();
      out->set_partition(b.partition);
      out->set_next_offset(b.next_offset);
    }
    v1::SaveBookmarksResponse rs;
    return Convert(broker_.SaveBookmarks(rq, &rs));
  }
  adapter::BrokerStatus LoadBookmarks(std::vector<adapter::Bookmark>* out) override {
    out->clear();
    v1::LoadBookmarksResponse rs;
    adapter::BrokerStatus st = Convert(broker_.LoadBookmarks(v1::LoadBookmarksRequest(), &rs));
    if (st.ok()) {
      for (const auto& b : rs.bookmarks()) out->push_back({b.partition(), b.next_offset()});
    }
    return st;
  }

 private:
  static adapter::BrokerStatus Convert(const CallStatus& c) {
    adapter::BrokerStatus st;
    st.code = static_cast<grpc::StatusCode>(static_cast<int>(c.code));
    st.message = c.message;
    st.now_ns = c.now;
    if (c.code == CallCode::kResourceExhausted) st.retry_after_ns = c.retry_after;
    if (c.code == CallCode::kOutOfRange) st.first_retained_offset = c.first_retained_offset;
    return st;
  }
  BrokerEndpoint& broker_;
};

// What the gRPC adapter would answer: a misuse of the Context is
// FAILED_PRECONDITION, a failed Open its own status; both connector errors.
ConnectorFailure Misuse(const char* call, const std::string& what,
                        grpc::StatusCode code = grpc::StatusCode::FAILED_PRECONDITION) {
  return ConnectorFailure{ConnectorFailure::Kind::kConnectorError, absl::StrCat(call, ": ", what), "", "",
                          static_cast<int>(code)};
}

ConnectorFailure NotAlive() { return ConnectorFailure{ConnectorFailure::Kind::kExited, "no live incarnation", "", ""}; }

}  // namespace

ConnectorFailure InProcessPort::Start(std::uint64_t /*incarnation*/) {
  source_ = factory_();
  if (source_ == nullptr) {
    return ConnectorFailure{ConnectorFailure::Kind::kStartFailed, "the source factory returned null", "", ""};
  }
  return {};
}

ConnectorFailure InProcessPort::Open(const v1::OpenRequest& request, v1::OpenResponse* response,
                                     BrokerEndpoint& broker) {
  if (source_ == nullptr) return NotAlive();
  EndpointClient client(broker);
  adapter::Context ctx(adapter::CallKind::kOpen, request.now_ns(), client);
  grpc::Status st = source_->Open(adapter::OpenInfoFrom(request), ctx);
  if (!st.ok()) {
    return Misuse("Open", absl::StrCat("answered ", st.error_code(), " ", st.error_message()), st.error_code());
  }
  adapter::WriteOpen(*source_, response);
  told_.Opened(adapter::OpenInfoFrom(request));
  return {};
}

ConnectorFailure InProcessPort::Advance(const v1::AdvanceRequest& request, v1::AdvanceResponse* response,
                                        BrokerEndpoint& broker) {
  if (source_ == nullptr) return NotAlive();
  EndpointClient client(broker);
  adapter::Context ctx(adapter::CallKind::kAdvance, request.now_ns(), client);
  source_->Advance(ctx);
  if (!ctx.misuse().empty()) return Misuse("Advance", ctx.misuse());
  ctx.WriteStep(response);
  return {};
}

ConnectorFailure InProcessPort::Checkpoint(const v1::CheckpointRequest& request, v1::CheckpointResponse* response,
                                           BrokerEndpoint& broker) {
  if (source_ == nullptr) return NotAlive();
  EndpointClient client(broker);
  adapter::Context ctx(adapter::CallKind::kCheckpoint, request.now_ns(), client);
  adapter::RunCheckpoint(*source_, request.checkpoint_id(), ctx, response);
  if (!ctx.misuse().empty()) return Misuse("Checkpoint", ctx.misuse());
  return {};
}

ConnectorFailure InProcessPort::Committed(const v1::CommittedRequest& request, v1::CommittedResponse*,
                                          BrokerEndpoint& broker) {
  if (source_ == nullptr) return NotAlive();
  EndpointClient client(broker);
  adapter::Context ctx(adapter::CallKind::kCommitted, request.now_ns(), client);
  source_->Committed(request.checkpoint_id(), ctx);
  if (!ctx.misuse().empty()) return Misuse("Committed", ctx.misuse());
  return {};
}

ConnectorFailure InProcessPort::Assign(const v1::AssignRequest& request, v1::AssignResponse*, BrokerEndpoint& broker) {
  if (source_ == nullptr) return NotAlive();
  EndpointClient client(broker);
  adapter::Context ctx(adapter::CallKind::kAssign, request.now_ns(), client);
  grpc::Status st = adapter::RunAssign(*source_, request, ctx, &told_);
  if (!st.ok()) {
    return Misuse("Assign", absl::StrCat("answered ", st.error_code(), " ", st.error_message()), st.error_code());
  }
  if (!ctx.misuse().empty()) return Misuse("Assign", ctx.misuse());
  return {};
}

ConnectorFailure InProcessPort::Revoke(const v1::RevokeRequest& request, v1::RevokeResponse*, BrokerEndpoint& broker) {
  if (source_ == nullptr) return NotAlive();
  EndpointClient client(broker);
  adapter::Context ctx(adapter::CallKind::kRevoke, request.now_ns(), client);
  grpc::Status st = adapter::RunRevoke(*source_, request, ctx, &told_);
  if (!st.ok()) {
    return Misuse("Revoke", absl::StrCat("answered ", st.error_code(), " ", st.error_message()), st.error_code());
  }
  if (!ctx.misuse().empty()) return Misuse("Revoke", ctx.misuse());
  return {};
}

ConnectorFailure InProcessPort::Cut(const v1::CutRequest& request, v1::CutResponse* response, BrokerEndpoint& broker) {
  if (source_ == nullptr) return NotAlive();
  EndpointClient client(broker);
  adapter::Context ctx(adapter::CallKind::kCut, request.now_ns(), client);
  adapter::RunCut(*source_, request, ctx, &told_, response);
  if (!ctx.misuse().empty()) return Misuse("Cut", ctx.misuse());
  return {};
}

std::vector<std::unique_ptr<InProcessPort>> MakeInProcessPorts(const InProcessPort::Factory& factory,
                                                               std::uint32_t readers) {
  std::vector<std::unique_ptr<InProcessPort>> ports;
  ports.reserve(readers);
  for (std::uint32_t i = 0; i < readers; ++i) ports.push_back(std::make_unique<InProcessPort>(factory));
  return ports;
}

absl::StatusOr<RunOutput> RunInProcess(const RunSpec& spec, const InProcessPort::Factory& factory) {
  std::vector<std::unique_ptr<InProcessPort>> ports = MakeInProcessPorts(factory, ReaderCount(spec.scenario));
  std::vector<ConnectorPort*> each;
  each.reserve(ports.size());
  for (const auto& port : ports) each.push_back(port.get());
  return RunWithPorts(spec, each);
}

absl::StatusOr<v1::SuiteReport> CertifyInProcess(const std::string& suite_path, const InProcessPort::Factory& factory,
                                                 unsigned jobs) {
  auto suite = LoadSuite(suite_path);
  if (!suite.ok()) return suite.status();
  CertifyOptions options;
  options.connector_argv = {"(in-process)"};
  options.jobs = jobs;
  options.runner = [&factory](const RunSpec& spec) { return RunInProcess(spec, factory); };
  auto result = Certify(*suite, options);
  if (!result.ok()) return result.status();
  return LoadReport(*result);
}

}  // namespace weir
