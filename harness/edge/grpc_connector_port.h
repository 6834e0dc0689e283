// File: grpc_connector_port.h
//
// ConnectorPort over gRPC to a child process. Start() launches the connector
// command (argv, own process group) with the handshake environment of
// connector.proto, waits (bounded) for the address it listens on, and dials
// it. Each call is an asynchronous gRPC call on the broker server's queue,
// with a wall-clock deadline; the simulation thread then serves the
// connector's broker calls from that queue (BrokerServer::Serve) until the
// answer arrives. Kill() ends the process group and reaps it.
//
// What a call's gRPC status becomes (README, "The oracle's rules"):
//   OK with an answer that parses       the answer
//   OK with no or unparsable answer      kCallFailed   -> protocol-error
//   DEADLINE_EXCEEDED                    kTimeout      -> step-timeout (kExited if it died)
//   UNAVAILABLE, CANCELLED               kExited if the process ended -> unexpected-exit,
//                                        else kCallFailed -> protocol-error
//   RESOURCE_EXHAUSTED (an answer above the receive limit), UNIMPLEMENTED
//                                        kCallFailed   -> protocol-error
//   any other code (UNKNOWN, INTERNAL, INVALID_ARGUMENT, FAILED_PRECONDITION…)
//                                        kConnectorError -> connector-error (in Open
//                                        from a committed checkpoint: bad-checkpoint)
//
// Thread safety: the simulation thread only.
#pragma once

#include <grpcpp/generic/generic_stub.h>
#include <grpcpp/grpcpp.h>

#include <atomic>
#include <chrono>
#include <memory>
#include <string>
#include <vector>

#include "harness/edge/broker_server.h"
#include "harness/edge/child_process.h"
#include "harness/runtime/connector_port.h"
#include "weir/v1/connector.grpc.pb.h"

namespace weir {

class GrpcConnectorPort : public ConnectorPort {
 public:
  struct Options {
    std::vector<std::string> argv;
    std::string broker_address;  // what the connector dials
    std::string listen_address;  // what the connector listens on
    std::chrono::milliseconds call_timeout{10000};
    std::chrono::milliseconds start_timeout{10000};
    std::size_t max_message_bytes = 16u << 20;
    // When it becomes true, every wait ends within ~100 ms, the incarnation is
    // killed and calls return Kind::kInterrupted.
    const std::atomic<bool>* stop = nullptr;
    // false: call_timeout and start_timeout are not applied (no deadline on
    // a call, start-up waits as long as the connector takes); only `stop`
    // ends such a wait. For a connector held at a debugger's breakpoint.
    bool wall_bounds = true;
    // Started in front of argv (`valgrind`, `gdb -batch -ex run --args`).
    std::vector<std::string> wrapper_argv;
    // Copy the process's output to weir's stderr as it comes.
    bool echo_output = false;
  };

  // REQUIRES: broker outlives the port.
  GrpcConnectorPort(Options options, BrokerServer& broker);
  ~GrpcConnectorPort() override;

  ConnectorFailure Start(std::uint64_t incarnation) override;
  ConnectorFailure Open(const v1::OpenRequest& request, v1::OpenResponse* response, BrokerEndpoint& broker) override;
  ConnectorFailure Advance(const v1::AdvanceRequest& request, v1::AdvanceResponse* response,
                           BrokerEndpoint& broker) override;
  ConnectorFailure Checkpoint(const v1::CheckpointRequest& request, v1::CheckpointResponse* response,
                              BrokerEndpoint& broker) override;
  ConnectorFailure Committed(const v1::CommittedRequest& request, v1::CommittedResponse* response,
                             BrokerEndpoint& broker) override;
  ConnectorFailure Assign(const v1::AssignRequest& request, v1::AssignResponse* response,
                          BrokerEndpoint& broker) override;
  ConnectorFailure Revoke(const v1::RevokeRequest& request, v1::RevokeResponse* response,
                          BrokerEndpoint& broker) override;
  ConnectorFailure Cut(const v1::CutRequest& request, v1::CutResponse* response, BrokerEndpoint& broker) override;
  void Kill() override;

  // The live incarnation's process id (the wrapper's, when wrapped), or 0.
  std::int64_t pid() const;
  // Where the live incarnation listens (its handshake line); empty when none.
  const std::string& connector_address() const { return address_; }
  const std::string& broker_address() const { return options_.broker_address; }

  // Where the last Start()'s wall time went (bench/supervise_cost).
  struct StartPhases {
    std::chrono::nanoseconds kill{0};       // ending the previous incarnation
    std::chrono::nanoseconds spawn{0};      // launching the process
    std::chrono::nanoseconds handshake{0};  // to its address line: exec, loading, its server's start
    std::chrono::nanoseconds connect{0};    // a channel to that address, connected
  };
  const StartPhases& last_start_phases() const { return phases_; }

 private:
  ConnectorFailure Invoke(const char* name, const google::protobuf::Message& request,
                          google::protobuf::Message* response, BrokerEndpoint& broker);
  ConnectorFailure ExitedOr(ConnectorFailure::Kind kind, std::string detail);
  bool Stopping() const;
  // Kills the incarnation; the failure every call returns once stopping.
  ConnectorFailure Interrupted();

  const Options options_;
  BrokerServer& server_;
  std::unique_ptr<ChildProcess> child_;
  std::string address_;  // the live incarnation's, from its handshake
  std::shared_ptr<grpc::Channel> channel_;
  // Generic, so that an answer that is no message at all, or bytes that do
  // not parse, can be told apart from an empty answer.
  std::unique_ptr<grpc::GenericStub> stub_;
  StartPhases phases_;
};

// True for addresses weir may talk to without an explicit opt-in: loopback
// TCP (127.0.0.0/8, [::1], localhost) or a Unix socket.
bool IsLocalAddress(const std::string& address);

}  // namespace weir
