// File: source.h
//
// The connector side of weir, for C++: a source connector implements Source; a
// host drives it one call at a time and hands each call a Context. The host is
// either Serve() (serve.h: the Connector gRPC service in its own process, what
// weir launches) or weir's in-process harness. The source cannot tell which.
//
// Protocol (lock-step, see proto/weir/v1/connector.proto):
//   Open        starts an incarnation, fresh or restored from a committed checkpoint;
//   Advance     one step: pull, emit records, report a watermark, say when to be
//               called again;
//   Checkpoint  closes the current epoch and returns state that, restored by Open,
//               resumes after every record emitted so far;
//   Committed   commit notice: checkpoint N and every epoch before it are durable.
//               The only moment from which acks for those records are allowed.
//               Sent at most once and never retried.
//
// Time: Context::now() is the virtual now. It starts at the call's now and moves
// forward as broker answers arrive. Source code must never read a wall clock and
// must draw any randomness from a PRNG seeded deterministically (e.g. from the
// incarnation), so that a (scenario, seed) pair replays byte for byte.
//
// Thread rules: the host calls the source from one thread at a time and never
// concurrently; a Context and its broker() are used only on the thread of the
// call they were given to, and only during that call.
//
// Example:
//   class Scans : public weir::adapter::Source {
//     void Advance(weir::adapter::Context& ctx) override {
//       std::vector<weir::v1::Delivery> got;
//       if (ctx.broker().Pull(64, &got).ok())
//         for (const auto& d : got) ctx.Emit(d.message_id(), d.event_time_ns(), d.payload());
//       ctx.ResumeAt(ctx.now() + 100'000'000);
//     }
//     ...
//   };
//   int main() { Scans s; return weir::adapter::Serve(s); }
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include <grpcpp/support/status.h>

#include "weir/v1/broker.pb.h"
#include "weir/v1/connector.pb.h"

namespace weir::adapter {

// The outcome of one broker call.
struct BrokerStatus {
  grpc::StatusCode code = grpc::StatusCode::OK;
  std::string message;
  // The virtual now after the call, as the broker reported it (answer's now_ns,
  // or trailing metadata "weir-now-ns" on failure); unset when the broker said
  // nothing (e.g. the call never reached it).
  std::optional<std::int64_t> now_ns;
  // RESOURCE_EXHAUSTED only: the broker's retry-after hint (trailing metadata
  // "retry-after-ms"), in ns. The throttled method must not be called again
  // before now + retry_after_ns; other methods may.
  std::optional<std::int64_t> retry_after_ns;

  bool ok() const { return code == grpc::StatusCode::OK; }
  bool throttled() const { return code == grpc::StatusCode::RESOURCE_EXHAUSTED; }
};

// weir's Broker service as the source sees it. Each call is synchronous and
// bounded in wall time by the implementation; none throws.
class BrokerClient {
 public:
  virtual ~BrokerClient() = default;

  // Replaces *out with up to max deliverable messages, each with a fresh receipt.
  // On error *out is empty.
  [[nodiscard]] virtual BrokerStatus Pull(std::uint32_t max, std::vector<v1::Delivery>* out) = 0;
  // Removes the messages behind these receipts for good. A receipt that no longer
  // holds its message (lease expired, superseded) is ignored by the broker.
  [[nodiscard]] virtual BrokerStatus Ack(const std::vector<std::uint64_t>& receipts) = 0;
  // Makes the messages behind these receipts deliverable again at once.
  [[nodiscard]] virtual BrokerStatus Nack(const std::vector<std::uint64_t>& receipts) = 0;
  // Moves the lease deadline of these receipts to now + extension_ns. Replaces
  // *rejected with the receipts whose lease could not be extended.
  [[nodiscard]] virtual BrokerStatus ExtendLease(const std::vector<std::uint64_t>& receipts,
                                                 std::int64_t extension_ns,
                                                 std::vector<std::uint64_t>* rejected) = 0;
};

// Which connector call a Context belongs to.
enum class CallKind { kOpen, kAdvance, kCheckpoint, kCommitted };

// Given to every Source call. Collects what an Advance produces and keeps the
// virtual now.
//
// Invariants: now() never decreases; the step-shaping methods (Emit,
// SetWatermark, ResumeAt, Finish) are valid only in an Advance call — elsewhere
// they are ignored and recorded as misuse, which the host turns into a failed
// call (FAILED_PRECONDITION) so the mistake surfaces as a connector-error.
class Context {
 public:
  // For hosts. REQUIRES: broker outlives the context.
  Context(CallKind call, std::int64_t now_ns, BrokerClient& broker);
  Context(const Context&) = delete;
  Context& operator=(const Context&) = delete;

