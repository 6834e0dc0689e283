// File: runtime_model.h
//
// weir's stand-in for the stream engine that hosts the connector. It drives the
// connector lock-step through a ConnectorPort (Open, Advance, Checkpoint,
// Committed), keeps the committed output in a CommitStore, takes a checkpoint
// every N records or T virtual time, commits epoch + checkpoint atomically,
// sends the commit notice, and at the end drains: keeps stepping until every
// published message is committed or the drain bound passes.
//
// Time is discrete-event: between calls the virtual clock jumps to the next
// scheduled event (a step's resume time, a checkpoint). Before the runtime
// acts at a time it advances the broker to it, so every publish and lease
// expiry due is traced first: the trace's times never decrease. Each connector call
// runs inside a BrokerSession window so broker calls advance the call's clock.
//
// Invariants:
//   - the commit notice for checkpoint N is sent only after N is committed,
//     at most once, never retried;
//   - a crash discards the open epoch; the next incarnation opens from the
//     last committed checkpoint;
//   - a crash is port.Kill() (SIGKILL to the process group for the gRPC edge),
//     a `crashed{point}` event, then a new incarnation; it is never reported as
//     an unexpected exit. An exit no crash point caused ends the run.
//
// Faults (decided through FaultSource, keyed by logical position):
//   STEP k (k = step number, consumed even when the Advance is never sent):
//     crash BEFORE_STEP (also drawn per step at crash_rate), or
//     IN_STEP_AFTER_BROKER_CALL after the connector's n-th broker call of that
//     Advance (through the CrashGate; if the step makes fewer calls, no crash).
//   CHECKPOINT k (k = checkpoint id), after the checkpoint is taken:
//     crash AFTER_CHECKPOINT_BEFORE_COMMIT, AFTER_COMMIT_BEFORE_NOTICE or
//     IN_NOTICE_AFTER_ACK after the n-th Ack call of the notice (one of the
//     three drawn at checkpoint_crash_rate); then commit_failure (drawn at
//     commit_failure_rate), decided only if the commit is reached: the commit
//     fails, the epoch is discarded, no notice is sent, and the connector is
//     restarted from the last committed checkpoint (crashed{"commit-failed"}).
//     A commit failure makes a later crash point of that checkpoint moot.
//   - every exit path leaves no incarnation alive (port.Kill()).
//
// Many readers (scenario.readers.count > 1; docs/many-readers.md): one port
// per reader slot, each its own process. The state below that is per
// incarnation (open epoch, watermark, finished, livelock stretch) is per
// reader; incarnation numbers stay global (the n-th Start of the run). Steps
// are scheduled per reader; readers due at the same virtual time go in a
// seeded order. Log shape: the runtime keeps the span table (who holds which
// offsets of which partition) and changes it only through Assign, Revoke and
// Cut calls it also traces (assigned, revoked, cut), always revoke before
// assign. Faults of many readers:
//   STEP k: Cut (before the step, the stepping reader's span is cut), with
//     crash IN_CUT (the Cut answer is discarded) or AFTER_CUT;
//   CHECKPOINT k, after the notices: Move (revoke from one reader, assign to
//     another from the committed resume point), with crash IN_REVOKE; then
//     Membership (a reader leaves or joins).
// Checkpoint k is taken from every live reader, in index order; a crash
// before its commit (AFTER_CHECKPOINT_BEFORE_COMMIT, a failed commit) aborts
// it and restarts every reader from the last committed checkpoint; other
// crashes restart only the reader that crashed, with the spans it holds, each
// from its committed resume point.
//
// Livelock: a step that asks to be called again at the virtual time it began
// continues a stretch; more than runtime.max_same_time_steps such steps in a
// row, or a stretch longer than runtime.max_same_time_wall_ms of wall time
// (when a wall clock is given), ends the run with a `livelock` event.
//
// Thread safety: none; Run() is the simulation thread.
#pragma once

