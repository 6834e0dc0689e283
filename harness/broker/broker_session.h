// File: broker_session.h
//
// The broker as one connector call sees it. The runtime opens a session window
// around each connector call (BeginCall … EndCall); broker calls inside it
// advance the call's virtual clock and reach the broker model. A broker call
// outside any window is a protocol error: it is refused with
// FAILED_PRECONDITION and written to the trace.
//
// Thread safety: none; every method runs on the simulation thread.
#pragma once

#include <cstdint>

#include "harness/broker/broker_endpoint.h"
#include "harness/broker/broker_model.h"
#include "harness/faults/fault_source.h"
#include "harness/trace/trace_log.h"

namespace weir {

class BrokerSession : public BrokerEndpoint {
 public:
  // REQUIRES: model and trace outlive the session.
  BrokerSession(BrokerModel& model, TraceLog& trace, FaultSource& faults)
      : model_(model), trace_(trace), faults_(faults) {}

  // Opens the window of one connector call starting at virtual time now.
  void BeginCall(VirtualTime now);
  // Closes the window; returns the virtual now after every broker call in it.
  VirtualTime EndCall();
  bool in_call() const { return in_call_; }
  // Broker calls made in the current (or last) window.
  std::uint64_t calls_in_window() const { return calls_in_window_; }

  CallStatus Pull(const v1::PullRequest& request, v1::PullResponse* response) override;
  CallStatus Ack(const v1::AckRequest& request, v1::AckResponse* response) override;
  CallStatus Nack(const v1::NackRequest& request, v1::NackResponse* response) override;
  CallStatus ExtendLease(const v1::ExtendLeaseRequest& request,
                         v1::ExtendLeaseResponse* response) override;
  void OnStrayCall(const std::string& method) override;

 private:
  // Common entry: checks the window, counts the call. Returns false (and fills
  // *status) when the call must be refused.
  bool Enter(const char* method, CallStatus* status);

  BrokerModel& model_;
  TraceLog& trace_;
  FaultSource& faults_;
  bool in_call_ = false;
  VirtualTime now_ = 0;
  std::uint64_t calls_in_window_ = 0;
};

}  // namespace weir
