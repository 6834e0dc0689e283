// File: broker_endpoint.h
//
// What a connector can call on the broker, independent of transport. The gRPC
// Broker service forwards each call here on the simulation thread; an
// in-process connector calls it directly. Every answer, success or failure,
// carries the virtual now after the call's latency.
#pragma once

#include <string>

#include "harness/core/virtual_time.h"
#include "weir/v1/broker.pb.h"

namespace weir {

// The status codes weir's broker answers with; values are gRPC's.
enum class CallCode : int {
  kOk = 0,
  kInvalidArgument = 3,
  kDeadlineExceeded = 4,
  kResourceExhausted = 8,
  kFailedPrecondition = 9,
  kUnavailable = 14,
};

struct CallStatus {
  CallCode code = CallCode::kOk;
  std::string message;
  // For kResourceExhausted: how long the caller must wait before this method
  // may be called again.
  VirtualDuration retry_after = 0;
  // Virtual now after the call, success or not.
  VirtualTime now = 0;

  bool ok() const { return code == CallCode::kOk; }
};

class BrokerEndpoint {
 public:
  virtual ~BrokerEndpoint() = default;
  virtual CallStatus Pull(const v1::PullRequest& request, v1::PullResponse* response) = 0;
  virtual CallStatus Ack(const v1::AckRequest& request, v1::AckResponse* response) = 0;
  virtual CallStatus Nack(const v1::NackRequest& request, v1::NackResponse* response) = 0;
  virtual CallStatus ExtendLease(const v1::ExtendLeaseRequest& request,
                                 v1::ExtendLeaseResponse* response) = 0;
  // The connector called `method` while no connector call was in progress; the
  // transport refused it. Recorded as a protocol error.
  virtual void OnStrayCall(const std::string& method) = 0;

  // Crash-point hook (see harness/runtime/crash_gate.h): true once the runtime
  // wants the connector killed now, right after the broker call that just
  // completed. A ConnectorPort checks it after serving each broker call and, if
  // set, kills the connector before it can do anything else. Plain endpoints
  // never ask.
  virtual bool CrashRequested() const { return false; }
};

}  // namespace weir
