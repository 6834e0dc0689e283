// File: connector_port.h
//
// How the runtime model reaches the connector under test, independent of
// transport. The gRPC edge (a child process) is one implementation; an
// in-process adapter for C++ sources is another. Each call is lock-step: while
// it runs, the connector may call the broker, and the implementation must
// forward those calls to `broker` on the calling (simulation) thread.
//
// Every call is bounded in wall time by the implementation; a connector that
// hangs, dies or answers garbage yields a ConnectorFailure, never a hang.
//
// Crash points inside a call: after serving each broker call, an
// implementation checks `broker.CrashRequested()` (the runtime passes a
// CrashGate, harness/runtime/crash_gate.h). When it is set, the implementation
// kills the incarnation at once — before the connector can act on that
// answer or make another call — abandons the call and returns Kind::kCrashed.
// The gRPC edge SIGKILLs the process group while the broker answer is still
// held on the simulation thread; the in-process fake returns from its call.
#pragma once

#include <cstdint>
#include <string>

#include "harness/broker/broker_endpoint.h"
#include "weir/v1/connector.pb.h"

namespace weir {

struct ConnectorFailure {
  enum class Kind {
    kNone,
    kStartFailed,     // never came up (no handshake, bad address, exec failed)
    kTimeout,         // did not answer within the wall-clock bound
    kExited,          // the process ended during or before the call
    kCallFailed,      // broke the protocol: an answer that does not parse, a bad address…
    kConnectorError,  // answered the call with an error status of its own (code)
    kCrashed,         // killed by the port because broker.CrashRequested(): a crash point, not a fault
    kInterrupted,     // weir itself is stopping (a signal): the incarnation was killed
  };
  Kind kind = Kind::kNone;
  std::string detail;       // what happened, for the report
  std::string exit_status;  // "exit code 3", "signal 11 (SIGSEGV)", or empty
  std::string stderr_tail;  // the last bytes the connector wrote to stderr
  int code = 0;             // kConnectorError: the gRPC status code it answered

  bool ok() const { return kind == Kind::kNone; }
};

const char* FailureKindName(ConnectorFailure::Kind kind);

class ConnectorPort {
 public:
  virtual ~ConnectorPort() = default;

  // Starts incarnation `incarnation` (a new process, for the gRPC edge).
  // REQUIRES: no incarnation is alive (Kill() was called or none started).
  [[nodiscard]] virtual ConnectorFailure Start(std::uint64_t incarnation) = 0;

  [[nodiscard]] virtual ConnectorFailure Open(const v1::OpenRequest& request, v1::OpenResponse* response,
                                              BrokerEndpoint& broker) = 0;
  [[nodiscard]] virtual ConnectorFailure Advance(const v1::AdvanceRequest& request, v1::AdvanceResponse* response,
                                                 BrokerEndpoint& broker) = 0;
  [[nodiscard]] virtual ConnectorFailure Checkpoint(const v1::CheckpointRequest& request,
                                                    v1::CheckpointResponse* response, BrokerEndpoint& broker) = 0;
  [[nodiscard]] virtual ConnectorFailure Committed(const v1::CommittedRequest& request, v1::CommittedResponse* response,
                                                   BrokerEndpoint& broker) = 0;

  // Many readers (log shape): Assign, Revoke and Cut of the Connector service.
  // A port that cannot carry them answers kCallFailed.
  [[nodiscard]] virtual ConnectorFailure Assign(const v1::AssignRequest& request, v1::AssignResponse* response,
                                                BrokerEndpoint& broker);
  [[nodiscard]] virtual ConnectorFailure Revoke(const v1::RevokeRequest& request, v1::RevokeResponse* response,
                                                BrokerEndpoint& broker);
  [[nodiscard]] virtual ConnectorFailure Cut(const v1::CutRequest& request, v1::CutResponse* response,
                                             BrokerEndpoint& broker);

  // Ends the live incarnation at once (SIGKILL to its process group, then
  // reaped, for the gRPC edge). Idempotent; safe when none is alive.
  virtual void Kill() = 0;
};

}  // namespace weir
