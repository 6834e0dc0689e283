// File: grpc_broker_client.h  (internal to the adapter)
//
// BrokerClient over gRPC: a synchronous stub on a channel to weir's Broker
// service. Every call carries a wall-clock deadline so a wedged harness cannot
// hang the connector; the answer's virtual now comes from the response's now_ns
// or, on failure, from the trailing metadata key "weir-now-ns"; a throttle's
// hint from "retry-after-ms".
//
// Thread safety: the stub is thread-safe; Serve uses it from one call at a time.
#pragma once

#include <chrono>
#include <memory>
#include <string>

#include "weir/adapter/source.h"
#include "weir/v1/broker.grpc.pb.h"

namespace weir::adapter::internal {

inline constexpr char kNowMetadataKey[] = "weir-now-ns";
inline constexpr char kRetryAfterMetadataKey[] = "retry-after-ms";

class GrpcBrokerClient final : public BrokerClient {
 public:
  GrpcBrokerClient(const std::string& target, std::chrono::seconds call_timeout);

  BrokerStatus Pull(std::uint32_t max, std::vector<v1::Delivery>* out) override;
  BrokerStatus Ack(const std::vector<std::uint64_t>& receipts) override;
  BrokerStatus Nack(const std::vector<std::uint64_t>& receipts) override;
  BrokerStatus ExtendLease(const std::vector<std::uint64_t>& receipts, std::int64_t extension_ns,
                           std::vector<std::uint64_t>* rejected) override;

 private:
  void Prepare(grpc::ClientContext* call) const;

  const std::chrono::seconds call_timeout_;
  std::unique_ptr<v1::Broker::Stub> stub_;
};

}  // namespace weir::adapter::internal
