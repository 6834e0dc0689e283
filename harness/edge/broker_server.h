// File: broker_server.h
//
// The gRPC edge of the broker: serves the Broker service on loopback TCP (an
// OS-assigned port) or on a Unix socket, and runs every call through a
// CallRelay (on the gRPC thread, while the simulation thread waits in a
// connector call). Answers carry the virtual now; a
// failed call carries it in trailing metadata "weir-now-ns", and a throttled
// one "retry-after-ms" plus a weir.v1.RetryAfter status detail.
//
// Thread safety: gRPC's threads call in; Start/Shutdown from the owner thread.
#pragma once

#include <grpcpp/grpcpp.h>

#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "harness/edge/call_relay.h"

namespace weir {

class BrokerServer {
 public:
  // gRPC server threads at most (each runs one broker call through the relay).
  static constexpr int kMaxServerThreads = 32;

  // listen: "127.0.0.1:0" (or another loopback host:port) or "unix:/path".
  // REQUIRES: relay outlives the server.
  [[nodiscard]] static absl::StatusOr<std::unique_ptr<BrokerServer>> Start(
      const std::string& listen, CallRelay& relay, std::chrono::milliseconds call_bound);
  // call_bound: how long a call whose answer a crash point holds back may wait.
  ~BrokerServer();

  // The address a client should dial ("127.0.0.1:40123" or "unix:/path").
  const std::string& address() const { return address_; }

 private:
  class Service;
  BrokerServer() = default;

  std::unique_ptr<Service> service_;
  std::unique_ptr<grpc::Server> server_;
  std::string address_;
};

}  // namespace weir
