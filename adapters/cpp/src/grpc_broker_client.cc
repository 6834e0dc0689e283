#include "grpc_broker_client.h"

#include <charconv>
#include <limits>
#include <optional>
#include <string_view>

#include <grpcpp/grpcpp.h>

#include "weir/v1/status_details.pb.h"

namespace weir::adapter::internal {
namespace {

template <typename Int = std::int64_t>
std::optional<Int> TrailingInt(const grpc::ClientContext& call, std::string_view key) {
  const auto& trailers = call.GetServerTrailingMetadata();
  auto it = trailers.find(grpc::string_ref(key.data(), key.size()));
  if (it == trailers.end()) return std::nullopt;
  const char* begin = it->second.data();
  const char* end = begin + it->second.size();
  Int value = 0;
  auto [ptr, ec] = std::from_chars(begin, end, value);
  if (ec != std::errc() || ptr != end) return std::nullopt;
  return value;
}

// The first retained offset of an OUT_OF_RANGE read: the trailing metadata, or
// else the OffsetOutOfRange in the status details (a google.rpc.Status whose
// details hold it packed in an Any). Details that do not parse, or hold no
// OffsetOutOfRange, say nothing.
std::optional<std::uint64_t> FirstRetainedOffset(const grpc::ClientContext& call, const grpc::Status& status) {
  if (auto offset = TrailingInt<std::uint64_t>(call, kFirstRetainedOffsetMetadataKey)) return offset;
  v1::StatusDetails details;
  if (status.error_details().empty() || !details.ParseFromString(status.error_details())) return std::nullopt;
  for (const google::protobuf::Any& any : details.details()) {
    v1::OffsetOutOfRange detail;
    if (any.Is<v1::OffsetOutOfRange>() && any.UnpackTo(&detail)) return detail.first_retained_offset();
  }
  return std::nullopt;
}

BrokerStatus Failed(const grpc::ClientContext& call, const grpc::Status& status) {
  BrokerStatus out;
  out.code = status.error_code();
  out.message = status.error_message();
  out.now_ns = TrailingInt(call, kNowMetadataKey);
  if (out.throttled()) {
    if (auto ms = TrailingInt(call, kRetryAfterMetadataKey); ms.has_value() && *ms >= 0) {
      constexpr std::int64_t kMax = std::numeric_limits<std::int64_t>::max() / 1'000'000;
      out.retry_after_ns = *ms > kMax ? std::numeric_limits<std::int64_t>::max() : *ms * 1'000'000;
    }
  }
  if (out.out_of_range()) out.first_retained_offset = FirstRetainedOffset(call, status);
  return out;
}

BrokerStatus Succeeded(std::int64_t now_ns) {
  BrokerStatus out;
  out.now_ns = now_ns;
  return out;
}

std::shared_ptr<grpc::Channel> MakeChannel(const std::string& target) {
  grpc::ChannelArguments args;
  // Loopback only: an http_proxy in the environment must not reroute the broker.
  args.SetInt(GRPC_ARG_ENABLE_HTTP_PROXY, 0);
  // A retried call would be a second broker call the trace does not expect.
  args.SetInt(GRPC_ARG_ENABLE_RETRIES, 0);
  args.SetMaxReceiveMessageSize(-1);
  args.SetMaxSendMessageSize(-1);
  return grpc::CreateCustomChannel(target, grpc::InsecureChannelCredentials(), args);
}

}  // namespace

GrpcBrokerClient::GrpcBrokerClient(const std::string& target, std::chrono::seconds call_timeout, CallQueue& queue)
    : call_timeout_(call_timeout), queue_(queue), stub_(v1::Broker::NewStub(MakeChannel(target))) {}

template <typename Request, typename Response, typename Start>
grpc::Status GrpcBrokerClient::Call(grpc::ClientContext* call, const Request& request, Response* response,
                                    Start start) {
  grpc::Status status;
  DoneTag answered;
  auto rpc = (stub_.get()->*start)(call, request, queue_.queue());
  rpc->StartCall();
  rpc->Finish(response, &status, &answered);
  queue_.WaitFor(answered);
  if (!answered.fired) {
    // The queue was shut down under the call: the process is ending.
    return grpc::Status(grpc::StatusCode::CANCELLED, "the connector is shutting down");
  }
  if (status.ok() && !answered.ok) {
    // An async unary call whose answer did not parse ends with its tag not
    // ok but its status OK: never hand the source a default answer.
    return grpc::Status(grpc::StatusCode::INTERNAL, "the broker's answer did not parse");
  }
  return status;
}

void GrpcBrokerClient::Prepare(grpc::ClientContext* call) const {
  // Wall time bounds the call only; virtual time comes from the broker's answer.
  call->set_deadline(std::chrono::system_clock::now() + call_timeout_);
  call->set_wait_for_ready(true);
}

BrokerStatus GrpcBrokerClient::Pull(std::uint32_t max, std::vector<v1::Delivery>* out) {
  out->clear();
  grpc::ClientContext call;
  Prepare(&call);
  v1::PullRequest request;
  request.set_max_messages(max);
  v1::PullResponse response;
  grpc::Status status = Call(&call, request, &response, &v1::Broker::Stub::PrepareAsyncPull);
  if (!status.ok()) return Failed(call, status);
  out->reserve(static_cast<std::size_t>(response.deliveries_size()));
  for (v1::Delivery& d : *response.mutable_deliveries()) out->push_back(std::move(d));
  return Succeeded(response.now_ns());
}

BrokerStatus GrpcBrokerClient::Ack(const std::vector<std::uint64_t>& receipts) {
  grpc::ClientContext call;
  Prepare(&call);
  v1::AckRequest request;
  request.mutable_receipts()->Add(receipts.begin(), receipts.end());
  v1::AckResponse response;
  grpc::Status status = Call(&call, request, &response, &v1::Broker::Stub::PrepareAsyncAck);
  if (!status.ok()) return Failed(call, status);
  return Succeeded(response.now_ns());
}

BrokerStatus GrpcBrokerClient::Nack(const std::vector<std::uint64_t>& receipts) {
  grpc::ClientContext call;
  Prepare(&call);
  v1::NackRequest request;
  request.mutable_receipts()->Add(receipts.begin(), receipts.end());
  v1::NackResponse response;
  grpc::Status status = Call(&call, request, &response, &v1::Broker::Stub::PrepareAsyncNack);
  if (!status.ok()) return Failed(call, status);
  return Succeeded(response.now_ns());
}

BrokerStatus GrpcBrokerClient::ExtendLease(const std::vector<std::uint64_t>& receipts, std::int64_t extension_ns,
                                           std::vector<std::uint64_t>* rejected) {
  rejected->clear();
  grpc::ClientContext call;
  Prepare(&call);
  v1::ExtendLeaseRequest request;
  request.mutable_receipts()->Add(receipts.begin(), receipts.end());
  request.set_extension_ns(extension_ns);
  v1::ExtendLeaseResponse response;
  grpc::Status status = Call(&call, request, &response, &v1::Broker::Stub::PrepareAsyncExtendLease);
  if (!status.ok()) return Failed(call, status);
  rejected->assign(response.rejected_receipts().begin(), response.rejected_receipts().end());
  return Succeeded(response.now_ns());
}

BrokerStatus GrpcBrokerClient::ListPartitions(std::vector<v1::PartitionInfo>* out) {
  out->clear();
  grpc::ClientContext call;
  Prepare(&call);
  v1::ListPartitionsRequest request;
  v1::ListPartitionsResponse response;
  grpc::Status status = Call(&call, request, &response, &v1::Broker::Stub::PrepareAsyncListPartitions);
  if (!status.ok()) return Failed(call, status);
  out->reserve(static_cast<std::size_t>(response.partitions_size()));
  for (v1::PartitionInfo& p : *response.mutable_partitions()) out->push_back(std::move(p));
  return Succeeded(response.now_ns());
}

BrokerStatus GrpcBrokerClient::Read(std::uint32_t partition, std::uint64_t offset, const ReadOptions& options,
                                    ReadResult* out) {
  out->records.clear();
  out->next_offset = offset;
  grpc::ClientContext call;
  Prepare(&call);
  v1::ReadRequest request;
  request.set_partition(partition);
  request.set_offset(offset);
  request.set_max_records(options.max_records);
  request.set_max_bytes(options.max_bytes);
  request.set_max_wait_ns(options.max_wait_ns);
  v1::ReadResponse response;
  grpc::Status status = Call(&call, request, &response, &v1::Broker::Stub::PrepareAsyncRead);
  if (!status.ok()) return Failed(call, status);
  out->records.reserve(static_cast<std::size_t>(response.records_size()));
  for (v1::LogRecord& r : *response.mutable_records()) out->records.push_back(std::move(r));
  out->next_offset = response.next_offset();
  out->first_retained_offset = response.first_retained_offset();
  out->readable_end = response.readable_end();
  return Succeeded(response.now_ns());
}

BrokerStatus GrpcBrokerClient::SaveBookmarks(const std::vector<Bookmark>& bookmarks) {
  grpc::ClientContext call;
  Prepare(&call);
  v1::SaveBookmarksRequest request;
  request.mutable_bookmarks()->Reserve(static_cast<int>(bookmarks.size()));
  for (const Bookmark& b : bookmarks) {
    v1::Bookmark* out = request.add_bookmarks();
    out->set_partition(b.partition);
    out->set_next_offset(b.next_offset);
  }
  v1::SaveBookmarksResponse response;
  grpc::Status status = Call(&call, request, &response, &v1::Broker::Stub::PrepareAsyncSaveBookmarks);
  if (!status.ok()) return Failed(call, status);
  return Succeeded(response.now_ns());
}

BrokerStatus GrpcBrokerClient::LoadBookmarks(std::vector<Bookmark>* out) {
  out->clear();
  grpc::ClientContext call;
  Prepare(&call);
  v1::LoadBookmarksRequest request;
  v1::LoadBookmarksResponse response;
  grpc::Status status = Call(&call, request, &response, &v1::Broker::Stub::PrepareAsyncLoadBookmarks);
  if (!status.ok()) return Failed(call, status);
  out->reserve(static_cast<std::size_t>(response.bookmarks_size()));
  for (const v1::Bookmark& b : response.bookmarks()) out->push_back({b.partition(), b.next_offset()});
  return Succeeded(response.now_ns());
}

}  // namespace weir::adapter::internal
