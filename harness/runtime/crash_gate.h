// File: crash_gate.h
//
// The hook for crash points that sit *inside* a connector call
// (IN_STEP_AFTER_BROKER_CALL, IN_NOTICE_AFTER_ACK). The runtime hands the
// connector port this gate instead of the bare broker session. The gate
// forwards every broker call; once armed with (method, n), it counts the calls
// of that method (or of any method) in the current connector call, and when
// the n-th one has completed it raises CrashRequested().
//
// Contract with ConnectorPort implementations (stated in connector_port.h):
// after serving each broker call the port checks broker.CrashRequested(); when
// it is set the port kills the incarnation before the connector can act on the
// answer (the gRPC port holds the answer back, SIGKILLs the process group,
// then drops it) and returns ConnectorFailure::Kind::kCrashed. The runtime
// treats that failure as the requested crash, never as an unexpected exit.
//
// Belt and braces: once the gate has fired, any further broker call in the
// same window is refused without reaching the broker, so a port that checks
// late still cannot let the dying connector change the broker's state.
//
// Thread safety: none; the simulation thread owns it (as the session).
#pragma once

#include <cstdint>
#include <string>

#include "harness/broker/broker_endpoint.h"

namespace weir {

class CrashGate : public BrokerEndpoint {
 public:
  // kAckCalls: the calls a commit notice acknowledges with (Ack in the queue
  // shape, SaveBookmarks in the log shape).
  enum class Count { kAnyCall, kAckCalls };

  // REQUIRES: inner outlives the gate.
  explicit CrashGate(BrokerEndpoint& inner) : inner_(inner) {}

  // Fires after the n-th counted call from now on (n == 0 is taken as 1).
  void Arm(Count count, std::uint64_t n) {
    armed_ = true;
    fired_ = false;
    count_ = count;
    target_ = n == 0 ? 1 : n;
    seen_ = 0;
  }
  void Disarm() { armed_ = fired_ = false; }
  bool fired() const { return fired_; }

  bool CrashRequested() const override { return fired_; }

  CallStatus Pull(const v1::PullRequest& rq, v1::PullResponse* rs) override {
    if (fired_) return Refused();
    CallStatus st = inner_.Pull(rq, rs);
    Counted(Count::kAnyCall);
    return st;
  }
  CallStatus Ack(const v1::AckRequest& rq, v1::AckResponse* rs) override {
    if (fired_) return Refused();
    CallStatus st = inner_.Ack(rq, rs);
    Counted(Count::kAckCalls);
    return st;
  }
  CallStatus Nack(const v1::NackRequest& rq, v1::NackResponse* rs) override {
    if (fired_) return Refused();
    CallStatus st = inner_.Nack(rq, rs);
    Counted(Count::kAnyCall);
    return st;
  }
  CallStatus ExtendLease(const v1::ExtendLeaseRequest& rq, v1::ExtendLeaseResponse* rs) override {
    if (fired_) return Refused();
    CallStatus st = inner_.ExtendLease(rq, rs);
    Counted(Count::kAnyCall);
    return st;
  }
  CallStatus ListPartitions(const v1::ListPartitionsRequest& rq, v1::ListPartitionsResponse* rs) override {
    if (fired_) return Refused();
    CallStatus st = inner_.ListPartitions(rq, rs);
    Counted(Count::kAnyCall);
    return st;
  }
  CallStatus Read(const v1::ReadRequest& rq, v1::ReadResponse* rs) override {
    if (fired_) return Refused();
    CallStatus st = inner_.Read(rq, rs);
    Counted(Count::kAnyCall);
    return st;
  }
  CallStatus SaveBookmarks(const v1::SaveBookmarksRequest& rq, v1::SaveBookmarksResponse* rs) override {
    if (fired_) return Refused();
    CallStatus st = inner_.SaveBookmarks(rq, rs);
    Counted(Count::kAckCalls);
    return st;
  }
  CallStatus LoadBookmarks(const v1::LoadBookmarksRequest& rq, v1::LoadBookmarksResponse* rs) override {
    if (fired_) return Refused();
    CallStatus st = inner_.LoadBookmarks(rq, rs);
    Counted(Count::kAnyCall);
    return st;
  }
  void OnStrayCall(const std::string& method) override { inner_.OnStrayCall(method); }

 private:
  // `kind` is what the call is: an ack counts for both kAnyCall and kAckCalls.
  void Counted(Count kind) {
    if (!armed_ || fired_) return;
    if (count_ == Count::kAckCalls && kind != Count::kAckCalls) return;
    if (++seen_ >= target_) fired_ = true;
  }
  CallStatus Refused() const {
    CallStatus st;
    st.code = CallCode::kFailedPrecondition;
    st.message = "the connector is being killed at a crash point";
    return st;
  }

  BrokerEndpoint& inner_;
  bool armed_ = false;
  bool fired_ = false;
  Count count_ = Count::kAnyCall;
  std::uint64_t target_ = 1;
  std::uint64_t seen_ = 0;
};

}  // namespace weir
