#include "harness/runtime/runtime_model.h"

#include <algorithm>
#include <numeric>
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
    case v1::IN_CUT: return "in-cut";
    case v1::AFTER_CUT: return "after-cut";
    case v1::IN_REVOKE: return "in-revoke";
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

RuntimeModel::RuntimeModel(const v1::Scenario& scenario, BrokerModel& broker, BrokerSession& session,
                           ConnectorPort& port, TraceLog& trace, FaultSource& faults)
    : RuntimeModel(scenario, broker, session, std::vector<ConnectorPort*>{&port}, trace, faults) {}

RuntimeModel::RuntimeModel(const v1::Scenario& scenario, BrokerModel& broker, BrokerSession& session,
                           std::vector<ConnectorPort*> ports, TraceLog& trace, FaultSource& faults)
    : scenario_(scenario),
      broker_(broker),
      session_(session),
      gate_(session),
      trace_(trace),
      faults_(faults),
      hard_end_(SaturatingAdd(broker.last_publish_time(), Millis(scenario.runtime().drain_bound_ms()))) {
  readers_.resize(ports.size());
  for (std::size_t i = 0; i < ports.size(); ++i) readers_[i].port = ports[i];
}

void RuntimeModel::Select(std::uint32_t r) {
  selected_ = r;
  trace_.set_reader(r);
  trace_.set_incarnation(readers_[r].incarnation);
}

