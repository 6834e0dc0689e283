#include "harness/runtime/runtime_model.h"

#include <algorithm>
#include <string_view>
#include <utility>

namespace weir {
namespace {

// Crashes in a row without a completed step: the fault rates leave the
// connector no room to work, and virtual time would never move again.
constexpr std::uint64_t kMaxCrashesWithoutStep = 1000;

// Names of crash points in the trace (crashed.point).
const char* CrashPointName(v1::CrashPoint point) {
  switch (point) {
    case v1::BEFORE_STEP: return "before-step";
    case v1::IN_STEP_AFTER_BROKER_CALL: return "in-step-after-broker-call";
    case v1::AFTER_CHECKPOINT_BEFORE_COMMIT: return "after-checkpoint-before-commit";
    case v1::AFTER_COMMIT_BEFORE_NOTICE: return "after-commit-before-notice";
    case v1::IN_NOTICE_AFTER_ACK: return "in-notice-after-ack";
    case v1::IN_NOTICE_AFTER_BOOKMARK_SAVE: return "in-notice-after-bookmark-save";
    default: return "unspecified";
  }
}

}  // namespace

const char* FailureKindName(ConnectorFailure::Kind kind) {
  switch (kind) {
    case ConnectorFailure::Kind::kNone: return "none";
    case ConnectorFailure::Kind::kStartFailed: return "start failed";
    case ConnectorFailure::Kind::kTimeout: return "timeout";
    case ConnectorFailure::Kind::kExited: return "exited";
    case ConnectorFailure::Kind::kCallFailed: return "call failed";
    case ConnectorFailure::Kind::kConnectorError: return "connector error";
    case ConnectorFailure::Kind::kCrashed: return "crashed at a crash point";
    case ConnectorFailure::Kind::kInterrupted: return "interrupted";
  }
  return "unknown";
}

namespace {
ConnectorFailure NotCarried(const char* call) {
  ConnectorFailure f;
  f.kind = ConnectorFailure::Kind::kCallFailed;
  f.detail = std::string(call) + " is not carried by this connector port (several readers need it)";
  return f;
}
}  // namespace

ConnectorFailure ConnectorPort::Assign(const v1::AssignRequest&, v1::AssignResponse*, BrokerEndpoint&) {
  return NotCarried("Assign");
}
ConnectorFailure ConnectorPort::Revoke(const v1::RevokeRequest&, v1::RevokeResponse*, BrokerEndpoint&) {
  return NotCarried("Revoke");
}
ConnectorFailure ConnectorPort::Cut(const v1::CutRequest&, v1::CutResponse*, BrokerEndpoint&) {
  return NotCarried("Cut");
}

RuntimeModel::RuntimeModel(const v1::Scenario& scenario, BrokerModel& broker,
                           BrokerSession& session, ConnectorPort& port, TraceLog& trace,
                           FaultSource& faults)
    : scenario_(scenario),
      broker_(broker),
      session_(session),
      port_(port),
      gate_(session),
      trace_(trace),
      faults_(faults),
      hard_end_(SaturatingAdd(broker.last_publish_time(), Millis(scenario.runtime().drain_bound_ms()))) {}

template <typename Request, typename Response, typename Method>
ConnectorFailure RuntimeModel::Call(Method method, Request& request, Response* response) {
  request.set_now_ns(now_);
  broker_.AdvanceTo(now_);
  session_.BeginCall(now_);
  ConnectorFailure failure = (port_.*method)(request, response, gate_);
  now_ = std::max(now_, session_.EndCall());
  broker_.AdvanceTo(now_);  // a call that only failed or waited moved the clock, not the broker
  return failure;
}

void RuntimeModel::TraceFailure(const char* call, const ConnectorFailure& failure) {
  // weir is stopping: not the connector's doing, and the run is discarded.
  if (failure.kind == ConnectorFailure::Kind::kInterrupted) return;
  auto& e = trace_.Append(now_);
  switch (failure.kind) {
    case ConnectorFailure::Kind::kTimeout: {
      auto* x = e.mutable_call_timed_out();
      x->set_call(call);
      x->set_bound_wall_ms(std::string_view(call) == "Start"
                               ? scenario_.runtime().start_timeout_wall_ms()
                               : scenario_.runtime().call_timeout_wall_ms());
      break;
    }
    case ConnectorFailure::Kind::kStartFailed:
    case ConnectorFailure::Kind::kExited: {
      auto* x = e.mutable_exited();
      x->set_status(failure.exit_status.empty() ? failure.detail
                                                : failure.detail + " (" + failure.exit_status + ")");
      x->set_stderr_tail(failure.stderr_tail);
      x->set_call(call);
      break;
    }
    case ConnectorFailure::Kind::kConnectorError: {
      auto* x = e.mutable_connector_error();
      x->set_call(call);
      x->set_code(failure.code);
      x->set_detail(failure.detail);
      break;
    }
    case ConnectorFailure::Kind::kCallFailed:
    case ConnectorFailure::Kind::kCrashed:  // without the gate firing: a port bug
    case ConnectorFailure::Kind::kInterrupted:
    case ConnectorFailure::Kind::kNone: {
      auto* x = e.mutable_protocol_error();
      x->set_call(call);
      x->set_detail(failure.detail);
      break;
    }
  }
  trace_.Commit();
}

void RuntimeModel::TraceProtocolError(const char* call, std::string detail) {
  auto& e = trace_.Append(now_);
  auto* x = e.mutable_protocol_error();
  x->set_call(call);
  x->set_detail(std::move(detail));
  trace_.Commit();
}

bool RuntimeModel::StartIncarnation() {
  ++incarnation_;
  trace_.set_incarnation(incarnation_);
  finished_ = false;
  same_time_steps_ = 0;
  open_epoch_.clear();
  if (ConnectorFailure f = port_.Start(incarnation_); !f.ok()) {
    TraceFailure("Start", f);
    return false;
  }
  v1::OpenRequest request;
  request.set_incarnation(incarnation_);
  request.set_redelivery_horizon_ns(Millis(scenario_.broker().redelivery_horizon_ms()));
  const auto& latest = store_.latest();
  if (latest.has_value()) {
    request.set_restore(true);
    request.set_checkpoint_id(latest->id);
    request.set_checkpoint_state(latest->state);
  }
  watermark_ = latest.has_value() ? latest->watermark : std::nullopt;
  const bool log = broker_.shape() == v1::LOG;
  if (log) {
    // The reader holds every partition, each from its committed resume point
    // (or from offset 0), and every partition added later.
    broker_.AdvanceTo(now_);
    const std::uint32_t n = broker_.partition_count();
    std::size_t r = 0;
    for (std::uint32_t p = 0; p < n; ++p) {
      std::uint64_t start = 0;
      if (latest.has_value()) {
        const auto& points = latest->resume_points;
        while (r < points.size() && points[r].partition < p) ++r;
        if (r < points.size() && points[r].partition == p) start = points[r].next_offset;
      }
      auto* span = request.add_spans();
      span->set_partition(p);
      span->set_start_offset(start);
    }
    request.set_new_partitions_held(true);
  }
  broker_.OnIncarnationStart();

  auto& e = trace_.Append(now_);
  auto* x = e.mutable_opened();
  x->set_restored(latest.has_value());
  if (latest.has_value()) {
    x->set_checkpoint_id(latest->id);
    if (latest->watermark.has_value()) x->set_watermark_ns(*latest->watermark);
  }
  for (const v1::Span& span : request.spans()) {
    auto* held = x->add_spans();
    held->set_partition(span.partition());
    held->set_start_offset(span.start_offset());
    if (span.has_end_offset()) held->set_end_offset(span.end_offset());
  }
  if (log) x->set_new_partitions_held(true);
  trace_.Commit();

  v1::OpenResponse response;
  if (ConnectorFailure f = Call(&ConnectorPort::Open, request, &response); !f.ok()) {
    TraceFailure("Open", f);
    return false;
  }
  const v1::SourceShape reads =
      response.shape() == v1::SOURCE_SHAPE_UNSPECIFIED ? v1::QUEUE : response.shape();
  if (reads != broker_.shape()) {
    TraceProtocolError("Open", std::string("the connector reads a ") +
                                   (reads == v1::LOG ? "log" : "queue") +
                                   ", but this scenario's broker is a " +
                                   (log ? "log" : "queue"));
    return false;
  }
  queue_.Push(now_, Event{EventKind::kStep, incarnation_});
  return true;
}

bool RuntimeModel::CrashAndRestart(const char* point) {
  port_.Kill();
  ++crashes_;
  {
    auto& e = trace_.Append(now_);
    e.mutable_crashed()->set_point(point);
    trace_.Commit();
  }
  if (++crashes_since_step_ > kMaxCrashesWithoutStep) {
    crash_loop_ = true;
    return false;
  }
  return StartIncarnation();  // clears the open epoch, opens from the store's latest
}

bool RuntimeModel::DoStep() {
  const std::uint64_t k = ++step_;
  std::optional<v1::Crash> crash;
  if (auto d = faults_.Decide(v1::STEP, k, v1::FaultDecision::kCrash, now_,
                              [&](v1::FaultDecision* out) {
                                if (!faults_.Chance("crash", k, faults_.config().crash_rate())) {
                                  return false;
                                }
                                out->mutable_crash()->set_point(v1::BEFORE_STEP);
                                return true;
                              })) {
    crash = d->crash();
  }
  if (crash.has_value() && crash->point() == v1::BEFORE_STEP) {
    return CrashAndRestart(CrashPointName(v1::BEFORE_STEP));
  }
  const bool in_step = crash.has_value() && crash->point() == v1::IN_STEP_AFTER_BROKER_CALL;
  if (in_step) gate_.Arm(CrashGate::Count::kAnyCall, crash->after_calls());

  v1::AdvanceRequest request;
  request.set_step(k);
  const VirtualTime asked_at = now_;
  v1::AdvanceResponse response;
  ConnectorFailure f = Call(&ConnectorPort::Advance, request, &response);
  const bool fired = gate_.fired();
  gate_.Disarm();
  // The gate decides, not the failure kind: a port that let the call finish
  // anyway still gets its incarnation killed and its answer discarded.
  if (fired) return CrashAndRestart(CrashPointName(v1::IN_STEP_AFTER_BROKER_CALL));
  if (!f.ok()) {
    TraceFailure("Advance", f);
    return false;
  }
  crashes_since_step_ = 0;
  std::uint32_t accepted = 0;
  std::string why;
  // Gaps first: a reader reports what it skips before the records after it.
  for (const v1::Gap& gap : response.gaps()) {
    v1::Record last;
    last.set_partition(gap.partition());
    last.set_offset(gap.to_offset() - 1);
    if (gap.from_offset() >= gap.to_offset() || !broker_.Identify(last, &why).has_value()) {
      TraceProtocolError("Advance", "gap [" + std::to_string(gap.from_offset()) + ", " +
                                        std::to_string(gap.to_offset()) + ") of partition " +
                                        std::to_string(gap.partition()) +
                                        " is empty or names offsets never appended");
      continue;
    }
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_gap_reported();
    x->set_partition(gap.partition());
    x->set_from_offset(gap.from_offset());
    x->set_to_offset(gap.to_offset());
    x->set_step(step_);
    trace_.Commit();
  }
  for (const v1::Record& r : response.records()) {
    const std::optional<RecordKey> key = broker_.Identify(r, &why);
    if (!key.has_value()) {
      TraceProtocolError("Advance", "record " + why);
      continue;
    }
    open_epoch_.push_back(*key);
    ++accepted;
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_emitted();
    if (r.has_offset()) {
      x->set_partition(r.partition());
      x->set_offset(r.offset());
    } else {
      x->set_message_id(r.message_id());
    }
    x->set_event_time_ns(r.event_time_ns());
    x->set_step(step_);
    trace_.Commit();
  }
  if (response.has_watermark_ns()) watermark_ = response.watermark_ns();

  VirtualTime resume_at = now_;
  if (response.next_case() == v1::AdvanceResponse::kResumeAtNs) {
    resume_at = response.resume_at_ns();
    if (resume_at < asked_at) {
      TraceProtocolError("Advance", "resume_at " + FormatTime(resume_at) +
                                        " is before the step's now " + FormatTime(asked_at));
    }
    resume_at = std::max(resume_at, now_);
  } else if (response.next_case() == v1::AdvanceResponse::kFinished) {
    finished_ = response.finished();
  }

  auto& e = trace_.Append(now_);
  auto* x = e.mutable_stepped();
  x->set_step(step_);
  x->set_records(accepted);
  if (response.has_watermark_ns()) x->set_watermark_ns(response.watermark_ns());
  x->set_resume_at_ns(finished_ ? kNever : resume_at);
  x->set_finished(finished_);
  x->set_broker_idle(broker_.IdleAt(now_));  // for the oracle's watermark-stall rule
  trace_.Commit();

  if (!finished_) {
    if (resume_at != asked_at) {
      same_time_steps_ = 0;
    } else if (Livelocked()) {
      return false;
    }
    queue_.Push(resume_at, Event{EventKind::kStep, incarnation_});
  }
  const std::uint64_t every = scenario_.runtime().checkpoint_every_records();
  if (every > 0 && open_epoch_.size() >= every) return DoCheckpointCycle();
  return true;
}

bool RuntimeModel::Livelocked() {
  const auto& r = scenario_.runtime();
  const std::uint64_t max_steps = r.max_same_time_steps() > 0 ? r.max_same_time_steps() : kDefaultMaxSameTimeSteps;
  const std::int64_t max_wall_ms = r.max_same_time_wall_ms() > 0 ? r.max_same_time_wall_ms() : kDefaultMaxSameTimeWallMs;
  const std::int64_t wall_now = wall_clock_ms_ ? wall_clock_ms_() : 0;
  if (++same_time_steps_ == 1) same_time_since_wall_ms_ = wall_now;
  const std::int64_t wall_ms = wall_now - same_time_since_wall_ms_;
  const bool by_wall = wall_clock_ms_ && wall_ms > max_wall_ms;
  if (same_time_steps_ <= max_steps && !by_wall) return false;
  auto& e = trace_.Append(now_);
  auto* x = e.mutable_livelock();
  x->set_steps(same_time_steps_);
  // The wall time reaches the trace only when it decided: otherwise the trace
  // would depend on the machine's speed.
  x->set_wall_ms(by_wall ? wall_ms : 0);
  x->set_by_wall_time(by_wall);
  x->set_max_steps(max_steps);
  x->set_max_wall_ms(max_wall_ms);
  trace_.Commit();
  return true;
}

void RuntimeModel::ScheduleCheckpointTimer() {
  ++checkpoint_timer_generation_;
  const VirtualDuration interval = Millis(scenario_.runtime().checkpoint_interval_ms());
  if (interval > 0) {
    queue_.Push(SaturatingAdd(now_, interval),
                Event{EventKind::kCheckpointDue, checkpoint_timer_generation_});
  }
}

bool RuntimeModel::DoCheckpointCycle() {
  const std::uint64_t id = next_checkpoint_id_++;
  ScheduleCheckpointTimer();

  v1::CheckpointRequest request;
  request.set_checkpoint_id(id);
  v1::CheckpointResponse response;
  if (ConnectorFailure f = Call(&ConnectorPort::Checkpoint, request, &response); !f.ok()) {
    TraceFailure("Checkpoint", f);
    return false;
  }
  std::vector<RecordKey> epoch;
  epoch.swap(open_epoch_);
  std::vector<ResumePoint> resume_points;
  for (const v1::ResumePoint& r : response.resume_points()) {
    resume_points.push_back(ResumePoint{r.partition(), r.next_offset()});
  }
  std::stable_sort(resume_points.begin(), resume_points.end(),
                   [](const ResumePoint& a, const ResumePoint& b) { return a.partition < b.partition; });
  {
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_checkpoint();
    x->set_checkpoint_id(id);
    x->set_records(static_cast<std::uint32_t>(epoch.size()));
    if (watermark_.has_value()) x->set_watermark_ns(*watermark_);
    x->set_state_bytes(response.state().size());
    for (const ResumePoint& r : resume_points) {
      auto* y = x->add_resume_points();
      y->set_partition(r.partition);
      y->set_next_offset(r.next_offset);
    }
    trace_.Commit();
  }

  // Crash points of this checkpoint: one drawn out of the three, by its own
  // streams so that turning commit failures on or off does not move them.
  std::optional<v1::Crash> crash;
  if (auto d = faults_.Decide(
          v1::CHECKPOINT, id, v1::FaultDecision::kCrash, now_, [&](v1::FaultDecision* out) {
            if (!faults_.Chance("checkpoint_crash", id, faults_.config().checkpoint_crash_rate())) {
              return false;
            }
            // The notice acknowledges with acks (queue) or bookmark saves (log).
            const v1::CrashPoint kPoints[] = {v1::AFTER_CHECKPOINT_BEFORE_COMMIT,
                                              v1::AFTER_COMMIT_BEFORE_NOTICE,
                                              broker_.shape() == v1::LOG
                                                  ? v1::IN_NOTICE_AFTER_BOOKMARK_SAVE
                                                  : v1::IN_NOTICE_AFTER_ACK};
            auto* c = out->mutable_crash();
            c->set_point(kPoints[faults_.Int("checkpoint_crash.point", id, 0, 2)]);
            if (c->point() == kPoints[2]) c->set_after_calls(1);
            return true;
          })) {
    crash = d->crash();
  }
  const auto crash_at = [&](v1::CrashPoint p) { return crash.has_value() && crash->point() == p; };
  // The taken checkpoint is dropped with the epoch: it never reaches the store.
  if (crash_at(v1::AFTER_CHECKPOINT_BEFORE_COMMIT)) {
    return CrashAndRestart(CrashPointName(v1::AFTER_CHECKPOINT_BEFORE_COMMIT));
  }

  const auto failure = faults_.Decide(
      v1::CHECKPOINT, id, v1::FaultDecision::kCommitFailure, now_, [&](v1::FaultDecision* out) {
        if (!faults_.Chance("commit_failure", id, faults_.config().commit_failure_rate())) {
          return false;
        }
        out->set_commit_failure(true);
        return true;
      });
  if (failure.has_value() && failure->commit_failure()) {
    // The epoch and checkpoint are discarded and no notice is sent; the
    // connector cannot know which of its epochs are safe, so it restarts from
    // the last committed checkpoint (leases expire, the broker redelivers).
    auto& e = trace_.Append(now_);
    e.mutable_commit_failed()->set_checkpoint_id(id);
    trace_.Commit();
    return CrashAndRestart("commit-failed");
  }

  store_.Commit(CommittedCheckpoint{id, std::move(*response.mutable_state()), watermark_,
                                    std::move(resume_points)},
                epoch);
  ++checkpoints_;
  {
    auto& e = trace_.Append(now_);
    e.mutable_committed()->set_checkpoint_id(id);
    trace_.Commit();
  }
  // Committed but never noticed: the notice is not retried; leases expire.
  if (crash_at(v1::AFTER_COMMIT_BEFORE_NOTICE)) {
    return CrashAndRestart(CrashPointName(v1::AFTER_COMMIT_BEFORE_NOTICE));
  }

  {
    auto& e = trace_.Append(now_);
    e.mutable_commit_notice()->set_checkpoint_id(id);
    trace_.Commit();
  }
  const bool notice_crash =
      crash_at(v1::IN_NOTICE_AFTER_ACK) || crash_at(v1::IN_NOTICE_AFTER_BOOKMARK_SAVE);
  if (notice_crash) gate_.Arm(CrashGate::Count::kAckCalls, crash->after_calls());
  v1::CommittedRequest notice;
  notice.set_checkpoint_id(id);
  v1::CommittedResponse ignored;
  ConnectorFailure f = Call(&ConnectorPort::Committed, notice, &ignored);
  const bool fired = gate_.fired();
  gate_.Disarm();
  if (fired) return CrashAndRestart(CrashPointName(crash->point()));
  if (!f.ok()) {
    TraceFailure("Committed", f);
    return false;
  }
  return true;
}

bool RuntimeModel::AllCommitted() const {
  // A log reader's emitted records wait in the open epoch even when retention
  // has since deleted them from the log: the run goes on until they commit.
  return broker_.Drained(store_) && (broker_.shape() != v1::LOG || open_epoch_.empty());
}

RunSummary RuntimeModel::Run() {
  RunSummary summary;
  std::string reason;
  bool ok = StartIncarnation();
  if (ok) ScheduleCheckpointTimer();

  while (ok && reason.empty()) {
    if (AllCommitted()) {
      reason = "all messages committed";
      break;
    }
    if (queue_.empty()) {
      reason = "nothing left to schedule";
      break;
    }
    if (queue_.NextTime() > hard_end_) {
      now_ = std::max(now_, hard_end_);
      reason = "drain bound reached";
      break;
    }
    const auto [t, event] = queue_.Pop();
    now_ = std::max(now_, t);
    // Publishes and lease expiries up to now reach the trace before anything
    // the runtime does at now: trace order is time order.
    broker_.AdvanceTo(now_);
    switch (event.kind) {
      case EventKind::kStep:
        if (event.generation != incarnation_ || finished_) continue;
        ok = DoStep();
        break;
      case EventKind::kCheckpointDue:
        if (event.generation != checkpoint_timer_generation_) continue;
        if (finished_ && open_epoch_.empty() && store_.latest().has_value()) {
          reason = "connector finished";
          continue;
        }
        ok = DoCheckpointCycle();
        break;
    }
  }
  if (!ok && crash_loop_) {
    reason = "crash loop: " + std::to_string(kMaxCrashesWithoutStep) +
             " crashes without a completed step";
  } else if (!ok) {
    reason = "connector failed";
    summary.connector_failed = true;
  }
  port_.Kill();
  broker_.AdvanceTo(now_);

  summary.end_reason = reason;
  summary.end_time = now_;
  summary.steps = step_;
  summary.incarnations = incarnation_;
  summary.crashes = crashes_;
  summary.checkpoints = checkpoints_;
  summary.published = broker_.published();
  summary.committed_messages = store_.committed_messages();
  summary.duplicate_records = store_.duplicate_records();
  summary.broker_calls = session_.calls_total();
  summary.max_broker_calls_in_one_call = session_.max_calls_in_window();
  summary.ignored_receipts = broker_.ignored_receipts();

  auto& e = trace_.Append(now_);
  auto* x = e.mutable_run_ended();
  x->set_reason(reason);
  x->set_published(summary.published);
  x->set_committed_messages(summary.committed_messages);
  trace_.Commit();
  return summary;
}

}  // namespace weir