#include <cstdint>
#include <functional>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "harness/broker/broker_model.h"
#include "harness/broker/broker_session.h"
#include "harness/core/event_queue.h"
#include "harness/faults/fault_source.h"
#include "harness/runtime/commit_store.h"
#include "harness/runtime/connector_port.h"
#include "harness/runtime/crash_gate.h"
#include "harness/trace/trace_log.h"
#include "weir/v1/scenario.pb.h"

namespace weir {

// Livelock bounds when the scenario leaves them 0 (RuntimePolicy).
inline constexpr std::uint64_t kDefaultMaxSameTimeSteps = 1000;
inline constexpr std::int64_t kDefaultMaxSameTimeWallMs = 10000;

struct RunSummary {
  std::string end_reason;  // "all messages committed", "drain bound reached", …
  bool connector_failed = false;
  VirtualTime end_time = 0;
  std::uint64_t steps = 0;
  std::uint64_t incarnations = 0;
  std::uint64_t crashes = 0;
  std::uint64_t checkpoints = 0;
  std::uint64_t published = 0;
  std::uint64_t committed_messages = 0;
  std::uint64_t duplicate_records = 0;
  // Broker calls in the whole run, the most within one connector call, and
  // receipts the broker ignored (see BrokerModel::ignored_receipts).
  std::uint64_t broker_calls = 0;
  std::uint64_t max_broker_calls_in_one_call = 0;
  // Calls weir made to the connector (Open, Advance, Checkpoint, Committed,
  // and the many-readers calls), answered or not.
  std::uint64_t connector_calls = 0;
  std::uint64_t ignored_receipts = 0;
  // Many readers: reader slots, and what changed hands (cuts answered with a
  // tail, moves, joins, leaves).
  std::uint32_t readers = 1;
  std::uint64_t cuts = 0;
  std::uint64_t moves = 0;
  std::uint64_t joins = 0;
  std::uint64_t leaves = 0;
};

class RuntimeModel {
 public:
  // REQUIRES: every argument outlives the model; scenario is validated.
  RuntimeModel(const v1::Scenario& scenario, BrokerModel& broker, BrokerSession& session, ConnectorPort& port,
               TraceLog& trace, FaultSource& faults);
  // Many readers: one port per reader slot (scenario.readers.count of them).
  RuntimeModel(const v1::Scenario& scenario, BrokerModel& broker, BrokerSession& session,
               std::vector<ConnectorPort*> ports, TraceLog& trace, FaultSource& faults);

  // Runs to the end. Never leaves the connector alive.
  RunSummary Run();

  // A wall clock in milliseconds, for the livelock bound in wall time
  // (runtime.max_same_time_wall_ms); the edge passes one. Without it only the
  // step count bounds a livelock: the model itself never reads a wall clock.
  void set_wall_clock(std::function<std::int64_t()> now_ms) { wall_clock_ms_ = std::move(now_ms); }

 private:
  enum class EventKind { kStep, kCheckpointDue };
  struct Event {
    EventKind kind;
    std::uint64_t generation;  // incarnation for steps, timer generation for checkpoints
    std::uint32_t reader = 0;  // steps
  };
  // A span a reader holds (log shape, many readers), by partition: the
  // reader holds [start, end) where start is what it was last told (Open,
  // Assign) and end unset is open. committed_next: its resume point in the
  // last committed checkpoint (or start, when assigned since); emitted_next:
  // one past the last offset it emitted from the span (or committed_next).
  struct HeldSpan {
    std::uint64_t start = 0;
    std::optional<std::uint64_t> end;
    std::uint64_t committed_next = 0;
    std::uint64_t emitted_next = 0;
  };
  struct CommittedPart {  // a reader's part of the last checkpoint it committed
    std::uint64_t id = 0;
    std::string state;
    std::optional<VirtualTime> watermark;
    std::vector<ResumePoint> resume_points;
  };
  struct Reader {
    ConnectorPort* port = nullptr;
    bool live = false;  // started and not left
    std::uint64_t incarnation = 0;
    bool finished = false;  // the live incarnation said it is finished
    std::uint64_t same_time_steps = 0;
    std::int64_t same_time_since_wall_ms = 0;  // wall time when the stretch began
    std::optional<VirtualTime> watermark;      // last reported in this incarnation
    std::vector<RecordKey> open_epoch;         // keys of records not yet checkpointed
    std::optional<CommittedPart> committed;
    std::map<std::uint32_t, HeldSpan> spans;  // log shape, many readers
  };
  // A taken, not yet committed checkpoint's part from one reader.
  struct TakenPart {
    std::uint32_t reader;
    std::vector<RecordKey> epoch;
    CommittedPart part;
  };