  // The virtual now in ns. Moves forward as broker calls return.
  std::int64_t now() const { return now_ns_; }
  CallKind call() const { return call_; }
  // The broker. Every call through it moves now() to the answer's virtual now.
  BrokerClient& broker() { return clocked_; }

  // Advance only. Adds a record produced from message `message_id`.
  void Emit(std::uint64_t message_id, std::int64_t event_time_ns, std::string value = {});
  // Advance only. The watermark after this step's records; the last call wins.
  // Unset: the step reports no watermark.
  void SetWatermark(std::int64_t watermark_ns);
  // Advance only. Call Advance again at this virtual time (a time already past
  // means now()). The last of ResumeAt/Finish wins. With neither, the step asks
  // to be called again at now() + kDefaultResumeDelayNs.
  void ResumeAt(std::int64_t at_ns);
  // Advance only. No more work will ever come from this source.
  void Finish();

  static constexpr std::int64_t kDefaultResumeDelayNs = 100'000'000;  // 100 ms virtual

  // For hosts, after the source returned: writes records, watermark and
  // resume_at/finished into *response (applying the default resume rule).
  // REQUIRES: call() == CallKind::kAdvance.
  void WriteStep(v1::AdvanceResponse* response);
  // For hosts: empty, or what the source did that its call does not allow.
  const std::string& misuse() const { return misuse_; }

 private:
  // Forwards to the host's broker and moves now() from each answer.
  class ClockedBroker final : public BrokerClient {
   public:
    ClockedBroker(BrokerClient& inner, Context& ctx) : inner_(inner), ctx_(ctx) {}
    BrokerStatus Pull(std::uint32_t max, std::vector<v1::Delivery>* out) override;
    BrokerStatus Ack(const std::vector<std::uint64_t>& receipts) override;
    BrokerStatus Nack(const std::vector<std::uint64_t>& receipts) override;
    BrokerStatus ExtendLease(const std::vector<std::uint64_t>& receipts, std::int64_t extension_ns,
                             std::vector<std::uint64_t>* rejected) override;

   private:
    BrokerStatus Observe(BrokerStatus status);
    BrokerClient& inner_;
    Context& ctx_;
  };

  // False (and misuse recorded) when `method` is not allowed in this call.
  bool AllowedHere(const char* method);

  const CallKind call_;
  std::int64_t now_ns_;
  ClockedBroker clocked_;
  std::vector<v1::Record> records_;
  std::optional<std::int64_t> watermark_ns_;
  std::optional<std::int64_t> resume_at_ns_;
  bool finished_ = false;
  std::string misuse_;
};

// What Open is told.
struct OpenInfo {
  std::uint64_t incarnation = 0;  // 1 for the first life of the connector, then 2, ...
  bool restore = false;           // true: restore from the committed checkpoint below
  std::uint64_t checkpoint_id = 0;
  std::string checkpoint_state;   // bytes the source returned from Checkpoint(checkpoint_id)
  // The broker redelivers an acked message no later than this long after the ack,
  // so dedup memory of acked messages may be dropped after it.
  std::int64_t redelivery_horizon_ns = 0;
};

// A source connector. The host calls Open first (again on every new incarnation,
// possibly on the same object: Open must reset all state), then any sequence of
// Advance, Checkpoint and Committed, one at a time.
//
// Errors: an exception that escapes a call fails that call with INTERNAL
// ("source threw during Advance: …"), a misuse of the Context with
// FAILED_PRECONDITION, a non-OK status from Open with that status; the process
// keeps serving. weir reports every such error status as connector-error (in
// Open from a committed checkpoint: bad-checkpoint). protocol-error is for
// malformed exchanges: an answer that does not parse or exceeds the receive
// limit (RESOURCE_EXHAUSTED), an unserved method (UNIMPLEMENTED), records of
// messages never delivered, impossible times. DEADLINE_EXCEEDED is step-timeout;
// a process that ended is unexpected-exit.
class Source {
 public:
  virtual ~Source() = default;

  // Starts an incarnation. A non-OK status means the incarnation cannot start;
  // with info.restore set, weir reports it as a bad checkpoint.
  [[nodiscard]] virtual grpc::Status Open(const OpenInfo& info, Context& ctx) = 0;
  // One step: do a unit of work now and shape the step through ctx.
  virtual void Advance(Context& ctx) = 0;
  // Closes the current epoch as checkpoint `checkpoint_id` and returns state that,
  // restored by Open, resumes after every record emitted so far.
  virtual std::string Checkpoint(std::uint64_t checkpoint_id, Context& ctx) = 0;
  // Commit notice: checkpoint `checkpoint_id` and every epoch before it are durable.
  virtual void Committed(std::uint64_t checkpoint_id, Context& ctx) = 0;
};

}  // namespace weir::adapter
