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
// Livelock: a step that asks to be called again at the virtual time it began
// continues a stretch; more than runtime.max_same_time_steps such steps in a
// row, or a stretch longer than runtime.max_same_time_wall_ms of wall time
// (when a wall clock is given), ends the run with a `livelock` event.
//
// Thread safety: none; Run() is the simulation thread.
#pragma once

#include <cstdint>
#include <functional>
#include <optional>
#include <string>
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
  std::uint64_t ignored_receipts = 0;
};

class RuntimeModel {
 public:
  // REQUIRES: every argument outlives the model; scenario is validated.
  RuntimeModel(const v1::Scenario& scenario, BrokerModel& broker, BrokerSession& session,
               ConnectorPort& port, TraceLog& trace, FaultSource& faults);

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
  };

  // Each returns false when the connector failed (already traced).
  bool StartIncarnation();
  bool DoStep();
  bool DoCheckpointCycle();
  // Kills the live incarnation at crash point `point` (kebab-case name),
  // traces it and starts the next incarnation from the last committed
  // checkpoint. Returns false when the restart failed or crashes loop.
  bool CrashAndRestart(const char* point);

  // Wraps one connector call in a broker session window and moves now.
  template <typename Request, typename Response, typename Method>
  ConnectorFailure Call(Method method, Request& request, Response* response);

  void TraceFailure(const char* call, const ConnectorFailure& failure);
  void TraceProtocolError(const char* call, std::string detail);
  void ScheduleCheckpointTimer();
  // Counts a step that asked to be called again at the time it began; true
  // (and a livelock event traced) when a livelock bound is passed.
  bool Livelocked();
  bool AllCommitted() const;

  const v1::Scenario& scenario_;
  BrokerModel& broker_;
  BrokerSession& session_;
  ConnectorPort& port_;
  CrashGate gate_;  // wraps session_; what the port sees as the broker
  TraceLog& trace_;
  FaultSource& faults_;
  const VirtualTime hard_end_;

  EventQueue<Event> queue_;
  CommitStore store_;
  VirtualTime now_ = 0;
  std::uint64_t incarnation_ = 0;
  std::uint64_t step_ = 0;
  std::uint64_t next_checkpoint_id_ = 1;
  std::uint64_t checkpoint_timer_generation_ = 0;
  std::uint64_t checkpoints_ = 0;
  std::uint64_t same_time_steps_ = 0;
  std::int64_t same_time_since_wall_ms_ = 0;  // wall time when the stretch began
  std::function<std::int64_t()> wall_clock_ms_;
  std::uint64_t crashes_ = 0;
  std::uint64_t crashes_since_step_ = 0;  // guards against a crash loop
  bool crash_loop_ = false;
  bool finished_ = false;  // the live incarnation said it is finished
  std::optional<VirtualTime> watermark_;  // last reported in this incarnation
  std::vector<RecordKey> open_epoch_;  // keys of records not yet checkpointed
};

}  // namespace weir
