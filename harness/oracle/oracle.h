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
//     the committed output (citing the step that answered "finished", if the
//     live incarnation said so).
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
//   watermark-stall (checked when the profile claims a watermark and
//     idle_timeout_ms > 0): an idle period starts at the end of a step whose
//     stepped event says broker_idle while every message delivered to this
//     incarnation has a record (emitted by it, or committed); it ends at the
//     first delivered, published, nacked or lease_expired event, a stepped
//     event that is not idle, or a crash or open. At the end of every step
//     more than idle_timeout after the period began, the watermark (the step's
//     own included) must be at least step time - idle_max_lag. One violation
//     per idle period.
//   late-record: a record is late when its event time is below the last
//     watermark the connector reported before the step that emitted it (a
//     restored incarnation starts from the watermark committed with its
//     checkpoint). Always counted (Verdict::late_records); a violation only
//     under BOUNDED_LATENESS, when it is more than allowed_lateness below —
//     except lateness forced by a crash. A message delivered to incarnation
//     j that is delivered again to a later incarnation i came back only when
//     j's lease ran out (or the broker restarted), while i's watermark moved
//     on without it; i could not have known it. For records of such a
//     message emitted by i, only the lateness i added after the message came
//     back counts: watermark before the emitting step - max(event time, F),
//     F = the watermark reported before the step in which it was delivered
//     to i. No excuse when j itself moved its watermark more than
//     allowed_lateness past the message while it held it undelivered as a
//     record (judged when j crashed: its highest watermark against max(event
//     time, the watermark before the step that delivered it to j)). Records
//     whose failure the excuse removed are counted in
//     Verdict::forced_late_records.
//   watermark-ahead (every profile): a step reports a watermark later than
//     the step's virtual time plus profile.max_watermark_lead_ms. One
//     violation per stretch of steps whose watermark is ahead, within an
//     incarnation.
//   livelock: a livelock event (the runtime passed one of the scenario's
//     bounds on steps at one virtual time).
//   connector-error: a connector_error event (the connector answered a call
//     with an error status of its own); in Open from a committed checkpoint
//     it is bad-checkpoint, as every failure of that Open is.
//   Coverage: every rule also counts its chances, the situations in which it
//   could have failed (InvariantChance in verdict.h, docs/coverage.md).
//   protocol-error, besides the runtime's own protocol_error events: a record
//     of a message not delivered to the emitting incarnation (messages already
//     retired are not checked: their delivery history is gone), an ack of a
//     receipt never issued, a watermark or resume time more than 100 years
//     away from virtual now.
//
// Memory: per in-flight message one MessageState (which also holds the
// per-incarnation delivery facts, so they go when the message retires), one
// bit per retired id above the oldest id still in flight, the open and pending epochs, and O(1) else.
//
// Thread safety: none.
#pragma once

#include <cstdint>
#include <deque>
#include <optional>
#include <string>
#include <vector>

#include "absl/container/flat_hash_map.h"
#include "harness/oracle/log_rules.h"
#include "harness/oracle/verdict.h"
#include "harness/trace/event_ref.h"
#include "harness/trace/trace_log.h"
#include "weir/v1/connector.pb.h"
#include "weir/v1/scenario.pb.h"

namespace weir {

class Oracle : public TraceObserver {
 public:
  // `shape`: the run's broker shape. The log rules live in LogRules
  // (log_rules.h); the rules of the other shape do not apply to a run.
  // `readers`: the run's reader slots; with more than one, every rule about
  // "the incarnation" is judged per reader (the events' reader field) and the
  // many-reader rules apply (log_rules.h).
  explicit Oracle(const v1::Profile& profile, v1::SourceShape shape = v1::QUEUE, std::uint32_t readers = 1);

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
    EventRef committed;         // the commit that first put a record of it in the output
    EventRef committed_record;  // the record (emitted event) that commit made durable
    std::uint32_t committed_records = 0;
    bool acked = false;
    // Incarnations that last had it delivered / emitted a record of it (0: none).
    std::uint64_t delivered_in = 0;
    std::uint64_t emitted_in = 0;
    // late-record's excuse for lateness forced by a crash (see the rules).
    std::int64_t event_time = 0;
    std::int64_t delivered_watermark = kNoWatermark;  // reported before its last delivery's step
    std::uint64_t excused_in = 0;                     // the incarnation it came back to
    std::int64_t excuse_floor = kNoWatermark;         // reported before the step it came back in
    bool tainted = false;                             // an incarnation moved its watermark past it while holding it
  };
  static constexpr std::int64_t kNoWatermark = INT64_MIN;
  void OnCrashed(const v1::TraceEvent& e);
  struct PendingRecord {
    std::uint64_t message_id;
    EventRef emitted;
  };

