// File: broker_session.h
//
// The broker as one connector call sees it. The runtime opens a session window
// around each connector call (BeginCall … EndCall); broker calls inside it
// advance the call's virtual clock and reach the broker model. A broker call
// outside any window is a protocol error: it is refused with
// FAILED_PRECONDITION and written to the trace.
//
// One session serves one broker model, queue or log; a call of the other
// shape is refused with FAILED_PRECONDITION and traced as a protocol error,
// without counting as a call of its method.
//
// Per-call faults. Each broker call is the k-th call of its method (site PULL,
// ACK, NACK, EXTEND_LEASE, LIST_PARTITIONS, READ, SAVE_BOOKMARKS or
// LOAD_BOOKMARKS, position k, 1-based) and is traced as broker_call at its
// start (a Read with its partition). Then, in this order, each through FaultSource:
//   1. latency: the call's virtual now moves forward before it takes effect;
//   2. throttling: a call inside a scripted throttle window is throttled until
//      the window's end; otherwise the token bucket (RFC 2697 single-rate
//      bucket: one token per 1/rate_per_s seconds, at most `burst`, initially
//      full; each admitted call takes one) throttles a call that finds none,
//      until the next token. Either way the outcome is a throttle_retry_after_ms
//      decision, so a replayed plan reproduces it without the bucket;
//   3. transient UNAVAILABLE / DEADLINE_EXCEEDED.
// A call failed by 2 or 3 does not reach the model and is traced as
// broker_call_failed; so is a call the model itself answers with an error
// (a log Read out of range, of an unavailable or unknown partition). Draws are keyed by (method, k), so turning one
// kind off never moves another kind's draws.
//
// Thread safety: none; every method runs on the simulation thread.
#pragma once

#include <cstdint>
#include <optional>

#include "harness/broker/broker_endpoint.h"
#include "harness/broker/log/log_model.h"
#include "harness/broker/queue/queue_model.h"
#include "harness/faults/fault_source.h"
#include "harness/trace/trace_log.h"

namespace weir {

class BrokerSession : public BrokerEndpoint {
 public:
  // REQUIRES: model and trace outlive the session.
  BrokerSession(QueueModel& model, TraceLog& trace, FaultSource& faults)
      : queue_(&model), trace_(trace), faults_(faults) {}
  BrokerSession(LogModel& model, TraceLog& trace, FaultSource& faults) : log_(&model), trace_(trace), faults_(faults) {}

  // Opens the window of one connector call starting at virtual time now.
  void BeginCall(VirtualTime now);
  // Closes the window; returns the virtual now after every broker call in it.
  VirtualTime EndCall();
  bool in_call() const { return in_call_; }
  // Broker calls made in the current (or last) window.
  std::uint64_t calls_in_window() const { return calls_in_window_; }
  // Broker calls made in every window so far, and the most in any one window:
  // the figures that show a connector flooding the broker.
  std::uint64_t calls_total() const { return calls_total_; }
  std::uint64_t max_calls_in_window() const { return max_calls_in_window_; }

  CallStatus Pull(const v1::PullRequest& request, v1::PullResponse* response) override;
  CallStatus Ack(const v1::AckRequest& request, v1::AckResponse* response) override;
  CallStatus Nack(const v1::NackRequest& request, v1::NackResponse* response) override;
  CallStatus ExtendLease(const v1::ExtendLeaseRequest& request, v1::ExtendLeaseResponse* response) override;
  CallStatus ListPartitions(const v1::ListPartitionsRequest& request, v1::ListPartitionsResponse* response) override;
  CallStatus Read(const v1::ReadRequest& request, v1::ReadResponse* response) override;
  CallStatus SaveBookmarks(const v1::SaveBookmarksRequest& request, v1::SaveBookmarksResponse* response) override;
  CallStatus LoadBookmarks(const v1::LoadBookmarksRequest& request, v1::LoadBookmarksResponse* response) override;
  void OnStrayCall(const std::string& method) override;

 private:
  // Common entry: checks the window, counts the call. Returns false (and fills
  // *status) when the call must be refused.
  // Then applies the per-call faults (see above): false (and *status filled)
  // when the call fails; *position is the call's position among its method's.
  // `partition`: the partition a log Read asks for (traced with the call).
  bool Enter(const char* method, v1::Site site, CallStatus* status, std::uint64_t* position,
             std::optional<std::uint32_t> partition = std::nullopt);
  // False (and *status filled, a protocol error traced) when `method` belongs
  // to the other shape than this session's model.
  bool ShapeMatches(const char* method, bool log_call, CallStatus* status);
  // Applies everything due at or before the window's now to the model.
  void AdvanceModel();
  // The throttle decision for this call, if any (consults windows and bucket).
  bool Throttled(v1::Site site, std::uint64_t position, VirtualDuration* retry_after);
  // Takes a token if one is there; else *wait is the time until the next one.
  bool TakeToken(VirtualDuration* wait);
  void TraceFailure(const char* method, const CallStatus& status,
                    std::optional<std::uint32_t> partition = std::nullopt);

  QueueModel* queue_ = nullptr;  // exactly one of queue_ and log_ is set
  LogModel* log_ = nullptr;
  TraceLog& trace_;
  FaultSource& faults_;
  bool in_call_ = false;
  VirtualTime now_ = 0;
  std::uint64_t calls_in_window_ = 0;
  std::uint64_t calls_total_ = 0;
  std::uint64_t max_calls_in_window_ = 0;
  std::uint64_t calls_[v1::Site_ARRAYSIZE] = {};  // by v1::Site
  // Token bucket: tokens held, and the refill ticks counted so far.
  std::int64_t tokens_ = -1;  // -1: not yet initialized (full at time 0)
  std::int64_t ticks_ = 0;
};

}  // namespace weir
