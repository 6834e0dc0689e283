#include "harness/oracle/log_rules.h"

#include <algorithm>

#include "absl/strings/str_cat.h"
#include "harness/core/record_key.h"

namespace weir {

using v1::TraceEvent;

namespace {

bool ClaimsWatermark(const v1::Profile& p) {
  return p.watermark_policy() == v1::Profile::MONOTONIC || p.watermark_policy() == v1::Profile::BOUNDED_LATENESS;
}

std::string Range(std::uint64_t from, std::uint64_t to) {
  return to == from + 1 ? absl::StrCat("offset ", from) : absl::StrCat("offsets [", from, ", ", to, ")");
}

std::string SpanText(std::uint32_t p, std::uint64_t start, std::optional<std::uint64_t> end) {
  return absl::StrCat("partition ", p, " [", start, ", ", end.has_value() ? absl::StrCat(*end) : std::string("open"),
                      ")");
}

std::optional<std::uint64_t> EndOf(const v1::SpanHeld& s) {
  return s.has_end_offset() ? std::optional<std::uint64_t>(s.end_offset()) : std::nullopt;
}

}  // namespace

LogRules::LogRules(const v1::Profile& profile, Verdict& verdict, ReportFn report, std::uint32_t readers)
    : exactly_once_(profile.guarantee() == v1::Profile::EXACTLY_ONCE),
      gaps_allowed_(profile.gaps_allowed()),
      idle_timeout_(ClaimsWatermark(profile) ? Millis(profile.idle_timeout_ms()) : 0),
      idle_max_lag_(Millis(profile.has_idle_max_lag_ms() ? profile.idle_max_lag_ms() : profile.idle_timeout_ms())),
      many_(readers > 1),
      verdict_(verdict),
      report_(std::move(report)),
      views_(std::max<std::uint32_t>(readers, 1)) {}

void LogRules::SwitchTo(std::uint32_t r) {
  if (r == cur_ || r >= views_.size()) return;
  std::swap(v_, views_[cur_]);
  std::swap(v_, views_[r]);
  cur_ = r;
}

void LogRules::UpdateCaughtUp(const Partition& part, Live& live, VirtualTime t) {
  const bool caught_up = live.expected_next >= part.appended;
  if (caught_up && live.caught_up_since < 0) live.caught_up_since = t;
  if (!caught_up) live.caught_up_since = -1;
}

void LogRules::OnAppended(const TraceEvent& e) {
  active_ = true;
  const std::uint32_t p = e.appended().partition();
  Partition& part = At(p);
  part.appended = std::max(part.appended, e.appended().offset() + 1);
  if (p < v_.live.size() && v_.live[p].held) UpdateCaughtUp(part, v_.live[p], e.t_ns());
  if (many_) {
    for (std::uint32_t r = 0; r < views_.size(); ++r) {
      if (r == cur_ || p >= views_[r].live.size() || !views_[r].live[p].held) continue;
      UpdateCaughtUp(part, views_[r].live[p], e.t_ns());
    }
  }
}

void LogRules::OnPartitionAdded(const TraceEvent& e) {
  active_ = true;
  const std::uint32_t p = e.partition_added().partition();
  Partition& part = At(p);
  part.added = MakeRef(e);
  for (std::uint32_t r = 0; r < views_.size(); ++r) {
    View& v = ViewOf(r);
    if (!v.new_partitions_held) continue;
    Live& live = LiveOf(v, p);
    if (live.held) continue;
    live.held = true;
    live.start = 0;
    live.end.reset();
    live.resume = 0;
    live.expected_next = 0;
    live.emitted_high = 0;
    live.first_read_pending = true;
    UpdateCaughtUp(part, live, e.t_ns());
  }
}

void LogRules::OnRetention(const TraceEvent& e) {
  active_ = true;
  const auto& x = e.retention_deleted();
  Partition& part = At(x.partition());
  const std::uint64_t from = part.first_retained;
  const std::uint64_t to = std::max(from, x.first_retained_offset());
  part.first_retained = to;
  part.last_retention = MakeRef(e);
  // What nobody read and no committed resume point passed was lost to
  // retention before the pipeline had a chance: excused, but counted.
  const std::uint64_t unread_from = std::max({from, part.read_high, part.committed_resume});
  for (const auto& [a, b] : part.committed.Missing(unread_from, to)) {
    verdict_.deleted_unread += b - a - part.deleted_unread.CountIn(a, b);
    part.deleted_unread.Insert(a, b);
  }
}

void LogRules::OnLogRead(const TraceEvent& e) {
  active_ = true;
  const auto& x = e.log_read();
  Partition& part = At(x.partition());
  Live& live = L(x.partition());
  part.ever_read = true;
  live.last_read = MakeRef(e);
  if (live.first_read_pending) {
    live.first_read_pending = false;
    if (x.offset() != live.resume) {
      const bool skip = x.offset() > live.resume;
      const std::uint64_t by = skip ? x.offset() - live.resume : live.resume - x.offset();
      if (skip || exactly_once_) {
        const EventRef& opened = v_.opened;
        report_(Invariant::kResumeExact,
                absl::StrCat("After ", opened.f[0] != 0 ? "restoring checkpoint " : "opening",
                             opened.f[0] != 0 ? std::to_string(opened.f[1]) : std::string(), ", incarnation ",
                             e.incarnation(), " first read partition ", x.partition(), " at offset ", x.offset(),
                             " but its resume point is ", live.resume, ": a ", skip ? "skip" : "rewind", " of ", by,
                             by == 1 ? " offset." : " offsets."),
                {live.held_since.valid() ? live.held_since : opened}, &e);
      } else {
        ++verdict_.rewinds;
      }
    }
  }
  if (!x.out_of_range()) {
    live.read_next = std::max(live.read_next, x.next_offset());
    part.read_high = std::max(part.read_high, x.next_offset());
  }
}

void LogRules::OnBookmarkSaved(const TraceEvent& e) {
  active_ = true;
  const auto& x = e.bookmark_saved();
  Partition& part = At(x.partition());
  const std::uint64_t committed = x.partition() < v_.committed_resume.size() ? v_.committed_resume[x.partition()] : 0;
  if (x.next_offset() > committed) {
    report_(Invariant::kPositionBeforeCommit,
            absl::StrCat("The broker received a bookmark for partition ", x.partition(), " at offset ", x.next_offset(),
                         ", beyond its resume point in the last committed checkpoint (", committed, "): offsets [",
                         committed, ", ", x.next_offset(), ") were not durably committed."),
            {part.first_commit, L(x.partition()).last_emitted}, &e);
  }
}

void LogRules::OnGapReported(const TraceEvent& e) {
  active_ = true;
  const auto& x = e.gap_reported();
  Partition& part = At(x.partition());
  verdict_.gap_offsets += x.to_offset() - x.from_offset() - part.gaps.CountIn(x.from_offset(), x.to_offset());
  part.gaps.Insert(x.from_offset(), x.to_offset());
  Live& live = L(x.partition());
  if (live.held && x.from_offset() <= live.expected_next) {
    live.expected_next = std::max(live.expected_next, x.to_offset());
    UpdateCaughtUp(part, live, e.t_ns());
  }
}

void LogRules::OnEmitted(const TraceEvent& e) {
  active_ = true;
  const auto& x = e.emitted();
  const std::uint64_t o = x.offset();
  Partition& part = At(x.partition());
  Live& live = L(x.partition());
  if (o >= live.read_next) {
    report_(Invariant::kProtocolError,
            absl::StrCat("Step ", x.step(), " emitted a record of partition ", x.partition(), " offset ", o,
                         ", which incarnation ", e.incarnation(), " never read (it read up to offset ", live.read_next,
                         ")."),
            {live.last_read}, &e);
  }
  if (many_ && (!live.held || o < live.start || (live.end.has_value() && o >= *live.end))) {
    report_(Invariant::kRecordOutsideSpan,
            absl::StrCat("Step ", x.step(), " of reader ", e.reader(), " emitted partition ", x.partition(), " offset ",
                         o, ", outside what the reader holds (",
                         live.held ? SpanText(x.partition(), live.start, live.end)
                                   : absl::StrCat("no span of partition ", x.partition()),
                         ")."),
            {live.held_since}, &e);
  }
  if (o > live.expected_next) {
    // Offsets skipped over: fine when reported as a gap; a silent jump past
    // records retention deleted is the violation this rule is about. A jump
    // over records still held shows at the end as offset-gap.
    const std::uint64_t deleted_to = std::min(o, part.first_retained);
    const auto unreported = part.gaps.Missing(live.expected_next, deleted_to);
    if (!unreported.empty()) {
      const std::uint64_t n = deleted_to - live.expected_next - part.gaps.CountIn(live.expected_next, deleted_to);
      report_(Invariant::kSilentSkip,
              absl::StrCat("Step ", x.step(), " emitted partition ", x.partition(), " offset ", o, " after offset ",
                           live.expected_next, " without reporting a gap: ", n, " deleted records (",
                           Range(unreported.front().first, unreported.back().second), ") were skipped silently."),
              {part.last_retention, live.last_emitted}, &e);
    }
  }
  live.expected_next = std::max(live.expected_next, o + 1);
  live.emitted_high = std::max(live.emitted_high, o + 1);
  if (!live.frontier.has_value() || x.event_time_ns() > *live.frontier) {
    live.frontier = x.event_time_ns();
  }
  // As MakeRef would build it, without its dispatch: this is the hot path.
  EventRef& ref = live.last_emitted;
  ref.seq = e.seq();
  ref.t = e.t_ns();
  ref.incarnation = e.incarnation();
  ref.reader = e.reader();
  ref.kind = TraceEvent::kEmitted;
  ref.f[0] = 0;
  ref.f[1] = x.event_time_ns();
  ref.f[2] = static_cast<std::int64_t>(x.step());
  ref.f[3] = static_cast<std::int64_t>(LogRecordKey(x.partition(), o));
  UpdateCaughtUp(part, live, e.t_ns());
  Epoch& open = v_.open;
  if (live.open_epoch == v_.epoch && open.runs[live.open_run].to == o) {
    ++open.runs[live.open_run].to;
  } else {
    live.open_epoch = v_.epoch;
    live.open_run = open.runs.size();
    open.runs.push_back(Run{x.partition(), o, o + 1, ref});
  }
}

void LogRules::OnCheckpoint(const TraceEvent& e) {
  Epoch& epoch = pending_[e.checkpoint().checkpoint_id()];
  epoch.runs.insert(epoch.runs.end(), v_.open.runs.begin(), v_.open.runs.end());
  for (const auto& r : v_.open.runs) At(r.partition).last_emitted = L(r.partition).last_emitted;
  std::vector<bool> named;
  for (const auto& r : e.checkpoint().resume_points()) {
    epoch.resume_points.push_back(ResumeAt{e.reader(), r.partition(), r.next_offset()});
    if (!many_) continue;
    if (r.partition() >= named.size()) named.resize(r.partition() + 1);
    named[r.partition()] = true;
    const Live* live = r.partition() < v_.live.size() ? &v_.live[r.partition()] : nullptr;
    if (live == nullptr || !live->held) {
      report_(Invariant::kCheckpointCoverage,
              absl::StrCat("Checkpoint ", e.checkpoint().checkpoint_id(), " of reader ", e.reader(),
                           " names a resume point for partition ", r.partition(), ", which the reader does not hold."),
              {live != nullptr ? live->held_since : EventRef{}}, &e);
    } else if (r.next_offset() < live->start || (live->end.has_value() && r.next_offset() > *live->end)) {
      report_(Invariant::kCheckpointCoverage,
              absl::StrCat("Checkpoint ", e.checkpoint().checkpoint_id(), " of reader ", e.reader(),
                           " puts the resume point of partition ", r.partition(), " at offset ", r.next_offset(),
                           ", outside the span it holds (", SpanText(r.partition(), live->start, live->end), ")."),
              {live->held_since}, &e);
    }
  }
  if (many_) {
    for (std::uint32_t p = 0; p < v_.live.size(); ++p) {
      if (!v_.live[p].held || (p < named.size() && named[p])) continue;
      report_(Invariant::kCheckpointCoverage,
              absl::StrCat("Checkpoint ", e.checkpoint().checkpoint_id(), " of reader ", e.reader(),
                           " names no resume point for ", SpanText(p, v_.live[p].start, v_.live[p].end),
                           ", which the reader holds: restored, it would lose that span."),
              {v_.live[p].held_since}, &e);
      break;  // one cause: the checkpoint
    }
  }
  epoch.checkpoint = MakeRef(e);
  v_.open.runs.clear();
  ++v_.epoch;
}

void LogRules::OnCommitted(const TraceEvent& e) {
  auto node = pending_.extract(e.committed().checkpoint_id());
  if (node.empty()) return;
  Epoch& epoch = node.mapped();
  const EventRef committed = MakeRef(e);
  std::uint64_t duplicates = 0;
  std::optional<std::pair<std::uint32_t, std::uint64_t>> example;
  // Evidence for the example: the run that holds its first record (and that
  // run's commit), and the run that holds the second.
  std::optional<CommittedRun> example_first;
  const Run* example_second = nullptr;
  for (const Run& run : epoch.runs) {
    Partition& part = At(run.partition);
    if (!example.has_value() && run.from < part.committed.end()) {
      // Some offset of the run may be committed already: name the first.
      const auto fresh = part.committed.Missing(run.from, run.to);
      const std::uint64_t first_held =
          fresh.empty() || fresh.front().first > run.from ? run.from : fresh.front().second;
      if (first_held < run.to) {
        example = std::make_pair(run.partition, first_held);
        example_second = &run;
        for (auto it = part.recent_committed.rbegin(); it != part.recent_committed.rend(); ++it) {
          if (it->from <= first_held && first_held < it->to) {
            example_first = *it;
            break;
          }
        }
      }
    }
    const std::uint64_t already = part.committed.Insert(run.from, run.to);
    duplicates += already;
    if (!part.first_commit.valid()) part.first_commit = committed;
    part.recent_committed.push_back(CommittedRun{run.from, run.to, run.first, committed});
    if (part.recent_committed.size() > kRecentCommittedRuns) part.recent_committed.pop_front();
  }
  for (const ResumeAt& r : epoch.resume_points) {
    View& v = ViewOf(r.reader < views_.size() ? r.reader : 0);
    if (r.partition >= v.committed_resume.size()) v.committed_resume.resize(r.partition + 1);
    v.committed_resume[r.partition] = r.next;
    Partition& part = At(r.partition);
    part.committed_resume = many_ ? std::max(part.committed_resume, r.next) : r.next;
  }
  verdict_.duplicate_records += duplicates;
  if (duplicates > 0 && exactly_once_) {
    // First record and its commit (when still among the partition's recent
    // committed runs; else the partition's first commit), then the second
    // record and its checkpoint. A cited record is the first of its run:
    // the sentence says so when that is not the offset itself.
    std::vector<EventRef> cited;
    if (example_first.has_value()) {
      cited.push_back(example_first->first);
      cited.push_back(example_first->commit);
    } else {
      cited.push_back(At(example->first).first_commit);
    }
    cited.push_back(example_second->first);
    cited.push_back(epoch.checkpoint);
    const bool exact = example_second->from == example->second &&
                       (!example_first.has_value() || example_first->from == example->second);
    report_(Invariant::kDuplicateOutput,
            absl::StrCat("Partition ", example->first, " offset ", example->second,
                         " has a second record in the committed output (checkpoint ", e.committed().checkpoint_id(),
                         ": ", duplicates, duplicates == 1 ? " duplicate record)." : " duplicate records).",
                         exact ? ""
                               : " The records cited begin the runs of offsets that hold its first and "
                                 "second record."),
            std::move(cited), &e);
  }
}

void LogRules::OnCommitFailed(const TraceEvent& e) { pending_.erase(e.commit_failed().checkpoint_id()); }

void LogRules::DiscardUncommitted() {
  v_.open.runs.clear();
  ++v_.epoch;
  // A checkpoint is pending only inside its cycle, where a crash aborts it
  // for every reader (or comes after its commit).
  pending_.clear();
}

void LogRules::OnCrashed(const TraceEvent& /*e*/) { DiscardUncommitted(); }

void LogRules::Hold(Live& live, std::uint32_t p, const v1::SpanHeld& span, const TraceEvent& e) {
  live.held = true;
  live.start = span.start_offset();
  live.end = EndOf(span);
  live.held_since = MakeRef(e);
  live.resume = span.start_offset();
  live.expected_next = span.start_offset();
  live.emitted_high = span.start_offset();
  live.first_read_pending = true;
  live.frontier.reset();
  live.caught_up_since = -1;
  UpdateCaughtUp(At(p), live, e.t_ns());
  if (many_) CheckDoubleHolding(p, live, e);
}

void LogRules::CheckDoubleHolding(std::uint32_t p, const Live& live, const TraceEvent& e) {
  for (std::uint32_t r = 0; r < views_.size(); ++r) {
    if (r == cur_) continue;
    const View& other = views_[r];
    if (!other.live_reader || p >= other.live.size() || !other.live[p].held) continue;
    const Live& o = other.live[p];
    // [live.start, live.end) against [o.start, o.end): the reader's unread
    // part is what counts for o, which may have read on past its start.
    const std::uint64_t a = std::max(live.start, o.start);
    const std::uint64_t b = std::min(live.end.value_or(UINT64_MAX), o.end.value_or(UINT64_MAX));
    if (a >= b) continue;
    report_(Invariant::kDoubleHolding,
            absl::StrCat("Reader ", e.reader(), " was given ", SpanText(p, live.start, live.end), " while reader ", r,
                         " holds ", SpanText(p, o.start, o.end), ": offsets from ", a, " on are held twice."),
            {o.held_since}, &e);
    return;
  }
}

void LogRules::OnOpened(const TraceEvent& e) {
  DiscardUncommitted();
  v_.opened = MakeRef(e);
  v_.incarnation = e.incarnation();
  v_.stall_reported = false;
  v_.live_reader = true;
  v_.new_partitions_held = e.opened().new_partitions_held();
  if (e.opened().spans_size() > 0) active_ = true;
  for (Live& live : v_.live) {  // what it read and emitted before stays citable
    live.held = false;
    live.start = 0;
    live.end.reset();
    live.held_since = EventRef{};
    live.first_read_pending = false;
    live.read_next = 0;
    live.frontier.reset();
    live.caught_up_since = -1;
  }
  for (const auto& span : e.opened().spans()) Hold(L(span.partition()), span.partition(), span, e);
  if (v_.new_partitions_held) {
    for (std::uint32_t p = 0; p < partitions_.size(); ++p) {
      Live& live = L(p);
      if (live.held) continue;
      v1::SpanHeld all;
      all.set_partition(p);
      Hold(live, p, all, e);
    }
  }
}

void LogRules::OnAssigned(const TraceEvent& e) {
  active_ = true;
  for (const auto& span : e.assigned().spans()) Hold(L(span.partition()), span.partition(), span, e);
}

void LogRules::OnRevoked(const TraceEvent& e) {
  for (const auto& span : e.revoked().spans()) {
    Live& live = L(span.partition());
    live = Live{};
  }
}

void LogRules::OnReaderLeft(const TraceEvent& /*e*/) {
  DiscardUncommitted();
  for (Live& live : v_.live) live = Live{};
  v_.live_reader = false;
}

void LogRules::OnCut(const TraceEvent& e) {
  const auto& x = e.cut();
  const std::uint32_t p = x.held().partition();
  Live& live = L(p);
  const std::optional<std::uint64_t> held_end = EndOf(x.held());
  const std::optional<std::uint64_t> head_end = EndOf(x.head());
  std::string wrong;
  if (x.head().start_offset() != x.held().start_offset()) {
    wrong = absl::StrCat("the head starts at ", x.head().start_offset(), ", not where the span did (",
                         x.held().start_offset(), ")");
  } else if (!x.has_tail() && head_end != held_end) {
    wrong = "the cut was declined, but the head is not the whole span";
  } else if (x.has_tail() && (!head_end.has_value() || x.tail().start_offset() != *head_end)) {
    wrong = !head_end.has_value()
                ? std::string("the head has no end")
                : absl::StrCat("the tail starts at ", x.tail().start_offset(), " but the head ends at ", *head_end,
                               x.tail().start_offset() < *head_end
                                   ? ": the two overlap"
                                   : absl::StrCat(": offsets [", *head_end, ", ", x.tail().start_offset(),
                                                  ") belong to neither"));
  } else if (x.has_tail() && EndOf(x.tail()) != held_end) {
    wrong = "the tail does not end where the span did";
  } else if (head_end.has_value() && live.held && live.emitted_high > *head_end) {
    wrong = absl::StrCat("the head ends at ", *head_end, " but the reader had already emitted up to offset ",
                         live.emitted_high - 1);
  }
  if (!wrong.empty()) {
    report_(Invariant::kCutConservation,
            absl::StrCat(
                "Reader ", e.reader(), " answered a cut of ", SpanText(p, x.held().start_offset(), held_end),
                " with head ", SpanText(p, x.head().start_offset(), head_end), x.has_tail() ? " and tail " : "",
                x.has_tail() ? SpanText(p, x.tail().start_offset(), EndOf(x.tail())) : std::string(), ": ", wrong, "."),
            {live.held_since}, &e);
  }
  if (x.has_tail() && live.held) {
    live.end = head_end;
    live.held_since = MakeRef(e);
  }
}

void LogRules::OnStepped(const TraceEvent& e, std::optional<std::int64_t> watermark, const EventRef& watermark_ref) {
  if (!active_ || idle_timeout_ == 0 || v_.stall_reported) return;
  CheckPartitionStall(e, watermark, watermark_ref);
}

void LogRules::CheckPartitionStall(const TraceEvent& e, std::optional<std::int64_t> watermark,
                                   const EventRef& watermark_ref) {
  const VirtualTime t = e.t_ns();
  const VirtualDuration idle_after = idle_timeout_ + idle_max_lag_;
  std::optional<std::uint32_t> idle_partition;
  std::optional<std::int64_t> lowest;  // lowest frontier among partitions still active
  std::uint32_t lowest_partition = 0;
  for (std::uint32_t p = 0; p < v_.live.size(); ++p) {
    const Live& live = v_.live[p];
    if (!live.held) continue;
    // A closed span read to its end holds nothing back.
    if (live.end.has_value() && live.expected_next >= *live.end) continue;
    const bool idle = live.caught_up_since >= 0 && t - live.caught_up_since > idle_after;
    if (idle) {
      if (!idle_partition.has_value()) idle_partition = p;
      continue;
    }
    if (!live.frontier.has_value()) return;  // cannot tell where it stands yet
    if (!lowest.has_value() || *live.frontier < *lowest) {
      lowest = live.frontier;
      lowest_partition = p;
    }
  }
  if (!idle_partition.has_value() || !lowest.has_value()) return;
  ++verdict_.at(Invariant::kWatermarkStall).chances;  // the rule judges an idle partition
  const std::int64_t floor = *lowest - idle_max_lag_;
  if (watermark.has_value() && *watermark >= floor) return;
  v_.stall_reported = true;
  const Live& idle = v_.live[*idle_partition];
  report_(Invariant::kWatermarkStall,
          absl::StrCat("Partition ", *idle_partition, " has had nothing to read for ",
                       FormatTime(t - idle.caught_up_since), " (longer than the profile's ", FormatTime(idle_timeout_),
                       " plus ", FormatTime(idle_max_lag_), ") and holds the watermark back: it is ",
                       watermark.has_value() ? FormatTime(*watermark) : std::string("not set"), " while partition ",
                       lowest_partition, ", the slowest still active, has reached event time ", FormatTime(*lowest),
                       " (allowed lag: ", FormatTime(idle_max_lag_), ")."),
          {idle.last_emitted, watermark_ref}, &e);
}

void LogRules::OnRunEnded(const TraceEvent& e) {
  if (!active_) return;
  for (std::uint32_t p = 0; p < partitions_.size(); ++p) {
    const Partition& part = partitions_[p];
    if (part.appended == 0) continue;
    if (!part.ever_read && part.added.valid()) {
      report_(
          Invariant::kNewPartition,
          absl::StrCat("Partition ", p, " was added at ", FormatTime(part.added.t), " and was never read: none of its ",
                       part.appended, " records reached the committed output."),
          {part.added}, &e);
      continue;
    }
    std::uint64_t lost = 0;
    std::vector<std::pair<std::uint64_t, std::uint64_t>> holes;
    for (const auto& [a, b] : part.committed.Missing(0, part.appended)) {
      for (const auto& [c, d] : part.deleted_unread.Missing(a, b)) {
        if (gaps_allowed_) {
          for (const auto& hole : part.gaps.Missing(c, d)) holes.push_back(hole);
        } else {
          holes.emplace_back(c, d);
        }
      }
    }
    for (const auto& [a, b] : holes) lost += b - a;
    if (lost == 0) continue;
    // The latest read and record of the partition by any reader.
    EventRef last_read, last_emitted = part.last_emitted;
    for (std::uint32_t r = 0; r < views_.size(); ++r) {
      const View& v = ViewOf(r);
      if (p >= v.live.size()) continue;
      if (v.live[p].last_read.seq >= last_read.seq) last_read = v.live[p].last_read;
      if (v.live[p].last_emitted.valid() && v.live[p].last_emitted.seq >= last_emitted.seq) {
        last_emitted = v.live[p].last_emitted;
      }
    }
    report_(Invariant::kOffsetGap,
            absl::StrCat(
                part.ever_read ? "Partition " : "Partition (never read) ", p, ": ", lost,
                lost == 1 ? " offset has" : " offsets have", " no record in the committed output when the run ended (",
                e.run_ended().reason(), "); the first missing: ", Range(holes.front().first, holes.front().second),
                holes.size() > 1 ? absl::StrCat(", and ", holes.size() - 1, " more ranges") : std::string(), "."),
            {last_read, last_emitted, part.last_retention}, &e);
  }
}

}  // namespace weir