  bool many() const { return readers_.size() > 1; }
  bool log() const { return broker_.shape() == v1::LOG; }
  Reader& R(std::uint32_t r) { return readers_[r]; }
  // Makes reader r the one the trace and the crash gate speak for.
  void Select(std::uint32_t r);

  // Each returns false when the connector failed (already traced).
  bool StartIncarnation(std::uint32_t r);
  bool DoStep(std::uint32_t r);
  bool DoCheckpointCycle();
  // Kills reader r's incarnation at crash point `point` (kebab-case name),
  // traces it and starts its next incarnation from its last committed
  // checkpoint. Returns false when the restart failed or crashes loop.
  bool CrashAndRestart(std::uint32_t r, const char* point);
  // Every live reader, in index order.
  bool CrashAndRestartAll(const char* point);

  // Many readers, log shape: the span table's moves, each traced and sent.
  void AssignInitialSpans();
  bool AssignNewPartitions();
  bool SendAssign(std::uint32_t r, std::vector<std::pair<std::uint32_t, HeldSpan>> spans, const char* why);
  bool SendRevoke(std::uint32_t r, const std::vector<std::uint32_t>& partitions, const char* why, bool crash_in_revoke);
  bool MaybeCut(std::uint32_t r, std::uint64_t k, bool* crashed);
  bool MaybeRebalance(std::uint64_t id);
  // A live reader other than `not_r` that holds no span of partition p, the
  // seeded pick among them (nullopt when none).
  std::optional<std::uint32_t> PickReceiver(std::uint32_t p, std::uint32_t not_r, std::string_view stream,
                                            std::uint64_t k);
  std::vector<std::uint32_t> LiveReaders() const;
  void PushStep(VirtualTime t, std::uint32_t r);

  // Wraps one connector call of the selected reader in a broker session
  // window and moves now.
  template <typename Request, typename Response, typename Method>
  ConnectorFailure Call(Method method, Request& request, Response* response);

  void TraceFailure(const char* call, const ConnectorFailure& failure);
  void TraceProtocolError(const char* call, std::string detail);
  void ScheduleCheckpointTimer();
  // Counts a step that asked to be called again at the time it began; true
  // (and a livelock event traced) when a livelock bound is passed.
  bool Livelocked(Reader& reader);
  bool AllCommitted() const;
  bool AllFinished() const;

  const v1::Scenario& scenario_;
  BrokerModel& broker_;
  BrokerSession& session_;
  CrashGate gate_;  // wraps session_; what the ports see as the broker
  TraceLog& trace_;
  FaultSource& faults_;
  const VirtualTime hard_end_;

  std::vector<Reader> readers_;
  std::uint32_t selected_ = 0;
  EventQueue<Event> queue_;
  CommitStore store_;
  VirtualTime now_ = 0;
  std::uint64_t incarnations_ = 0;     // Starts so far: the last incarnation number
  std::uint64_t connector_calls_ = 0;  // every call through Call(): the connector side of the cost
  std::uint64_t step_ = 0;
  std::uint64_t next_checkpoint_id_ = 1;
  std::uint64_t checkpoint_timer_generation_ = 0;
  std::uint64_t checkpoints_ = 0;
  std::function<std::int64_t()> wall_clock_ms_;
  std::uint64_t crashes_ = 0;
  std::uint64_t crashes_since_step_ = 0;  // guards against a crash loop
  bool crash_loop_ = false;
  std::uint32_t known_partitions_ = 0;  // many readers: partitions handed out so far
  std::uint64_t order_draws_ = 0;       // seeded order of readers due at one time
  std::uint64_t cuts_ = 0, moves_ = 0, joins_ = 0, leaves_ = 0;
};

}  // namespace weir
