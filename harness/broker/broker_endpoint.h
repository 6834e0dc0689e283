// File: broker_endpoint.h
//
// What a connector can call on the broker, independent of transport. The gRPC
// Broker service forwards each call here on the simulation thread; an
// in-process connector calls it directly. Every answer, success or failure,
// carries the virtual now after the call's latency.
#pragma once

#include <cstdint>
#include <string>

#include "harness/core/virtual_time.h"
#include "weir/v1/broker.pb.h"

namespace weir {

// The status codes weir's broker answers with; values are gRPC's.
enum class CallCode : int {
  kOk = 0,
  kInvalidArgument = 3,
  kDeadlineExceeded = 4,
  kNotFound = 5,
  kResourceExhausted = 8,
  kFailedPrecondition = 9,
  kOutOfRange = 11,
  kUnimplemented = 12,
  kUnavailable = 14,
};

struct CallStatus {
  CallCode code = CallCode::kOk;
  std::string message;
  // For kResourceExhausted: how long the caller must wait before this method
  // may be called again.
  VirtualDuration retry_after = 0;
  // For kOutOfRange on a log Read: the partition's first retained offset.
  std::uint64_t first_retained_offset = 0;
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
  virtual CallStatus ExtendLease(const v1::ExtendLeaseRequest& request, v1::ExtendLeaseResponse* response) = 0;
  // Log shape (the broker session refuses a call of the other shape with
  // kFailedPrecondition). An endpoint that serves only the queue shape
  // answers kUnimplemented.
  virtual CallStatus ListPartitions(const v1::ListPartitionsRequest& /*request*/,
                                    v1::ListPartitionsResponse* /*response*/) {
    return NotServed("ListPartitions");
  }
  virtual CallStatus Read(const v1::ReadRequest& /*request*/, v1::ReadResponse* /*response*/) {
    return NotServed("Read");
  }
  virtual CallStatus SaveBookmarks(const v1::SaveBookmarksRequest& /*request*/,
                                   v1::SaveBookmarksResponse* /*response*/) {
    return NotServed("SaveBookmarks");
  }
  virtual CallStatus LoadBookmarks(const v1::LoadBookmarksRequest& /*request*/,
                                   v1::LoadBookmarksResponse* /*response*/) {
    return NotServed("LoadBookmarks");
  }
  // The connector called `method` while no connector call was in progress; the
  // transport refused it. Recorded as a protocol error.
  virtual void OnStrayCall(const std::string& method) = 0;

  // Crash-point hook (see harness/runtime/crash_gate.h): true once the runtime
  // wants the connector killed now, right after the broker call that just
  // completed. A ConnectorPort checks it after serving each broker call and, if
  // set, kills the connector before it can do anything else. Plain endpoints
  // never ask.
  virtual bool CrashRequested() const { return false; }

 protected:
  static CallStatus NotServed(const char* method) {
    CallStatus st;
    st.code = CallCode::kUnimplemented;
    st.message = std::string(method) + " is not served by this endpoint";
    return st;
  }
};

}  // namespace weir
