// File: grpc_broker_client.h  (internal to the adapter)
//
// BrokerClient over gRPC: asynchronous calls on a channel to weir's Broker
// service, completed on the adapter's CallQueue, which the calling thread
// polls until the answer is there (call_queue.h). Every call carries a wall-clock deadline so a wedged harness cannot
// hang the connector; the answer's virtual now comes from the response's now_ns
// or, on failure, from the trailing metadata key "weir-now-ns"; a throttle's
// hint from "retry-after-ms"; an out-of-range read's first retained offset from
// "weir-first-retained-offset" (or else the OffsetOutOfRange packed in the
// status details, a google.rpc.Status).
//
// Thread safety: the CallQueue's thread only.
#pragma once

#include <chrono>
#include <memory>
#include <string>

#include "call_queue.h"
#include "weir/adapter/source.h"
#include "weir/v1/broker.grpc.pb.h"

namespace weir::adapter::internal {

inline constexpr char kNowMetadataKey[] = "weir-now-ns";
inline constexpr char kRetryAfterMetadataKey[] = "retry-after-ms";
inline constexpr char kFirstRetainedOffsetMetadataKey[] = "weir-first-retained-offset";

class GrpcBrokerClient final : public BrokerClient {
 public:
  // REQUIRES: queue outlives the client.
  GrpcBrokerClient(const std::string& target, std::chrono::seconds call_timeout, CallQueue& queue);

  BrokerStatus Pull(std::uint32_t max, std::vector<v1::Delivery>* out) override;
  BrokerStatus Ack(const std::vector<std::uint64_t>& receipts) override;
  BrokerStatus Nack(const std::vector<std::uint64_t>& receipts) override;
  BrokerStatus ExtendLease(const std::vector<std::uint64_t>& receipts, std::int64_t extension_ns,
                           std::vector<std::uint64_t>* rejected) override;
  BrokerStatus ListPartitions(std::vector<v1::PartitionInfo>* out) override;
  BrokerStatus Read(std::uint32_t partition, std::uint64_t offset, const ReadOptions& options,
                    ReadResult* out) override;
  BrokerStatus SaveBookmarks(const std::vector<Bookmark>& bookmarks) override;
  BrokerStatus LoadBookmarks(std::vector<Bookmark>* out) override;

 private:
  void Prepare(grpc::ClientContext* call) const;
  // Starts the call on the queue and polls it until the answer is there.
  template <typename Request, typename Response, typename Start>
  grpc::Status Call(grpc::ClientContext* call, const Request& request, Response* response, Start start);

  const std::chrono::seconds call_timeout_;
  CallQueue& queue_;
  std::unique_ptr<v1::Broker::Stub> stub_;
};

}  // namespace weir::adapter::internal