template <typename Request, typename Response, typename Method>
ConnectorFailure RuntimeModel::Call(Method method, Request& request, Response* response) {
  request.set_now_ns(now_);
  broker_.AdvanceTo(now_);
  session_.BeginCall(now_);
  ++connector_calls_;
  ConnectorFailure failure = (readers_[selected_].port->*method)(request, response, gate_);
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
      x->set_bound_wall_ms(std::string_view(call) == "Start" ? scenario_.runtime().start_timeout_wall_ms()
                                                             : scenario_.runtime().call_timeout_wall_ms());
      break;
    }
    case ConnectorFailure::Kind::kStartFailed:
    case ConnectorFailure::Kind::kExited: {
      auto* x = e.mutable_exited();
      x->set_status(failure.exit_status.empty() ? failure.detail : failure.detail + " (" + failure.exit_status + ")");
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

std::vector<std::uint32_t> RuntimeModel::LiveReaders() const {
  std::vector<std::uint32_t> live;
  for (std::uint32_t r = 0; r < readers_.size(); ++r) {
    if (readers_[r].live) live.push_back(r);
  }
  return live;
}

void RuntimeModel::PushStep(VirtualTime t, std::uint32_t r) {
  // One reader: FIFO, as ever. Several: readers due at one time in a seeded
  // order (rank 0 is left to the checkpoint timer, which goes first).
  const std::uint64_t rank =
      many() ? 1 + static_cast<std::uint64_t>(faults_.Int("reader_order", ++order_draws_, 0, 1 << 30)) : 0;
  queue_.Push(t, Event{EventKind::kStep, readers_[r].incarnation, r}, rank);
}

namespace {
void FillSpan(v1::SpanHeld* out, std::uint32_t p, std::uint64_t start, std::optional<std::uint64_t> end) {
  out->set_partition(p);
  out->set_start_offset(start);
  if (end.has_value()) out->set_end_offset(*end);
}
}  // namespace

bool RuntimeModel::StartIncarnation(std::uint32_t r) {
  Reader& reader = R(r);
  reader.incarnation = ++incarnations_;
  reader.live = true;
  Select(r);
  reader.finished = false;
  reader.same_time_steps = 0;
  reader.open_epoch.clear();
  if (ConnectorFailure f = reader.port->Start(reader.incarnation); !f.ok()) {
    TraceFailure("Start", f);
    return false;
  }
  v1::OpenRequest request;
  request.set_incarnation(reader.incarnation);
  request.set_redelivery_horizon_ns(Millis(scenario_.broker().redelivery_horizon_ms()));
  if (many()) {
    request.set_reader(r);
    request.set_readers(static_cast<std::uint32_t>(readers_.size()));
  }
  const auto& latest = reader.committed;
  if (latest.has_value()) {
    request.set_restore(true);
    request.set_checkpoint_id(latest->id);
    request.set_checkpoint_state(latest->state);
  }
  reader.watermark = latest.has_value() ? latest->watermark : std::nullopt;
  if (log() && !many()) {
    // The reader holds every partition, each from its committed resume point
    // (or from offset 0), and every partition added later.
    broker_.AdvanceTo(now_);
    const std::uint32_t n = broker_.partition_count();
    std::size_t i = 0;
    for (std::uint32_t p = 0; p < n; ++p) {
      std::uint64_t start = 0;
      if (latest.has_value()) {
        const auto& points = latest->resume_points;
        while (i < points.size() && points[i].partition < p) ++i;
        if (i < points.size() && points[i].partition == p) start = points[i].next_offset;
      }
      auto* span = request.add_spans();
      span->set_partition(p);
      span->set_start_offset(start);
    }
    request.set_new_partitions_held(true);
  } else if (log()) {
    // Several readers: the spans this one holds, each from its committed
    // resume point; partitions added later come by Assign.
    for (auto& [p, span] : reader.spans) {
      span.start = span.committed_next;
      span.emitted_next = span.committed_next;
      auto* out = request.add_spans();
      out->set_partition(p);
      out->set_start_offset(span.start);
      if (span.end.has_value()) out->set_end_offset(*span.end);
    }
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
    FillSpan(x->add_spans(), span.partition(), span.start_offset(),
             span.has_end_offset() ? std::optional<std::uint64_t>(span.end_offset()) : std::nullopt);
  }
  if (request.new_partitions_held()) x->set_new_partitions_held(true);
  trace_.Commit();

  v1::OpenResponse response;
  if (ConnectorFailure f = Call(&ConnectorPort::Open, request, &response); !f.ok()) {
    TraceFailure("Open", f);
    return false;
  }
  const v1::SourceShape reads = response.shape() == v1::SOURCE_SHAPE_UNSPECIFIED ? v1::QUEUE : response.shape();
  if (reads != broker_.shape()) {
    TraceProtocolError("Open", std::string("the connector reads a ") + (reads == v1::LOG ? "log" : "queue") +
                                   ", but this scenario's broker is a " + (log() ? "log" : "queue"));
    return false;
  }
  PushStep(now_, r);
  return true;
}

bool RuntimeModel::CrashAndRestart(std::uint32_t r, const char* point) {
  Select(r);
  R(r).port->Kill();
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
  return StartIncarnation(r);  // clears its open epoch, opens from its last committed part
}

bool RuntimeModel::CrashAndRestartAll(const char* point) {
  for (std::uint32_t r : LiveReaders()) {
    if (!CrashAndRestart(r, point)) return false;
  }
  return true;
}

void RuntimeModel::AssignInitialSpans() {
  if (!log() || !many()) return;
  broker_.AdvanceTo(now_);
  const std::vector<std::uint32_t> live = LiveReaders();
  known_partitions_ = broker_.partition_count();
  for (std::uint32_t p = 0; p < known_partitions_; ++p) {
    R(live[p % live.size()]).spans[p] = HeldSpan{};
  }
}

bool RuntimeModel::SendAssign(std::uint32_t r, std::vector<std::pair<std::uint32_t, HeldSpan>> spans, const char* why) {
  if (spans.empty()) return true;
  Select(r);
  v1::AssignRequest request;
  {
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_assigned();
    x->set_why(why);
    for (auto& [p, span] : spans) {
      span.emitted_next = span.committed_next;
      span.start = span.committed_next;
      FillSpan(x->add_spans(), p, span.start, span.end);
      auto* out = request.add_spans();
      out->set_partition(p);
      out->set_start_offset(span.start);
      if (span.end.has_value()) out->set_end_offset(*span.end);
      R(r).spans[p] = span;
    }
    trace_.Commit();
  }
  v1::AssignResponse response;
  if (ConnectorFailure f = Call(&ConnectorPort::Assign, request, &response); !f.ok()) {
    TraceFailure("Assign", f);
    return false;
  }
  return true;
}

bool RuntimeModel::SendRevoke(std::uint32_t r, const std::vector<std::uint32_t>& partitions, const char* why,
                              bool crash_in_revoke) {
  if (partitions.empty()) return true;
  Select(r);
  v1::RevokeRequest request;
  {
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_revoked();
    x->set_why(why);
    for (std::uint32_t p : partitions) {
      auto it = R(r).spans.find(p);
      if (it == R(r).spans.end()) continue;
      FillSpan(x->add_spans(), p, it->second.start, it->second.end);
      request.add_partitions(p);
      R(r).spans.erase(it);
    }
    trace_.Commit();
  }
  v1::RevokeResponse response;
  ConnectorFailure f = Call(&ConnectorPort::Revoke, request, &response);
  // Killed inside Revoke: the revocation stands (the spans were committed up
  // to their resume points); the reader restarts with what it has left.
  if (crash_in_revoke) return CrashAndRestart(r, CrashPointName(v1::IN_REVOKE));
  if (!f.ok()) {
    TraceFailure("Revoke", f);
    return false;
  }
  return true;
}

bool RuntimeModel::AssignNewPartitions() {
  if (!log() || !many()) return true;
  const std::uint32_t n = broker_.partition_count();
  while (known_partitions_ < n) {
    const std::uint32_t p = known_partitions_++;
    const std::vector<std::uint32_t> live = LiveReaders();
    if (live.empty()) return true;
    if (!SendAssign(live[p % live.size()], {{p, HeldSpan{}}}, "new-partition")) return false;
  }
  return true;
}

std::optional<std::uint32_t> RuntimeModel::PickReceiver(std::uint32_t p, std::uint32_t not_r, std::string_view stream,
                                                        std::uint64_t k) {
  std::vector<std::uint32_t> can;
  for (std::uint32_t r : LiveReaders()) {
    if (r != not_r && !R(r).spans.contains(p)) can.push_back(r);
  }
  if (can.empty()) return std::nullopt;
  return can[faults_.Int(stream, k, 0, static_cast<std::int64_t>(can.size()) - 1)];
}

bool RuntimeModel::MaybeCut(std::uint32_t r, std::uint64_t k, bool* crashed) {
  *crashed = false;
  if (!log() || !many()) return true;
  const auto& cfg = scenario_.readers();
  // The spans of r with offsets left (as far as the log has appended).
  const auto remaining_end = [&](std::uint32_t p, const HeldSpan& s) {
    return s.end.has_value() ? *s.end : std::max(broker_.partition_end(p), s.emitted_next);
  };
  auto d = faults_.Decide(v1::STEP, k, v1::FaultDecision::kCut, now_, [&](v1::FaultDecision* out) {
    if (!faults_.Chance("cut", k, cfg.cut_rate())) return false;
    std::vector<std::uint32_t> cuttable;
    for (const auto& [p, s] : R(r).spans) {
      if (remaining_end(p, s) > s.emitted_next || !s.end.has_value()) cuttable.push_back(p);
    }
    if (cuttable.empty()) return false;
    const std::uint32_t p =
        cuttable[faults_.Int("cut.partition", k, 0, static_cast<std::int64_t>(cuttable.size()) - 1)];
    const auto to = PickReceiver(p, r, "cut.to", k);
    if (!to.has_value()) return false;
    auto* c = out->mutable_cut();
    c->set_partition(p);
    c->set_at_ppm(static_cast<std::uint32_t>(faults_.Int("cut.at", k, 100000, 900000)));
    c->set_to_reader(*to);
    if (faults_.Chance("cut_crash", k, cfg.cut_crash_rate())) {
      c->set_crash(faults_.Int("cut_crash.point", k, 0, 1) == 0 ? v1::IN_CUT : v1::AFTER_CUT);
    }
    return true;
  });
  if (!d.has_value()) return true;
  const v1::Cut& cut = d->cut();
  auto it = R(r).spans.find(cut.partition());
  // A plan's cut that no longer fits the run (shrinking moved things) does nothing.
  if (it == R(r).spans.end() || cut.to_reader() >= readers_.size() || cut.to_reader() == r ||
      !R(cut.to_reader()).live || R(cut.to_reader()).spans.contains(cut.partition())) {
    return true;
  }
  const std::uint32_t p = cut.partition();
  const HeldSpan held = it->second;
  const std::uint64_t from = held.emitted_next;
  const std::uint64_t end = remaining_end(p, held);
  const std::uint64_t at =
      from + static_cast<std::uint64_t>((static_cast<unsigned __int128>(end > from ? end - from : 0) * cut.at_ppm()) /
                                        1000000);
  Select(r);
  v1::CutRequest request;
  request.set_partition(p);
  request.set_at_offset(at);
  v1::CutResponse response;
  ConnectorFailure f = Call(&ConnectorPort::Cut, request, &response);
  if (cut.crash() == v1::IN_CUT) {
    *crashed = true;  // the answer is never used: nothing changes hands
    return CrashAndRestart(r, CrashPointName(v1::IN_CUT));
  }
  if (!f.ok()) {
    TraceFailure("Cut", f);
    return false;
  }
  const v1::Span& h = response.head();
  const bool has_tail = response.has_tail();
  const v1::Span& t = response.tail();
  std::string bad;
  if (h.partition() != p || (has_tail && t.partition() != p)) {
    bad = "names another partition";
  } else if (has_tail && (!h.has_end_offset() || h.end_offset() < h.start_offset() ||
                          (t.has_end_offset() && t.end_offset() < t.start_offset()))) {
    bad = "has a head without an end, or a span that ends before it starts";
  } else if (has_tail && (held.end.has_value() != t.has_end_offset())) {
    bad = held.end.has_value() ? "gives an open tail of a closed span" : "gives a closed tail of an open span";
  }
  if (!bad.empty()) {
    TraceProtocolError("Cut",
                       "the answer to a cut of partition " + std::to_string(p) + " " + bad + "; nothing changes hands");
    return true;
  }
  {
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_cut();
    FillSpan(x->mutable_held(), p, held.start, held.end);
    x->set_at_offset(at);
    FillSpan(x->mutable_head(), p, h.start_offset(),
             h.has_end_offset() ? std::optional<std::uint64_t>(h.end_offset()) : std::nullopt);
    if (has_tail) {
      FillSpan(x->mutable_tail(), p, t.start_offset(),
               t.has_end_offset() ? std::optional<std::uint64_t>(t.end_offset()) : std::nullopt);
    }
    x->set_to_reader(cut.to_reader());
    trace_.Commit();
  }
  if (has_tail) {
    ++cuts_;
    it->second.end = h.end_offset();  // the reader keeps [start, head end)
    HeldSpan tail;
    tail.committed_next = t.start_offset();
    if (t.has_end_offset()) tail.end = t.end_offset();
    if (!SendAssign(cut.to_reader(), {{p, tail}}, "cut")) return false;
  }
  if (cut.crash() == v1::AFTER_CUT) {
    *crashed = true;
    return CrashAndRestart(r, CrashPointName(v1::AFTER_CUT));
  }
  return true;
}

bool RuntimeModel::MaybeRebalance(std::uint64_t id) {
  if (!many()) return true;
  const auto& cfg = scenario_.readers();
  if (log()) {
    // A closed span committed to its end is done: released, so that its
    // partition can take a tail again.
    for (std::uint32_t r : LiveReaders()) {
      std::vector<std::uint32_t> done;
      for (const auto& [p, span] : R(r).spans) {
        if (span.end.has_value() && span.committed_next >= *span.end) done.push_back(p);
      }
      if (!SendRevoke(r, done, "done", false)) return false;
    }
    auto d = faults_.Decide(v1::CHECKPOINT, id, v1::FaultDecision::kMove, now_, [&](v1::FaultDecision* out) {
      if (!faults_.Chance("move", id, cfg.move_rate())) return false;
      std::vector<std::pair<std::uint32_t, std::uint32_t>> held;  // (reader, partition)
      for (std::uint32_t r : LiveReaders()) {
        for (const auto& [p, s] : R(r).spans) held.emplace_back(r, p);
      }
      if (held.empty()) return false;
      const auto [from, p] = held[faults_.Int("move.span", id, 0, static_cast<std::int64_t>(held.size()) - 1)];
      const auto to = PickReceiver(p, from, "move.to", id);
      if (!to.has_value()) return false;
      auto* m = out->mutable_move();
      m->set_partition(p);
      m->set_from_reader(from);
      m->set_to_reader(*to);
      m->set_crash_in_revoke(faults_.Chance("move_crash", id, cfg.move_crash_rate()));
      return true;
    });
    if (d.has_value()) {
      const v1::Move& m = d->move();
      const std::uint32_t p = m.partition();
      if (m.from_reader() < readers_.size() && m.to_reader() < readers_.size() && m.from_reader() != m.to_reader() &&
          R(m.from_reader()).live && R(m.to_reader()).live && R(m.from_reader()).spans.contains(p) &&
          !R(m.to_reader()).spans.contains(p)) {
        const HeldSpan span = R(m.from_reader()).spans.at(p);
        ++moves_;
        if (!SendRevoke(m.from_reader(), {p}, "move", m.crash_in_revoke())) return false;
        if (!SendAssign(m.to_reader(), {{p, span}}, "move")) return false;
      }
    }
  }
  auto d = faults_.Decide(v1::CHECKPOINT, id, v1::FaultDecision::kMembership, now_, [&](v1::FaultDecision* out) {
    if (!faults_.Chance("membership", id, cfg.membership_rate())) return false;
    const std::vector<std::uint32_t> live = LiveReaders();
    std::vector<std::uint32_t> out_now;
    for (std::uint32_t r = 0; r < readers_.size(); ++r) {
      if (!R(r).live) out_now.push_back(r);
    }
    const bool join = !out_now.empty() && (live.size() <= 1 || faults_.Int("membership.kind", id, 0, 1) == 0);
    if (!join && live.size() <= 1) return false;
    const auto& pool = join ? out_now : live;
    auto* m = out->mutable_membership();
    m->set_reader(pool[faults_.Int("membership.reader", id, 0, static_cast<std::int64_t>(pool.size()) - 1)]);
    m->set_joins(join);
    return true;
  });
  if (!d.has_value() || d->membership().reader() >= readers_.size()) return true;
  const std::uint32_t who = d->membership().reader();
  if (d->membership().joins()) {
    if (R(who).live) return true;
    ++joins_;
    R(who).committed.reset();  // a reader that joins starts fresh
    R(who).spans.clear();
    if (!StartIncarnation(who)) return false;
    {
      auto& e = trace_.Append(now_);
      e.mutable_reader_joined();
      trace_.Commit();
    }
    if (!log()) return true;
    // It takes spans from the readers holding the most, down to a fair share.
    const std::vector<std::uint32_t> live = LiveReaders();
    std::size_t total = 0;
    for (std::uint32_t r : live) total += R(r).spans.size();
    const std::size_t share = total / live.size();
    while (R(who).spans.size() < share) {
      std::uint32_t richest = who;
      for (std::uint32_t r : live) {
        if (r != who && R(r).spans.size() > R(richest).spans.size()) richest = r;
      }
      if (richest == who || R(richest).spans.size() <= share) break;
      // Its last span of a partition the joiner does not hold.
      std::optional<std::uint32_t> p;
      for (auto it = R(richest).spans.rbegin(); it != R(richest).spans.rend(); ++it) {
        if (!R(who).spans.contains(it->first)) {
          p = it->first;
          break;
        }
      }
      if (!p.has_value()) break;
      const HeldSpan span = R(richest).spans.at(*p);
      if (!SendRevoke(richest, {*p}, "join", false)) return false;
      if (!SendAssign(who, {{*p, span}}, "join")) return false;
    }
    return true;
  }
  if (!R(who).live || LiveReaders().size() <= 1) return true;
  // Leaving: every span must find a reader that holds none of its partition.
  std::vector<std::pair<std::uint32_t, std::uint32_t>> to;  // (partition, receiver)
  std::uint64_t salt = 0;
  for (const auto& [p, s] : R(who).spans) {
    auto receiver = PickReceiver(p, who, "leave.to", id * 1024 + salt++);
    if (!receiver.has_value()) return true;  // nowhere to put it: it stays
    to.emplace_back(p, *receiver);
  }
  ++leaves_;
  std::vector<std::pair<std::uint32_t, HeldSpan>> spans(R(who).spans.begin(), R(who).spans.end());
  std::vector<std::uint32_t> partitions;
  for (const auto& [p, s] : spans) partitions.push_back(p);
  if (!SendRevoke(who, partitions, "leave", false)) return false;
  Select(who);
  R(who).port->Kill();
  R(who).live = false;
  R(who).open_epoch.clear();  // empty: the checkpoint just took it
  {
    auto& e = trace_.Append(now_);
    e.mutable_reader_left();
    trace_.Commit();
  }
  for (std::size_t i = 0; i < spans.size(); ++i) {
    if (!SendAssign(to[i].second, {spans[i]}, "leave")) return false;
  }
  return true;
}

bool RuntimeModel::DoStep(std::uint32_t r) {
  const std::uint64_t k = ++step_;
  Select(r);
  bool cut_crashed = false;
  if (!MaybeCut(r, k, &cut_crashed)) return false;
  if (cut_crashed) return true;
  Select(r);
  Reader& reader = R(r);
  std::optional<v1::Crash> crash;
  if (auto d = faults_.Decide(v1::STEP, k, v1::FaultDecision::kCrash, now_, [&](v1::FaultDecision* out) {
        if (!faults_.Chance("crash", k, faults_.config().crash_rate())) {
          return false;
        }
        out->mutable_crash()->set_point(v1::BEFORE_STEP);
        return true;
      })) {
    crash = d->crash();
  }
  if (crash.has_value() && crash->point() == v1::BEFORE_STEP) {
    return CrashAndRestart(r, CrashPointName(v1::BEFORE_STEP));
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
  if (fired) return CrashAndRestart(r, CrashPointName(v1::IN_STEP_AFTER_BROKER_CALL));
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
                                        std::to_string(gap.partition()) + " is empty or names offsets never appended");
      continue;
    }
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_gap_reported();
    x->set_partition(gap.partition());
    x->set_from_offset(gap.from_offset());
    x->set_to_offset(gap.to_offset());
    x->set_step(k);
    trace_.Commit();
    if (auto it = reader.spans.find(gap.partition()); it != reader.spans.end()) {
      it->second.emitted_next = std::max(it->second.emitted_next, gap.to_offset());
    }
  }
  for (const v1::Record& rec : response.records()) {
    const std::optional<RecordKey> key = broker_.Identify(rec, &why);
    if (!key.has_value()) {
      TraceProtocolError("Advance", "record " + why);
      continue;
    }
    reader.open_epoch.push_back(*key);
    ++accepted;
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_emitted();
    if (rec.has_offset()) {
      x->set_partition(rec.partition());
      x->set_offset(rec.offset());
      if (auto it = reader.spans.find(rec.partition()); it != reader.spans.end()) {
        it->second.emitted_next = std::max(it->second.emitted_next, rec.offset() + 1);
      }
    } else {
      x->set_message_id(rec.message_id());
    }
    x->set_event_time_ns(rec.event_time_ns());
    x->set_step(k);
    trace_.Commit();
  }
  if (response.has_watermark_ns()) reader.watermark = response.watermark_ns();

  VirtualTime resume_at = now_;
  if (response.next_case() == v1::AdvanceResponse::kResumeAtNs) {
    resume_at = response.resume_at_ns();
    if (resume_at < asked_at) {
      TraceProtocolError("Advance",
                         "resume_at " + FormatTime(resume_at) + " is before the step's now " + FormatTime(asked_at));
    }
    resume_at = std::max(resume_at, now_);
  } else if (response.next_case() == v1::AdvanceResponse::kFinished) {
    reader.finished = response.finished();
  }

  auto& e = trace_.Append(now_);
  auto* x = e.mutable_stepped();
  x->set_step(k);
  x->set_records(accepted);
  if (response.has_watermark_ns()) x->set_watermark_ns(response.watermark_ns());
  x->set_resume_at_ns(reader.finished ? kNever : resume_at);
  x->set_finished(reader.finished);
  x->set_broker_idle(broker_.IdleAt(now_));  // for the oracle's watermark-stall rule
  if (many()) {
    std::optional<VirtualTime> combined;
    bool all = true;
    for (std::uint32_t i : LiveReaders()) {
      if (!R(i).watermark.has_value()) {
        all = false;
        break;
      }
      combined = combined.has_value() ? std::min(*combined, *R(i).watermark) : *R(i).watermark;
    }
    if (all && combined.has_value()) x->set_combined_watermark_ns(*combined);
  }
  trace_.Commit();

  if (!reader.finished) {
    if (resume_at != asked_at) {
      reader.same_time_steps = 0;
    } else if (Livelocked(reader)) {
      return false;
    }
    PushStep(resume_at, r);
  }
  const std::uint64_t every = scenario_.runtime().checkpoint_every_records();
  if (every > 0) {
    std::size_t open = 0;
    for (const Reader& each : readers_) open += each.open_epoch.size();
    if (open >= every) return DoCheckpointCycle();
  }
  return true;
}

