#include "harness/oracle/oracle.h"

#include <algorithm>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "harness/core/virtual_time.h"
#include "harness/trace/describe.h"
#include "weir/v1/faults.pb.h"

namespace weir {

using v1::TraceEvent;

namespace {

// Times a connector gives (watermarks, resume times) further than this from
// virtual now are surely garbage: 100 years in nanoseconds fits in int64.
constexpr VirtualDuration kTimeRange = 100LL * 365 * 24 * 3600 * 1'000'000'000LL;

bool ClaimsWatermark(const v1::Profile& p) {
  return p.watermark_policy() == v1::Profile::MONOTONIC || p.watermark_policy() == v1::Profile::BOUNDED_LATENESS;
}

}  // namespace

Oracle::Oracle(const v1::Profile& profile, v1::SourceShape shape, std::uint32_t readers)
    : exactly_once_(profile.guarantee() == v1::Profile::EXACTLY_ONCE),
      lateness_bounded_(profile.watermark_policy() == v1::Profile::BOUNDED_LATENESS),
      allowed_lateness_(Millis(profile.allowed_lateness_ms())),
      idle_timeout_(ClaimsWatermark(profile) ? Millis(profile.idle_timeout_ms()) : 0),
      idle_max_lag_(Millis(profile.has_idle_max_lag_ms() ? profile.idle_max_lag_ms() : profile.idle_timeout_ms())),
      min_backoff_(Millis(profile.min_backoff_ms())),
      max_lead_(Millis(profile.max_watermark_lead_ms())),
      many_(readers > 1),
      saved_(readers > 1 ? readers : 0),
      log_(
          profile, verdict_,
          [this](Invariant invariant, const std::string& sentence, std::vector<EventRef> cited,
                 const TraceEvent* current) { Report(invariant, sentence, std::move(cited), current); },
          readers) {
  for (Invariant i : {Invariant::kRecordOutsideSpan, Invariant::kDoubleHolding, Invariant::kCutConservation,
                      Invariant::kCheckpointCoverage}) {
    verdict_.at(i).applies = many_ && shape == v1::LOG;
  }
  const bool log = shape == v1::LOG;
  for (Invariant i : {Invariant::kOffsetGap, Invariant::kPositionBeforeCommit, Invariant::kResumeExact,
                      Invariant::kSilentSkip, Invariant::kNewPartition}) {
    verdict_.at(i).applies = log;
  }
  verdict_.at(Invariant::kAckBeforeCommit).applies = !log;
  verdict_.at(Invariant::kLostMessage).applies = !log;
  verdict_.at(Invariant::kDuplicateOutput).checked = exactly_once_;
  verdict_.at(Invariant::kRetryStorm).checked = min_backoff_ > 0;
  verdict_.at(Invariant::kWatermarkStall).checked = idle_timeout_ > 0;
  verdict_.at(Invariant::kLateRecord).checked = lateness_bounded_;
}

void Oracle::SwitchTo(std::uint32_t r) {
  if (!many_ || r == current_ || r >= saved_.size()) return;
  const auto park = [this](PerReader& p) {
    std::swap(open_epoch_, p.open_epoch);
    std::swap(watermark_, p.watermark);
    std::swap(watermark_ref_, p.watermark_ref);
    std::swap(opened_ref_, p.opened_ref);
    std::swap(finished_ref_, p.finished_ref);
    std::swap(regressed_, p.regressed);
    std::swap(reported_watermark_, p.reported_watermark);
    std::swap(reported_ref_, p.reported_ref);
    std::swap(awaiting_, p.awaiting);
    std::swap(idle_, p.idle);
    std::swap(idle_reported_, p.idle_reported);
    std::swap(idle_since_, p.idle_since);
    std::swap(ahead_, p.ahead);
    std::swap(methods_, p.methods);
  };
  park(saved_[current_]);  // the members go to their slot…
  park(saved_[r]);         // …and r's come out of its
  current_ = r;
}

void Oracle::Report(Invariant invariant, const std::string& sentence, std::vector<EventRef> cited,
                    const TraceEvent* current, const EventRef& cause) {
  InvariantResult& result = verdict_.at(invariant);
  ++result.violations;
  if (result.first.size() >= kKeptViolations) return;
  Violation v;
  v.invariant = invariant;
  v.sentence = sentence;
  for (const EventRef& ref : cited) {
    if (ref.valid()) v.detected_seq = std::max(v.detected_seq, ref.seq);
  }
  if (current != nullptr) v.detected_seq = current->seq();
  v.cause_seq = cause.valid() ? cause.seq : v.detected_seq;
  std::sort(cited.begin(), cited.end(), [](const EventRef& a, const EventRef& b) { return a.seq < b.seq; });
  std::uint64_t last_seq = ~std::uint64_t{0};
  for (const EventRef& ref : cited) {
    if (!ref.valid() || ref.seq == last_seq) continue;  // one event may prove two things
    last_seq = ref.seq;
    if (current != nullptr && ref.seq == current->seq()) continue;
    // A connector's failure keeps text a reference cannot rebuild.
    const std::string prefix = many_ ? absl::StrCat("reader ", ref.reader, ": ") : std::string();
    v.evidence.push_back(Evidence{
        ref.seq, ref.t, ref.incarnation,
        prefix + (failure_ref_.valid() && ref.seq == failure_ref_.seq ? failure_what_ : DescribeEvent(Rebuild(ref)))});
  }
  if (current != nullptr) {
    const std::string prefix = many_ ? absl::StrCat("reader ", current->reader(), ": ") : std::string();
    v.evidence.push_back(
        Evidence{current->seq(), current->t_ns(), current->incarnation(), prefix + DescribeEvent(*current)});
  }
  result.first.push_back(std::move(v));
}

bool Oracle::IsCommitted(std::uint64_t id) const {
  if (IsRetired(id)) return true;
  auto it = messages_.find(id);
  return it != messages_.end() && it->second.committed_records > 0;
}

void Oracle::Retire(std::uint64_t id) {
  if (auto it = messages_.find(id); it != messages_.end() && it->second.committed.valid()) {
    if (retired_evidence_.emplace(id, FirstRecord{it->second.committed_record, it->second.committed}).second) {
      retired_evidence_order_.push_back(id);
      if (retired_evidence_order_.size() > kRetiredEvidence) {
        retired_evidence_.erase(retired_evidence_order_.front());
        retired_evidence_order_.pop_front();
      }
    }
  }
  if (id == 0) {
    retired_zero_ = true;
  } else if (id - 1 >= retired_base_) {
    const std::uint64_t i = id - 1 - retired_base_;
    if (i / 64 >= retired_.size()) retired_.resize(i / 64 + 1, 0);
    retired_[i / 64] |= std::uint64_t{1} << (i % 64);
    while (!retired_.empty() && retired_.front() == ~std::uint64_t{0}) {
      retired_.pop_front();
      retired_base_ += 64;
    }
  }
  messages_.erase(id);
}

void Oracle::DiscardUncommitted() {
  open_epoch_.clear();
  pending_.clear();
}

void Oracle::OnEvent(const TraceEvent& e) {
  ++verdict_.events;
  if (many_) {
    SwitchTo(e.reader());
    log_.SwitchTo(e.reader());
  }
  CountChances(e);
  switch (e.kind_case()) {
    case TraceEvent::kPublished: {
      MessageState& m = messages_[e.published().message_id()];
      m.published = MakeRef(e);
      m.event_time = e.published().event_time_ns();
      EndIdle();
      break;
    }
    case TraceEvent::kDelivered: OnDelivered(e); break;
    case TraceEvent::kEmitted: OnEmitted(e); break;
    case TraceEvent::kStepped: OnStepped(e); break;
    case TraceEvent::kNacked:
    case TraceEvent::kLeaseExpired:
      EndIdle();  // the message is deliverable again
      break;
    case TraceEvent::kAckIgnored: OnAckIgnored(e); break;
    case TraceEvent::kAppended:
      log_.OnAppended(e);
      EndIdle();
      break;
    case TraceEvent::kLogRead:
      log_.OnLogRead(e);
      if (e.log_read().records() > 0) EndIdle();
      break;
    case TraceEvent::kRetentionDeleted: log_.OnRetention(e); break;
    case TraceEvent::kPartitionAdded:
      log_.OnPartitionAdded(e);
      EndIdle();
      break;
    case TraceEvent::kBookmarkSaved: log_.OnBookmarkSaved(e); break;
    case TraceEvent::kGapReported: log_.OnGapReported(e); break;
    case TraceEvent::kCheckpoint: {
      log_.OnCheckpoint(e);
      auto& epoch = pending_[e.checkpoint().checkpoint_id()];
      epoch.insert(epoch.end(), open_epoch_.begin(), open_epoch_.end());
      open_epoch_.clear();
      break;
    }
    case TraceEvent::kCommitted:
      OnCommitted(e);
      log_.OnCommitted(e);
      break;
    case TraceEvent::kCommitFailed:
      pending_.erase(e.commit_failed().checkpoint_id());
      log_.OnCommitFailed(e);
      break;
    case TraceEvent::kAcked: OnAcked(e); break;
    case TraceEvent::kOpened:
      log_.OnOpened(e);
      DiscardUncommitted();
      combined_.reset();
      opened_ref_ = MakeRef(e);
      finished_ref_ = EventRef{};
      regressed_ = false;
      methods_.clear();
      ahead_ = false;
      watermark_.reset();
      watermark_ref_ = EventRef{};
      reported_watermark_.reset();
      reported_ref_ = EventRef{};
      if (e.opened().restored() && e.opened().has_watermark_ns()) {
        watermark_ = e.opened().watermark_ns();
        watermark_ref_ = opened_ref_;
        reported_watermark_ = watermark_;
        reported_ref_ = opened_ref_;
      }
      // Every MessageState stamp names an older incarnation now.
      awaiting_ = 0;
      EndIdle();
      break;
    case TraceEvent::kCrashed:
      log_.OnCrashed(e);
      OnCrashed(e);
      DiscardUncommitted();
      EndIdle();
      break;
    case TraceEvent::kExited:
      OnConnectorFailure(
          e, e.exited().call(), Invariant::kUnexpectedExit,
          absl::StrCat("The connector process ended without a crash point: ", e.exited().status(),
                       e.exited().stderr_tail().empty()
                           ? std::string()
                           : absl::StrCat("; stderr ends with: ", ReportTail(e.exited().stderr_tail()))));
      break;
    case TraceEvent::kCallTimedOut:
      OnConnectorFailure(
          e, e.call_timed_out().call(), Invariant::kStepTimeout,
          e.call_timed_out().call() == "Start"
              ? absl::StrCat("The connector did not report its address on "
                             "WEIR_READY_FD within ",
                             e.call_timed_out().bound_wall_ms(), " ms of wall time after it was started.")
              : absl::StrCat("The connector did not answer ", e.call_timed_out().call(), " within ",
                             e.call_timed_out().bound_wall_ms(), " ms of wall time."));
      break;
    case TraceEvent::kProtocolError:
      OnConnectorFailure(
          e, e.protocol_error().call(), Invariant::kProtocolError,
          absl::StrCat("Malformed exchange in ", e.protocol_error().call(), ": ", e.protocol_error().detail(), "."));
      break;
    case TraceEvent::kLivelock: {
      if (!failure_ref_.valid()) {
        failure_ref_ = MakeRef(e);
        failure_what_ = DescribeEvent(e);
      }
      const auto& x = e.livelock();
      Report(Invariant::kLivelock,
             x.by_wall_time()
                 ? absl::StrCat("The connector kept virtual time at ", FormatTime(e.t_ns()), " for ", x.wall_ms(),
                                " ms of wall time (", x.steps(),
                                " steps in a row asked to be called again at once; "
                                "runtime.max_same_time_wall_ms is ",
                                x.max_wall_ms(), "): livelock, stopped.")
                 : absl::StrCat("The connector asked to be called again at virtual time ", FormatTime(e.t_ns()), " ",
                                x.steps(), " steps in a row (runtime.max_same_time_steps is ", x.max_steps(),
                                "): livelock, stopped."),
             {opened_ref_}, &e);
      break;
    }
    case TraceEvent::kConnectorError:
      OnConnectorFailure(e, e.connector_error().call(), Invariant::kConnectorError,
                         absl::StrCat("The connector reported its own failure in ", e.connector_error().call(), ": ",
                                      e.connector_error().detail(), "."));
      break;
    case TraceEvent::kRunEnded:
      OnRunEnded(e);
      log_.OnRunEnded(e);
      break;
    case TraceEvent::kBrokerCall: OnBrokerCall(e); break;
    case TraceEvent::kBrokerCallFailed: OnBrokerCallFailed(e); break;
    case TraceEvent::kAssigned:
      log_.OnAssigned(e);
      EndIdle();
      break;
    case TraceEvent::kRevoked: log_.OnRevoked(e); break;
    case TraceEvent::kCut: log_.OnCut(e); break;
    case TraceEvent::kReaderLeft:
      log_.OnReaderLeft(e);
      open_epoch_.clear();
      combined_.reset();
      break;
    case TraceEvent::kReaderJoined: combined_.reset(); break;
    default: break;
  }
}

// "crash at IN_NOTICE", "throttle_retry_after_ms at PULL": the fault's kind
// (its field in FaultDecision) and where it struck.
static std::string FaultKey(const v1::FaultDecision& d) {
  if (d.has_crash()) return absl::StrCat("crash at ", v1::CrashPoint_Name(d.crash().point()));
  const auto* field = d.GetDescriptor()->FindFieldByNumber(static_cast<int>(d.fault_case()));
  return absl::StrCat(field != nullptr ? field->name() : "unknown", " at ", v1::Site_Name(d.site()));
}

void Oracle::CountChances(const TraceEvent& e) {
  // Records emitted but not committed, or delivered messages awaiting one.
  const bool in_flight = !open_epoch_.empty() || !pending_.empty() || awaiting_ > 0;
  const auto out_of_order = [this](std::int64_t event_time) {
    if (max_event_time_.has_value() && event_time < *max_event_time_) Chance(Invariant::kLateRecord);
    if (!max_event_time_.has_value() || event_time > *max_event_time_) max_event_time_ = event_time;
  };
  switch (e.kind_case()) {
    case TraceEvent::kPublished: out_of_order(e.published().event_time_ns()); break;
    case TraceEvent::kAppended:
      // A record held back by a visibility delay is counted at its
      // fault_applied event (below), once.
      out_of_order(e.appended().event_time_ns());
      break;
    case TraceEvent::kDelivered:
      if (e.delivered().attempt() > 1) {
        Chance(Invariant::kDuplicateOutput);
        Chance(Invariant::kLateRecord);
      }
      break;
    case TraceEvent::kStepped:
      for (Invariant i : {Invariant::kStepTimeout, Invariant::kUnexpectedExit, Invariant::kProtocolError,
                          Invariant::kConnectorError, Invariant::kLivelock}) {
        Chance(i);
      }
      if (e.stepped().has_watermark_ns()) Chance(Invariant::kWatermarkAhead);
      break;
    case TraceEvent::kNacked:
    case TraceEvent::kLeaseExpired: Chance(Invariant::kLostMessage); break;
    case TraceEvent::kCommitFailed:
    case TraceEvent::kCrashed:
      if (in_flight) {
        Chance(Invariant::kAckBeforeCommit);
        Chance(Invariant::kLostMessage);
      }
      break;
    case TraceEvent::kCommitted: committed_any_ = true; break;
    case TraceEvent::kOpened:
      if (e.opened().restored()) {
        for (Invariant i : {Invariant::kBadCheckpoint, Invariant::kWatermarkRegression, Invariant::kResumeExact,
                            Invariant::kOffsetGap}) {
          Chance(i);
        }
        if (committed_any_) Chance(Invariant::kDuplicateOutput);
      }
      break;
    case TraceEvent::kLogRead:
      if (e.log_read().out_of_range()) {
        Chance(Invariant::kSilentSkip);
        Chance(Invariant::kOffsetGap);
      }
      break;
    case TraceEvent::kBookmarkSaved: Chance(Invariant::kPositionBeforeCommit); break;
    case TraceEvent::kPartitionAdded: Chance(Invariant::kNewPartition); break;
    case TraceEvent::kAssigned:
      for (Invariant i : {Invariant::kDoubleHolding, Invariant::kResumeExact, Invariant::kOffsetGap}) Chance(i);
      if (committed_any_) Chance(Invariant::kDuplicateOutput);
      spans_changed_ = true;
      break;
    case TraceEvent::kRevoked:
      Chance(Invariant::kRecordOutsideSpan);
      spans_changed_ = true;
      break;
    case TraceEvent::kCut:
      for (Invariant i : {Invariant::kCutConservation, Invariant::kRecordOutsideSpan, Invariant::kDoubleHolding,
                          Invariant::kOffsetGap}) {
        Chance(i);
      }
      spans_changed_ = true;
      break;
    case TraceEvent::kReaderLeft:
    case TraceEvent::kReaderJoined:
      Chance(Invariant::kWatermarkRegression);
      Chance(Invariant::kDoubleHolding);
      spans_changed_ = true;
      break;
    case TraceEvent::kCheckpoint:
      if (many_ && spans_changed_) {
        Chance(Invariant::kCheckpointCoverage);
        spans_changed_ = false;
      }
      break;
    case TraceEvent::kFaultApplied: {
      const v1::FaultDecision& d = e.fault_applied().decision();
      ++verdict_.faults_applied[FaultKey(d)];
      // A message held back or handed out of order arrives behind later ones
      // (a delay of 0 holds nothing back; a plan may carry one).
      if ((d.has_visibility_delay_ms() && d.visibility_delay_ms() > 0) || (d.has_reorder() && d.reorder())) {
        Chance(Invariant::kLateRecord);
      }
      break;
    }
    default: break;
  }
}

// The end of a connector's output as a report shows it: at most the last
// kReportTailBytes, from a line start when there is one (the trace keeps more).
std::string Oracle::ReportTail(const std::string& tail) {
  constexpr std::size_t kReportTailBytes = 1024;
  if (tail.size() <= kReportTailBytes) return tail;
  std::size_t from = tail.size() - kReportTailBytes;
  const std::size_t nl = tail.find('\n', from);
  if (nl != std::string::npos && nl + 1 < tail.size()) from = nl + 1;
  return absl::StrCat("[", from, " bytes before] ", tail.substr(from));
}

void Oracle::OnConnectorFailure(const TraceEvent& e, const std::string& call, Invariant invariant,
                                const std::string& sentence) {
  if (!failure_ref_.valid()) {
    failure_ref_ = MakeRef(e);
    failure_what_ = DescribeEvent(e);
  }
  if (call == "Open" && opened_ref_.valid() && opened_ref_.f[0] != 0 && opened_ref_.incarnation == e.incarnation()) {
    Report(Invariant::kBadCheckpoint,
           absl::StrCat("Opening incarnation ", e.incarnation(), " from committed checkpoint ", opened_ref_.f[1],
                        " failed: ", sentence),
           {opened_ref_}, &e);
    return;
  }
  Report(invariant, sentence, {opened_ref_}, &e);
}

void Oracle::OnWatermark(const TraceEvent& e, std::int64_t watermark) {
  if (watermark_.has_value() && watermark < *watermark_) {
    // Still below the high mark but not below the last value reported: the
    // same regression, seen again at a later step.
    if (regressed_ && reported_watermark_.has_value() && watermark >= *reported_watermark_) {
      Echo(Invariant::kWatermarkRegression);
      return;
    }
    regressed_ = true;
    const bool from_checkpoint = watermark_ref_.kind == TraceEvent::kOpened;
    Report(Invariant::kWatermarkRegression,
           absl::StrCat("The watermark went back from ", FormatTime(*watermark_), " to ", FormatTime(watermark),
                        from_checkpoint ? " below the watermark committed with the "
                                          "restored checkpoint."
                                        : " within incarnation " + std::to_string(e.incarnation()) + "."),
           {watermark_ref_}, &e);
    return;
  }
  regressed_ = false;
  watermark_ = watermark;
  watermark_ref_ = MakeRef(e);
}

void Oracle::OnCrashed(const TraceEvent& e) {
  // late-record's excuse: a message this incarnation held without a record
  // while its watermark moved past it cannot later be excused.
  if (!watermark_.has_value()) return;
  for (auto& [id, m] : messages_) {
    if (m.delivered_in != e.incarnation() || m.emitted_in == e.incarnation() || m.committed_records > 0) continue;
    if (*watermark_ - std::max(m.event_time, m.delivered_watermark) > allowed_lateness_) m.tainted = true;
  }
}

void Oracle::OnDelivered(const TraceEvent& e) {
  EndIdle();  // something was deliverable
  auto it = messages_.find(e.delivered().message_id());
  if (it == messages_.end()) return;  // retired (a duplicate needs no record) or unknown
  MessageState& m = it->second;
  m.last_delivered = MakeRef(e);
  const std::int64_t before_step = reported_watermark_.value_or(kNoWatermark);
  if (m.delivered_in != 0 && m.delivered_in != e.incarnation() && m.excused_in != e.incarnation()) {
    // Back from a dead incarnation: this one's watermark moved on without it.
    m.excused_in = e.incarnation();
    m.excuse_floor = before_step;
  }
  m.delivered_watermark = before_step;
  const bool was = Awaiting(m, e.incarnation());
  m.delivered_in = e.incarnation();
  if (!was && Awaiting(m, e.incarnation())) ++awaiting_;
}

void Oracle::OnEmitted(const TraceEvent& e) {
  const std::uint64_t id = e.emitted().message_id();
  const bool log_record = e.emitted().has_offset();
  const EventRef ref = log_record ? EventRef{} : MakeRef(e);
  if (!log_record) open_epoch_.push_back(PendingRecord{id, ref});
  // late-record: against the last watermark reported before this step (this
  // step's own watermark comes with its stepped event, after its records).
  if (reported_watermark_.has_value() && e.emitted().event_time_ns() < *reported_watermark_) {
    ++verdict_.late_records;
    const VirtualDuration late = *reported_watermark_ - e.emitted().event_time_ns();
    // Forced by a crash: only what this incarnation added after the message
    // came back counts (see the rules in oracle.h).
    VirtualDuration avoidable = late;
    if (auto m = messages_.find(id);
        m != messages_.end() && m->second.excused_in == e.incarnation() && !m->second.tainted) {
      avoidable = *reported_watermark_ - std::max(e.emitted().event_time_ns(), m->second.excuse_floor);
      if (late > allowed_lateness_ && avoidable <= allowed_lateness_) ++verdict_.forced_late_records;
    }
    if (lateness_bounded_ && avoidable > allowed_lateness_) {
      Report(Invariant::kLateRecord,
             absl::StrCat("Step ", e.emitted().step(), " emitted a record of ",
                          e.emitted().has_offset()
                              ? absl::StrCat("partition ", e.emitted().partition(), " offset ", e.emitted().offset())
                              : absl::StrCat("message ", id),
                          " with event time ", FormatTime(e.emitted().event_time_ns()), ", ", FormatTime(late),
                          " below the watermark ", FormatTime(*reported_watermark_),
                          " reported before it (allowed: ", FormatTime(allowed_lateness_), ")",
                          avoidable < late ? absl::StrCat("; the message came back from a dead incarnation, and ",
                                                          FormatTime(avoidable),
                                                          " of that lateness the connector added after it came back")
                                           : std::string(),
                          "."),
             {reported_ref_}, &e);
    }
  }
  if (e.emitted().has_offset()) {  // a log record: named by partition and offset
    log_.OnEmitted(e);
    return;
  }
  if (IsRetired(id)) return;  // delivery history retired with it
  auto it = messages_.find(id);
  if (it == messages_.end() || it->second.delivered_in != e.incarnation()) {
    std::vector<EventRef> cited;
    if (it != messages_.end()) cited = {it->second.published, it->second.last_delivered};
    Report(Invariant::kProtocolError,
           absl::StrCat("Step ", e.emitted().step(), " emitted a record of message ", id,
                        it == messages_.end() ? ", which the broker has not published"
                                              : ", which was never delivered to incarnation ",
                        it == messages_.end() ? std::string() : std::to_string(e.incarnation()), "."),
           std::move(cited), &e);
    if (it == messages_.end()) return;
  }
  MessageState& m = it->second;
  m.last_emitted = ref;
  if (Awaiting(m, e.incarnation())) --awaiting_;
  m.emitted_in = e.incarnation();
}

bool Oracle::TimeInRange(const TraceEvent& e, const char* what, std::int64_t value) {
  const VirtualTime now = e.t_ns();
  if (value <= SaturatingAdd(now, kTimeRange) && value >= now - kTimeRange) return true;
  Report(Invariant::kProtocolError,
         absl::StrCat("Step ", e.stepped().step(), " reported a ", what, " of ", value, " ns (", FormatTime(value),
                      "), more than 100 years away from virtual now ", FormatTime(now), "."),
         {}, &e);
  return false;
}

void Oracle::OnStepped(const TraceEvent& e) {
  const auto& x = e.stepped();
  if (x.finished()) {
    if (!finished_ref_.valid()) finished_ref_ = MakeRef(e);
  } else {
    TimeInRange(e, "resume time", x.resume_at_ns());
  }
  if (x.has_watermark_ns() && TimeInRange(e, "watermark", x.watermark_ns())) {
    const bool ahead = x.watermark_ns() > SaturatingAdd(e.t_ns(), max_lead_);
    if (ahead && ahead_) Echo(Invariant::kWatermarkAhead);
    if (ahead && !ahead_) {
      Report(Invariant::kWatermarkAhead,
             absl::StrCat("Step ", x.step(), " reported the watermark ", FormatTime(x.watermark_ns()), ", ",
                          FormatTime(x.watermark_ns() - e.t_ns()), " past virtual now ", FormatTime(e.t_ns()),
                          " (allowed: ", FormatTime(max_lead_), "): every record published from now on could be late."),
             {}, &e);
    }
    ahead_ = ahead;
    OnWatermark(e, x.watermark_ns());
    // Cite the step that first reported this value: for a stall, where it stuck.
    if (reported_watermark_ != x.watermark_ns()) reported_ref_ = MakeRef(e);
    reported_watermark_ = x.watermark_ns();
  }
  if (x.has_combined_watermark_ns()) {
    // Several readers: the least of their watermarks must not go back either,
    // except across a reader's (re)open, join or leave.
    if (combined_.has_value() && x.combined_watermark_ns() < *combined_) {
      Report(Invariant::kWatermarkRegression,
             absl::StrCat("The combined watermark of the live readers went back from ", FormatTime(*combined_), " to ",
                          FormatTime(x.combined_watermark_ns()), " after step ", x.step(), "."),
             {combined_ref_}, &e);
    }
    if (!combined_.has_value() || x.combined_watermark_ns() > *combined_) {
      combined_ = x.combined_watermark_ns();
      combined_ref_ = MakeRef(e);
    }
  }
  log_.OnStepped(e, reported_watermark_, reported_ref_);
  if (!x.broker_idle() || awaiting_ > 0) {
    EndIdle();
    return;
  }
  if (!idle_) {
    idle_ = true;
    idle_reported_ = false;
    idle_since_ = MakeRef(e);
  }
  if (idle_timeout_ == 0 || idle_reported_) return;
  const VirtualDuration idle_for = e.t_ns() - idle_since_.t;
  if (idle_for <= idle_timeout_) return;
  Chance(Invariant::kWatermarkStall);
  const VirtualTime floor = e.t_ns() - idle_max_lag_;
  if (reported_watermark_.has_value() && *reported_watermark_ >= floor) return;
  idle_reported_ = true;
  Report(Invariant::kWatermarkStall,
         absl::StrCat("The source has been idle for ", FormatTime(idle_for), " (longer than the profile's ",
                      FormatTime(idle_timeout_), ") and the watermark is ",
                      reported_watermark_.has_value()
                          ? absl::StrCat(FormatTime(*reported_watermark_), ", ",
                                         FormatTime(e.t_ns() - *reported_watermark_), " behind virtual now")
                          : std::string("not set"),
                      " (allowed: ", FormatTime(idle_max_lag_), ")."),
         {idle_since_, reported_ref_}, &e);
}

void Oracle::OnAckIgnored(const TraceEvent& e) {
  // Lost acks and expired or superseded receipts are the broker's doing or a
  // race; a receipt the broker never handed out can only be made up.
  if (!absl::StrContains(e.ack_ignored().reason(), "receipt never issued")) return;
  Report(Invariant::kProtocolError,
         absl::StrCat("The connector acknowledged receipt ", e.ack_ignored().receipt(),
                      ", which the broker never issued."),
         {}, &e);
}

void Oracle::OnCommitted(const TraceEvent& e) {
  auto node = pending_.extract(e.committed().checkpoint_id());
  if (node.empty()) return;
  const EventRef committed = MakeRef(e);
  for (const PendingRecord& r : node.mapped()) {
    const bool already = IsCommitted(r.message_id);
    if (already) {
      ++verdict_.duplicate_records;
      if (exactly_once_) {
        // The first record and its commit, then the second record (this
        // commit is the current event).
        std::vector<EventRef> cited;
        FirstRecord first;
        if (auto it = messages_.find(r.message_id); it != messages_.end()) {
          first = FirstRecord{it->second.committed_record, it->second.committed};
        } else if (auto old = retired_evidence_.find(r.message_id); old != retired_evidence_.end()) {
          first = old->second;
        }
        if (first.record.valid()) cited.push_back(first.record);
        if (first.commit.valid()) cited.push_back(first.commit);
        cited.push_back(r.emitted);
        Report(Invariant::kDuplicateOutput,
               absl::StrCat("Message ", r.message_id, " has a second record in the committed output (checkpoint ",
                            e.committed().checkpoint_id(), ")."),
               std::move(cited), &e);
      }
      continue;
    }
    auto it = messages_.find(r.message_id);
    if (it == messages_.end()) continue;
    if (Awaiting(it->second, e.incarnation())) --awaiting_;  // committed: needs no record
    it->second.committed = committed;
    it->second.committed_record = r.emitted;
    it->second.committed_records = 1;
    if (it->second.acked) Retire(r.message_id);
  }
}

void Oracle::OnAcked(const TraceEvent& e) {
  const std::uint64_t id = e.acked().message_id();
  auto it = messages_.find(id);
  if (it == messages_.end()) return;  // committed and acked before: retired
  MessageState& m = it->second;
  if (m.committed_records == 0) {
    std::vector<EventRef> cited = {m.last_delivered};
    if (m.last_emitted.valid()) cited.push_back(m.last_emitted);
    Report(Invariant::kAckBeforeCommit,
           absl::StrCat("The broker received an ack for message ", id,
                        m.last_emitted.valid() ? " while its record was not yet committed."
                                               : " before the connector emitted any record of it."),
           std::move(cited), &e);
    m.acked = true;
    return;
  }
  Retire(id);
}

void Oracle::OnRunEnded(const TraceEvent& e) {
  std::vector<std::uint64_t> lost;
  for (const auto& [id, m] : messages_) {
    if (m.committed_records == 0) lost.push_back(id);
  }
  std::sort(lost.begin(), lost.end());
  for (std::uint64_t id : lost) {
    const MessageState& m = messages_.at(id);
    // A connector that said it was finished ended the work: cite that step.
    Report(Invariant::kLostMessage,
           absl::StrCat("Message ", id, " was published but has no record in the committed output",
                        m.acked ? " although the broker received its ack" : "", " when the run ended (",
                        e.run_ended().reason(), ")",
                        finished_ref_.valid() ? absl::StrCat("; step ", finished_ref_.f[0],
                                                             " had answered that the connector was finished")
                                              : std::string(),
                        "."),
           {m.published, m.last_delivered, m.last_emitted, finished_ref_, failure_ref_}, &e,
           failure_ref_.valid() ? failure_ref_ : finished_ref_);
  }
}

// A log Read's transient failure belongs to its partition: reading another
// partition at once is no retry.
static std::string RetryKey(const std::string& method, bool has_partition, std::uint32_t partition) {
  return has_partition ? absl::StrCat(method, " of partition ", partition) : method;
}

void Oracle::OnBrokerCallFailed(const TraceEvent& e) {
  const auto& x = e.broker_call_failed();
  if (x.code() == 8) {  // RESOURCE_EXHAUSTED: the whole method waits
    MethodState& m = methods_[x.method()];
    m.throttled = MakeRef(e);
    m.throttled_until = SaturatingAdd(e.t_ns(), x.retry_after_ns());
  } else if (x.code() == 14 || x.code() == 4) {  // UNAVAILABLE, DEADLINE_EXCEEDED
    methods_[RetryKey(x.method(), x.has_partition(), x.partition())].transient = MakeRef(e);
  }
}

void Oracle::OnBrokerCall(const TraceEvent& e) {
  if (e.broker_call().has_partition()) {  // the partition's own transient failures
    auto own = methods_.find(RetryKey(e.broker_call().method(), true, e.broker_call().partition()));
    if (own != methods_.end()) CheckCall(e, own->first, own->second);
  }
  auto it = methods_.find(e.broker_call().method());
  if (it != methods_.end()) CheckCall(e, it->first, it->second);
}

void Oracle::CheckCall(const TraceEvent& e, const std::string& method, MethodState& m) {
  const VirtualTime t = e.t_ns();
  if (m.throttled.valid()) Chance(Invariant::kThrottleViolation);
  if (m.transient.valid() && min_backoff_ > 0) Chance(Invariant::kRetryStorm);
  if (m.throttled.valid()) {
    if (t < m.throttled_until && m.throttle_reported) {
      Echo(Invariant::kThrottleViolation);
    } else if (t < m.throttled_until) {
      m.throttle_reported = true;
      Report(Invariant::kThrottleViolation,
             absl::StrCat("The connector called ", method, " again at ", FormatTime(t), ", ",
                          FormatTime(m.throttled_until - t), " before the retry-after of its throttled ", method,
                          " call (until ", FormatTime(m.throttled_until), ") had passed."),
             {m.throttled}, &e);
    } else {
      m.throttled = EventRef{};  // served its time
      m.throttle_reported = false;
    }
  }
  if (m.transient.valid()) {
    const VirtualDuration gap = t - m.transient.t;
    if (min_backoff_ > 0 && gap < min_backoff_ && m.storm_reported) {
      Echo(Invariant::kRetryStorm);
    } else if (min_backoff_ > 0 && gap < min_backoff_) {
      m.storm_reported = true;
      Report(Invariant::kRetryStorm,
             absl::StrCat("The connector retried ", method, " ", FormatTime(gap),
                          " after a transient failure, sooner than the profile's minimum backoff "
                          "of ",
                          FormatTime(min_backoff_), "."),
             {m.transient}, &e);
    } else {
      m.storm_reported = false;  // this retry waited long enough
    }
    m.transient = EventRef{};  // only the next call after a failure is a retry
  }
}

Verdict Oracle::Finish() { return verdict_; }

}  // namespace weir
