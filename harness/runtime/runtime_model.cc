#include "harness/runtime/runtime_model.h"

#include <algorithm>
#include <utility>

namespace weir {
namespace {

// A connector that keeps asking to be called at the same virtual time this many
// times in a row is livelocked: virtual time would never move again.
constexpr std::uint64_t kMaxSameTimeSteps = 100000;

}  // namespace

const char* FailureKindName(ConnectorFailure::Kind kind) {
  switch (kind) {
    case ConnectorFailure::Kind::kNone: return "none";
    case ConnectorFailure::Kind::kStartFailed: return "start failed";
    case ConnectorFailure::Kind::kTimeout: return "timeout";
    case ConnectorFailure::Kind::kExited: return "exited";
    case ConnectorFailure::Kind::kCallFailed: return "call failed";
  }
  return "unknown";
}

RuntimeModel::RuntimeModel(const v1::Scenario& scenario, BrokerModel& broker,
                           BrokerSession& session, ConnectorPort& port, TraceLog& trace,
                           FaultSource& faults)
    : scenario_(scenario),
      broker_(broker),
      session_(session),
      port_(port),
      trace_(trace),
      faults_(faults),
      hard_end_(SaturatingAdd(broker.last_publish_time(), Millis(scenario.runtime().drain_bound_ms()))) {}

template <typename Request, typename Response, typename Method>
ConnectorFailure RuntimeModel::Call(Method method, Request& request, Response* response) {
  request.set_now_ns(now_);
  session_.BeginCall(now_);
  ConnectorFailure failure = (port_.*method)(request, response, session_);
  now_ = std::max(now_, session_.EndCall());
  return failure;
}

void RuntimeModel::TraceFailure(const char* call, const ConnectorFailure& failure) {
  auto& e = trace_.Append(now_);
  switch (failure.kind) {
    case ConnectorFailure::Kind::kTimeout: {
      auto* x = e.mutable_call_timed_out();
      x->set_call(call);
      x->set_bound_wall_ms(scenario_.runtime().call_timeout_wall_ms());
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
    case ConnectorFailure::Kind::kCallFailed:
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

  auto& e = trace_.Append(now_);
  auto* x = e.mutable_opened();
  x->set_restored(latest.has_value());
  if (latest.has_value()) {
    x->set_checkpoint_id(latest->id);
    if (latest->watermark.has_value()) x->set_watermark_ns(*latest->watermark);
  }
  trace_.Commit();

  v1::OpenResponse response;
  if (ConnectorFailure f = Call(&ConnectorPort::Open, request, &response); !f.ok()) {
    TraceFailure("Open", f);
    return false;
  }
  queue_.Push(now_, Event{EventKind::kStep, incarnation_});
  return true;
}

bool RuntimeModel::DoStep() {
  v1::AdvanceRequest request;
  request.set_step(++step_);
  const VirtualTime asked_at = now_;
  v1::AdvanceResponse response;
  if (ConnectorFailure f = Call(&ConnectorPort::Advance, request, &response); !f.ok()) {
    TraceFailure("Advance", f);
    return false;
  }
  const std::uint64_t total = broker_.total_messages();
  std::uint32_t accepted = 0;
  for (const v1::Record& r : response.records()) {
    if (r.message_id() == 0 || r.message_id() > total) {
      TraceProtocolError("Advance", "record names message " + std::to_string(r.message_id()) +
                                        ", which the broker never published");
      continue;
    }
    open_epoch_.push_back(r.message_id());
    ++accepted;
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_emitted();
    x->set_message_id(r.message_id());
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
  trace_.Commit();

  if (!finished_) {
    same_time_steps_ = resume_at == asked_at ? same_time_steps_ + 1 : 0;
    if (same_time_steps_ >= kMaxSameTimeSteps) {
      TraceProtocolError("Advance", "asked to be called again at the same virtual time " +
                                        std::to_string(kMaxSameTimeSteps) + " times in a row (livelock)");
      return false;
    }
    queue_.Push(resume_at, Event{EventKind::kStep, incarnation_});
  }
  const std::uint64_t every = scenario_.runtime().checkpoint_every_records();
  if (every > 0 && open_epoch_.size() >= every) return DoCheckpointCycle();
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
  std::vector<std::uint64_t> epoch;
  epoch.swap(open_epoch_);
  {
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_checkpoint();
    x->set_checkpoint_id(id);
    x->set_records(static_cast<std::uint32_t>(epoch.size()));
    if (watermark_.has_value()) x->set_watermark_ns(*watermark_);
    x->set_state_bytes(response.state().size());
    trace_.Commit();
  }

  store_.Commit(CommittedCheckpoint{id, std::move(*response.mutable_state()), watermark_}, epoch);
  ++checkpoints_;
  {
    auto& e = trace_.Append(now_);
    e.mutable_committed()->set_checkpoint_id(id);
    trace_.Commit();
  }

  {
    auto& e = trace_.Append(now_);
    e.mutable_commit_notice()->set_checkpoint_id(id);
    trace_.Commit();
  }
  v1::CommittedRequest notice;
  notice.set_checkpoint_id(id);
  v1::CommittedResponse ignored;
  if (ConnectorFailure f = Call(&ConnectorPort::Committed, notice, &ignored); !f.ok()) {
    TraceFailure("Committed", f);
    return false;
  }
  return true;
}

bool RuntimeModel::AllCommitted() const {
  return broker_.all_published() && store_.committed_messages() >= broker_.total_messages();
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
  if (!ok) {
    reason = "connector failed";
    summary.connector_failed = true;
  }
  port_.Kill();
  broker_.AdvanceTo(now_);

  summary.end_reason = reason;
  summary.end_time = now_;
  summary.steps = step_;
  summary.incarnations = incarnation_;
  summary.checkpoints = checkpoints_;
  summary.published = broker_.published();
  summary.committed_messages = store_.committed_messages();
  summary.duplicate_records = store_.duplicate_records();

  auto& e = trace_.Append(now_);
  auto* x = e.mutable_run_ended();
  x->set_reason(reason);
  x->set_published(summary.published);
  x->set_committed_messages(summary.committed_messages);
  trace_.Commit();
  return summary;
}

}  // namespace weir