bool RuntimeModel::Livelocked(Reader& reader) {
  const auto& rp = scenario_.runtime();
  const std::uint64_t max_steps = rp.max_same_time_steps() > 0 ? rp.max_same_time_steps() : kDefaultMaxSameTimeSteps;
  const std::int64_t max_wall_ms =
      rp.max_same_time_wall_ms() > 0 ? rp.max_same_time_wall_ms() : kDefaultMaxSameTimeWallMs;
  const std::int64_t wall_now = wall_clock_ms_ ? wall_clock_ms_() : 0;
  if (++reader.same_time_steps == 1) reader.same_time_since_wall_ms = wall_now;
  const std::int64_t wall_ms = wall_now - reader.same_time_since_wall_ms;
  const bool by_wall = wall_clock_ms_ && wall_ms > max_wall_ms;
  if (reader.same_time_steps <= max_steps && !by_wall) return false;
  auto& e = trace_.Append(now_);
  auto* x = e.mutable_livelock();
  x->set_steps(reader.same_time_steps);
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
    queue_.Push(SaturatingAdd(now_, interval), Event{EventKind::kCheckpointDue, checkpoint_timer_generation_});
  }
}

bool RuntimeModel::DoCheckpointCycle() {
  const std::uint64_t id = next_checkpoint_id_++;
  ScheduleCheckpointTimer();

  // Every live reader answers, in index order.
  std::vector<TakenPart> taken;
  for (std::uint32_t r : LiveReaders()) {
    Select(r);
    v1::CheckpointRequest request;
    request.set_checkpoint_id(id);
    v1::CheckpointResponse response;
    if (ConnectorFailure f = Call(&ConnectorPort::Checkpoint, request, &response); !f.ok()) {
      TraceFailure("Checkpoint", f);
      return false;
    }
    Reader& reader = R(r);
    TakenPart part{r, {}, CommittedPart{id, std::move(*response.mutable_state()), reader.watermark, {}}};
    part.epoch.swap(reader.open_epoch);
    for (const v1::ResumePoint& rp : response.resume_points()) {
      part.part.resume_points.push_back(ResumePoint{rp.partition(), rp.next_offset()});
    }
    std::stable_sort(part.part.resume_points.begin(), part.part.resume_points.end(),
                     [](const ResumePoint& a, const ResumePoint& b) { return a.partition < b.partition; });
    auto& e = trace_.Append(now_);
    auto* x = e.mutable_checkpoint();
    x->set_checkpoint_id(id);
    x->set_records(static_cast<std::uint32_t>(part.epoch.size()));
    if (reader.watermark.has_value()) x->set_watermark_ns(*reader.watermark);
    x->set_state_bytes(part.part.state.size());
    for (const ResumePoint& rp : part.part.resume_points) {
      auto* y = x->add_resume_points();
      y->set_partition(rp.partition);
      y->set_next_offset(rp.next_offset);
    }
    trace_.Commit();
    taken.push_back(std::move(part));
  }
  const std::vector<std::uint32_t> live = LiveReaders();

  // Crash points of this checkpoint: one drawn out of the three, by its own
  // streams so that turning commit failures on or off does not move them.
  std::optional<v1::Crash> crash;
  if (auto d = faults_.Decide(v1::CHECKPOINT, id, v1::FaultDecision::kCrash, now_, [&](v1::FaultDecision* out) {
        if (!faults_.Chance("checkpoint_crash", id, faults_.config().checkpoint_crash_rate())) {
          return false;
        }
        // The notice acknowledges with acks (queue) or bookmark saves (log).
        const v1::CrashPoint kPoints[] = {v1::AFTER_CHECKPOINT_BEFORE_COMMIT, v1::AFTER_COMMIT_BEFORE_NOTICE,
                                          log() ? v1::IN_NOTICE_AFTER_BOOKMARK_SAVE : v1::IN_NOTICE_AFTER_ACK};
        auto* c = out->mutable_crash();
        c->set_point(kPoints[faults_.Int("checkpoint_crash.point", id, 0, 2)]);
        if (c->point() == kPoints[2]) c->set_after_calls(1);
        if (many()) {
          c->set_reader(
              live[faults_.Int("checkpoint_crash.reader", id, 0, static_cast<std::int64_t>(live.size()) - 1)]);
        }
        return true;
      })) {
    crash = d->crash();
  }
  const auto crash_at = [&](v1::CrashPoint p) { return crash.has_value() && crash->point() == p; };
  const std::uint32_t crash_reader = crash.has_value() && crash->reader() < readers_.size() && R(crash->reader()).live
                                         ? crash->reader()
                                         : live.front();
  // The taken checkpoint is dropped with every reader's epoch: it never
  // reaches the store, and every reader restarts from the last committed one.
  if (crash_at(v1::AFTER_CHECKPOINT_BEFORE_COMMIT)) {
    return CrashAndRestartAll(CrashPointName(v1::AFTER_CHECKPOINT_BEFORE_COMMIT));
  }

  const auto failure =
      faults_.Decide(v1::CHECKPOINT, id, v1::FaultDecision::kCommitFailure, now_, [&](v1::FaultDecision* out) {
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
    return CrashAndRestartAll("commit-failed");
  }

  std::vector<RecordKey> all;
  for (const TakenPart& part : taken) all.insert(all.end(), part.epoch.begin(), part.epoch.end());
  store_.Commit(CommittedCheckpoint{id, taken.size() == 1 ? taken.front().part.state : std::string(),
                                    taken.size() == 1 ? taken.front().part.watermark : std::nullopt,
                                    taken.size() == 1 ? taken.front().part.resume_points : std::vector<ResumePoint>{}},
                all);
  for (TakenPart& part : taken) {
    Reader& reader = R(part.reader);
    for (const ResumePoint& rp : part.part.resume_points) {
      if (auto it = reader.spans.find(rp.partition); it != reader.spans.end()) {
        it->second.committed_next = rp.next_offset;
      }
    }
    reader.committed = std::move(part.part);
  }
  ++checkpoints_;
  Select(live.front());
  {
    auto& e = trace_.Append(now_);
    e.mutable_committed()->set_checkpoint_id(id);
    trace_.Commit();
  }
  for (std::uint32_t r : live) {
    if (!R(r).live) continue;
    // Committed but never noticed: the notice is not retried; leases expire.
    if (crash_at(v1::AFTER_COMMIT_BEFORE_NOTICE) && r == crash_reader) {
      if (!CrashAndRestart(r, CrashPointName(v1::AFTER_COMMIT_BEFORE_NOTICE))) return false;
      continue;
    }
    Select(r);
    {
      auto& e = trace_.Append(now_);
      e.mutable_commit_notice()->set_checkpoint_id(id);
      trace_.Commit();
    }
    const bool notice_crash =
        r == crash_reader && (crash_at(v1::IN_NOTICE_AFTER_ACK) || crash_at(v1::IN_NOTICE_AFTER_BOOKMARK_SAVE));
    if (notice_crash) gate_.Arm(CrashGate::Count::kAckCalls, crash->after_calls());
    v1::CommittedRequest notice;
    notice.set_checkpoint_id(id);
    v1::CommittedResponse ignored;
    ConnectorFailure f = Call(&ConnectorPort::Committed, notice, &ignored);
    const bool fired = gate_.fired();
    gate_.Disarm();
    if (fired) {
      if (!CrashAndRestart(r, CrashPointName(crash->point()))) return false;
      continue;
    }
    if (!f.ok()) {
      TraceFailure("Committed", f);
      return false;
    }
  }
  return MaybeRebalance(id);
}

bool RuntimeModel::AllCommitted() const {
  // A log reader's emitted records wait in the open epoch even when retention
  // has since deleted them from the log: the run goes on until they commit.
  if (!broker_.Drained(store_)) return false;
  if (!log()) return true;
  for (const Reader& r : readers_) {
    if (!r.open_epoch.empty()) return false;
  }
  return true;
}

bool RuntimeModel::AllFinished() const {
  for (const Reader& r : readers_) {
    if (r.live && (!r.finished || !r.open_epoch.empty())) return false;
  }
  return true;
}

RunSummary RuntimeModel::Run() {
  RunSummary summary;
  std::string reason;
  const std::uint32_t count = static_cast<std::uint32_t>(readers_.size());
  const std::uint32_t initial =
      scenario_.readers().initial() > 0 ? std::min(scenario_.readers().initial(), count) : count;
  for (std::uint32_t r = 0; r < initial; ++r) R(r).live = true;
  AssignInitialSpans();
  bool ok = true;
  for (std::uint32_t r = 0; r < initial && ok; ++r) ok = StartIncarnation(r);
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
    if (!AssignNewPartitions()) {
      ok = false;
      break;
    }
    switch (event.kind) {
      case EventKind::kStep: {
        const Reader& reader = R(event.reader);
        if (!reader.live || event.generation != reader.incarnation || reader.finished) continue;
        ok = DoStep(event.reader);
        break;
      }
      case EventKind::kCheckpointDue:
        if (event.generation != checkpoint_timer_generation_) continue;
        if (AllFinished() && store_.latest().has_value()) {
          reason = "connector finished";
          continue;
        }
        ok = DoCheckpointCycle();
        break;
    }
  }
  if (!ok && crash_loop_) {
    reason = "crash loop: " + std::to_string(kMaxCrashesWithoutStep) + " crashes without a completed step";
  } else if (!ok) {
    reason = "connector failed";
    summary.connector_failed = true;
  }
  for (Reader& r : readers_) r.port->Kill();
  broker_.AdvanceTo(now_);

  summary.end_reason = reason;
  summary.end_time = now_;
  summary.steps = step_;
  summary.incarnations = incarnations_;
  summary.crashes = crashes_;
  summary.checkpoints = checkpoints_;
  summary.published = broker_.published();
  summary.committed_messages = store_.committed_messages();
  summary.duplicate_records = store_.duplicate_records();
  summary.broker_calls = session_.calls_total();
  summary.connector_calls = connector_calls_;
  summary.max_broker_calls_in_one_call = session_.max_calls_in_window();
  summary.ignored_receipts = broker_.ignored_receipts();
  summary.readers = static_cast<std::uint32_t>(readers_.size());
  summary.cuts = cuts_;
  summary.moves = moves_;
  summary.joins = joins_;
  summary.leaves = leaves_;

  auto& e = trace_.Append(now_);
  auto* x = e.mutable_run_ended();
  x->set_reason(reason);
  x->set_published(summary.published);
  x->set_committed_messages(summary.committed_messages);
  trace_.Commit();
  return summary;
}

}  // namespace weir
