// File: oracle.h
//
// Checks a run's trace against the invariants, as a stream: it sees each event
// once, in order, and keeps only what is in flight (open and pending epochs,
// messages published but not yet committed and acked). Finish() returns the
// verdict. The same oracle checks a live run and a trace read back from disk.
//
// Rules (each tested in oracle_test.cc):
//   ack-before-commit: an ack of any receipt of message m is fine once some
//     record of m is in a committed epoch; before that it is a violation.
//   lost-message: at the end of the run a published message has no record in
//     the committed output.
//   duplicate-output (exactly-once only): a message has more than one record in
//     the committed output. Under at-least-once it is counted as a figure.
//   watermark-regression: a reported watermark is lower than the one reported
//     before it in the same incarnation, or than the watermark committed with
//     the checkpoint the incarnation was restored from.
//   throttle-violation: after a broker_call_failed with RESOURCE_EXHAUSTED at
//     time t with retry-after r, a broker_call of the same method before t + r.
//     Other methods are not restricted (acks may keep flowing).
//   retry-storm (checked when profile.min_backoff_ms > 0): after a
//     broker_call_failed with UNAVAILABLE or DEADLINE_EXCEEDED at time t, the
//     next broker_call of the same method comes before t + min_backoff.
//   Both are judged per incarnation: a new incarnation starts with a clean
//   slate, since a fresh process cannot know what its predecessor was told.
//
// Thread safety: none.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "absl/container/flat_hash_map.h"
#include "harness/oracle/verdict.h"
#include "harness/trace/event_ref.h"
#include "harness/trace/trace_log.h"
#include "weir/v1/scenario.pb.h"

namespace weir {

class Oracle : public TraceObserver {
 public:
  explicit Oracle(const v1::Profile& profile);

  void OnEvent(const v1::TraceEvent& event) override;
  // The verdict over every event seen. Call once, after the last event.
  Verdict Finish();

  // How many violations of each invariant are kept in full (the rest counted).
  static constexpr std::size_t kKeptViolations = 3;

 private:
  struct MessageState {
    EventRef published;
    EventRef last_delivered;
    EventRef last_emitted;
    EventRef committed;  // the commit that first put a record of it in the output
    std::uint32_t committed_records = 0;
    bool acked = false;
  };
  struct PendingRecord {
    std::uint64_t message_id;
    EventRef emitted;
  };

  // Counts a violation; keeps it in full while fewer than kKeptViolations are.
  // `current` (the event being checked) is described from the event itself.
  void Report(Invariant invariant, const std::string& sentence, std::vector<EventRef> cited,
              const v1::TraceEvent* current);
  void DiscardUncommitted();
  void OnCommitted(const v1::TraceEvent& e);
  void OnAcked(const v1::TraceEvent& e);
  void OnWatermark(const v1::TraceEvent& e, std::int64_t watermark);
  void OnConnectorFailure(const v1::TraceEvent& e, const std::string& call, Invariant invariant,
                          const std::string& sentence);
  void OnRunEnded(const v1::TraceEvent& e);
  void OnBrokerCall(const v1::TraceEvent& e);
  void OnBrokerCallFailed(const v1::TraceEvent& e);
  bool IsCommitted(std::uint64_t id) const;
  void Retire(std::uint64_t id);

  const bool exactly_once_;
  Verdict verdict_;
  absl::flat_hash_map<std::uint64_t, MessageState> messages_;  // published, in flight
  std::vector<bool> retired_;  // committed and acked: no longer in flight
  std::vector<PendingRecord> open_epoch_;
  absl::flat_hash_map<std::uint64_t, std::vector<PendingRecord>> pending_;  // by checkpoint id
  // Highest watermark of the live incarnation (or committed with its checkpoint).
  std::optional<std::int64_t> watermark_;
  EventRef watermark_ref_;
  EventRef opened_ref_;
  // Per broker method (a handful of names), what limits its next call.
  struct MethodState {
    EventRef throttled;  // the last throttled call, while its retry-after runs
    VirtualTime throttled_until = 0;
    EventRef transient;  // the last transient failure, until the next call
  };
  const VirtualDuration min_backoff_;
  absl::flat_hash_map<std::string, MethodState> methods_;
};

}  // namespace weir