  // Counts a violation; keeps it in full while fewer than kKeptViolations are.
  // `current` (the event being checked) is described from the event itself.
  // `cause`: the event that started it, when not `current` (see Violation).
  void Report(Invariant invariant, const std::string& sentence, std::vector<EventRef> cited,
              const v1::TraceEvent* current, const EventRef& cause = EventRef{});
  // Counts a repeat of a cause already reported (InvariantResult::echoes).
  void Echo(Invariant invariant) { ++verdict_.at(invariant).echoes; }
  void DiscardUncommitted();
  // Coverage: counts the chances (verdict.h) `e` gives the rules, before the
  // rules see it. Chances that depend on a rule's own state (a call after a
  // throttle, a step past the idle timeout) are counted by the rule.
  void CountChances(const v1::TraceEvent& e);
  void Chance(Invariant invariant) { ++verdict_.at(invariant).chances; }
  void OnCommitted(const v1::TraceEvent& e);
  void OnAcked(const v1::TraceEvent& e);
  void OnWatermark(const v1::TraceEvent& e, std::int64_t watermark);
  void OnDelivered(const v1::TraceEvent& e);
  void OnEmitted(const v1::TraceEvent& e);
  void OnStepped(const v1::TraceEvent& e);
  void OnAckIgnored(const v1::TraceEvent& e);
  // Reports a time the connector gave that is absurdly far from virtual now.
  bool TimeInRange(const v1::TraceEvent& e, const char* what, std::int64_t value);
  // Delivered to the live incarnation and without a record yet (blocks idleness).
  bool Awaiting(const MessageState& m, std::uint64_t incarnation) const {
    return m.delivered_in == incarnation && m.emitted_in != incarnation && m.committed_records == 0;
  }
  void EndIdle() {
    idle_ = false;
    for (PerReader& r : saved_) r.idle = false;
  }
  // Many readers: makes reader r's per-incarnation state the members'.
  void SwitchTo(std::uint32_t r);
  static std::string ReportTail(const std::string& tail);
  void OnConnectorFailure(const v1::TraceEvent& e, const std::string& call, Invariant invariant,
                          const std::string& sentence);
  void OnRunEnded(const v1::TraceEvent& e);
  void OnBrokerCall(const v1::TraceEvent& e);
  void OnBrokerCallFailed(const v1::TraceEvent& e);
  struct MethodState;
  // Throttle and retry checks of one call against what limits `method`.
  void CheckCall(const v1::TraceEvent& e, const std::string& method, MethodState& m);
  bool IsCommitted(std::uint64_t id) const;
  void Retire(std::uint64_t id);

  const bool exactly_once_;
  const bool lateness_bounded_;
  const VirtualDuration allowed_lateness_;
  const VirtualDuration idle_timeout_;  // 0: watermark-stall not checked
  const VirtualDuration idle_max_lag_;
  Verdict verdict_;
  absl::flat_hash_map<std::uint64_t, MessageState> messages_;  // published, in flight
  // Retired ids (committed and acked: no longer in flight), one bit per id.
  // Ids retire roughly in order, so the words below the oldest id still in
  // flight are all ones: they are dropped and stand for "every id below
  // retired_base_ is retired", which keeps memory flat over a long run. Bit
  // i of the window is id retired_base_ + i; id 0 (never dense) has its own.
  bool IsRetired(std::uint64_t id) const {
    if (id == 0) return retired_zero_;
    const std::uint64_t i = id - 1;
    if (i < retired_base_) return true;
    const std::uint64_t w = (i - retired_base_) / 64;
    return w < retired_.size() && ((retired_[w] >> ((i - retired_base_) % 64)) & 1) != 0;
  }
  std::deque<std::uint64_t> retired_;
  // The first committed record and its commit of the most recently retired
  // ids, so a duplicate of a retired message still cites them; at most
  // kRetiredEvidence entries (memory stays bounded), oldest dropped first.
  static constexpr std::size_t kRetiredEvidence = 4096;
  struct FirstRecord {
    EventRef record;
    EventRef commit;
  };
  absl::flat_hash_map<std::uint64_t, FirstRecord> retired_evidence_;
  std::deque<std::uint64_t> retired_evidence_order_;
  std::uint64_t retired_base_ = 0;  // multiple of 64 (for id - 1)
  bool retired_zero_ = false;
  std::vector<PendingRecord> open_epoch_;
  absl::flat_hash_map<std::uint64_t, std::vector<PendingRecord>> pending_;  // by checkpoint id
  // Highest watermark of the live incarnation (or committed with its checkpoint).
  std::optional<std::int64_t> watermark_;
  EventRef watermark_ref_;
  EventRef opened_ref_;
  EventRef finished_ref_;     // the live incarnation's step that answered "finished"
  EventRef failure_ref_;      // the connector's first failure (exit, timeout, error…)
  std::string failure_what_;  // its description (a reference keeps no text)
  bool regressed_ = false;    // the last watermark was below the high mark (reported)
  // The last watermark reported (literally, even one that regressed): late-record.
  std::optional<std::int64_t> reported_watermark_;
  EventRef reported_ref_;
  // Messages for which Awaiting() holds; idleness needs zero.
  std::uint64_t awaiting_ = 0;
  bool idle_ = false;
  bool idle_reported_ = false;  // this idle period already has its violation
  EventRef idle_since_;         // the stepped event that began the idle period
  // Per broker method (a handful of names; a log Read's transient failures
  // per partition, "Read of partition 3"), what limits its next call.
  struct MethodState {
    EventRef throttled;  // the last throttled call, while its retry-after runs
    VirtualTime throttled_until = 0;
    EventRef transient;  // the last transient failure, until the next call
    // A misuse already reported: later ones are echoes until a call of the
    // method respects the retry-after (throttle) or the backoff (storm).
    bool throttle_reported = false;
    bool storm_reported = false;
  };
  const VirtualDuration min_backoff_;
  const VirtualDuration max_lead_;  // watermark-ahead
  bool ahead_ = false;              // the last watermark was ahead (already reported)
  absl::flat_hash_map<std::string, MethodState> methods_;
  // Many readers: the per-incarnation members above, parked for the readers
  // that are not the current one (saved_[current_] is stale meanwhile).
  struct PerReader {
    std::vector<PendingRecord> open_epoch;
    std::optional<std::int64_t> watermark;
    EventRef watermark_ref, opened_ref, finished_ref;
    bool regressed = false;
    std::optional<std::int64_t> reported_watermark;
    EventRef reported_ref;
    std::uint64_t awaiting = 0;
    bool idle = false, idle_reported = false;
    EventRef idle_since;
    bool ahead = false;
    absl::flat_hash_map<std::string, MethodState> methods;
  };
  const bool many_;
  std::vector<PerReader> saved_;
  std::uint32_t current_ = 0;
  // The combined watermark (stepped.combined_watermark_ns) and since when it
  // is judged: a reader that opens, joins or leaves starts a new stretch.
  std::optional<std::int64_t> combined_;
  EventRef combined_ref_;
  LogRules log_;
  // Coverage state: the highest event time published or appended so far,
  // whether anything was committed yet, and whether spans changed since the
  // last checkpoint.
  std::optional<std::int64_t> max_event_time_;
  bool committed_any_ = false;
  bool spans_changed_ = false;
};

}  // namespace weir
