#include "harness/oracle/log_rules.h"

#include <algorithm>

#include "absl/strings/str_cat.h"
#include "harness/core/record_key.h"

namespace weir {

using v1::TraceEvent;

namespace {

bool ClaimsWatermark(const v1::Profile& p) {
  return p.watermark_policy() == v1::Profile::MONOTONIC ||
         p.watermark_policy() == v1::Profile::BOUNDED_LATENESS;
}

std::string Range(std::uint64_t from, std::uint64_t to) {
  return to == from + 1 ? absl::StrCat("offset ", from)
                        : absl::StrCat("offsets [", from, ", ", to, ")");
}

}  // namespace

LogRules::LogRules(const v1::Profile& profile, Verdict& verdict, ReportFn report)
    : exactly_once_(profile.guarantee() == v1::Profile::EXACTLY_ONCE),
      gaps_allowed_(profile.gaps_allowed()),
      idle_timeout_(ClaimsWatermark(profile) ? Millis(profile.idle_timeout_ms()) : 0),
      idle_max_lag_(Millis(profile.has_idle_max_lag_ms() ? profile.idle_max_lag_ms()
                                                         : profile.idle_timeout_ms())),
      verdict_(verdict),
      report_(std::move(report)) {}

void LogRules::UpdateCaughtUp(Partition& part, VirtualTime t) {
  const bool caught_up = part.expected_next >= part.appended;
  if (caught_up && part.caught_up_since < 0) part.caught_up_since = t;
  if (!caught_up) part.caught_up_since = -1;
}

void LogRules::OnAppended(const TraceEvent& e) {
  active_ = true;
  Partition& part = At(e.appended().partition());
  part.appended = std::max(part.appended, e.appended().offset() + 1);
  if (part.held) UpdateCaughtUp(part, e.t_ns());
}

void LogRules::OnPartitionAdded(const TraceEvent& e) {
  active_ = true;
  Partition& part = At(e.partition_added().partition());
  part.added = MakeRef(e);
  if (new_partitions_held_ && !part.held) {
    part.held = true;
    part.resume = 0;
    part.expected_next = 0;
    part.first_read_pending = true;
    UpdateCaughtUp(part, e.t_ns());
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
  part.ever_read = true;
  part.last_read = MakeRef(e);
  if (part.first_read_pending) {
    part.first_read_pending = false;
    if (x.offset() != part.resume) {
      const bool skip = x.offset() > part.resume;
      const std::uint64_t by = skip ? x.offset() - part.resume : part.resume - x.offset();
      if (skip || exactly_once_) {
        report_(Invariant::kResumeExact,
                absl::StrCat("After ", opened_.f[0] != 0 ? "restoring checkpoint " : "opening",
                             opened_.f[0] != 0 ? std::to_string(opened_.f[1]) : std::string(),
                             ", incarnation ", e.incarnation(), " first read partition ",
                             x.partition(), " at offset ", x.offset(), " but its resume point is ",
                             part.resume, ": a ", skip ? "skip" : "rewind", " of ", by,
                             by == 1 ? " offset." : " offsets."),
                {opened_}, &e);
      } else {
        ++verdict_.rewinds;
      }
    }
  }
  if (!x.out_of_range()) {
    part.read_next = std::max(part.read_next, x.next_offset());
    part.read_high = std::max(part.read_high, x.next_offset());
  }
}

void LogRules::OnBookmarkSaved(const TraceEvent& e) {
  active_ = true;
  const auto& x = e.bookmark_saved();
  Partition& part = At(x.partition());
  part.last_bookmark = MakeRef(e);
  if (x.next_offset() > part.committed_resume) {
    report_(Invariant::kPositionBeforeCommit,
            absl::StrCat("The broker received a bookmark for partition ", x.partition(),
                         " at offset ", x.next_offset(),
                         ", beyond its resume point in the last committed checkpoint (",
                         part.committed_resume, "): offsets [", part.committed_resume, ", ",
                         x.next_offset(), ") were not durably committed."),
            {part.first_commit, part.last_emitted}, &e);
  }
}

void LogRules::OnGapReported(const TraceEvent& e) {
  active_ = true;
  const auto& x = e.gap_reported();
  Partition& part = At(x.partition());
  verdict_.gap_offsets +=
      x.to_offset() - x.from_offset() - part.gaps.CountIn(x.from_offset(), x.to_offset());
  part.gaps.Insert(x.from_offset(), x.to_offset());
  if (part.held && x.from_offset() <= part.expected_next) {
    part.expected_next = std::max(part.expected_next, x.to_offset());
    UpdateCaughtUp(part, e.t_ns());
  }
}

void LogRules::OnEmitted(const TraceEvent& e) {
  active_ = true;
  const auto& x = e.emitted();
  const std::uint64_t o = x.offset();
  Partition& part = At(x.partition());
  if (o >= part.read_next) {
    report_(Invariant::kProtocolError,
            absl::StrCat("Step ", x.step(), " emitted a record of partition ", x.partition(),
                         " offset ", o, ", which incarnation ", e.incarnation(),
                         " never read (it read up to offset ", part.read_next, ")."),
            {part.last_read}, &e);
  }
  if (o > part.expected_next) {
    // Offsets skipped over: fine when reported as a gap; a silent jump past
    // records retention deleted is the violation this rule is about. A jump
    // over records still held shows at the end as offset-gap.
    const std::uint64_t deleted_to = std::min(o, part.first_retained);
    const auto unreported = part.gaps.Missing(part.expected_next, deleted_to);
    if (!unreported.empty()) {
      const std::uint64_t n = deleted_to - part.expected_next -
                              part.gaps.CountIn(part.expected_next, deleted_to);
      report_(Invariant::kSilentSkip,
              absl::StrCat("Step ", x.step(), " emitted partition ", x.partition(), " offset ", o,
                           " after offset ", part.expected_next,
                           " without reporting a gap: ", n,
                           " deleted records (", Range(unreported.front().first,
                                                       unreported.back().second),
                           ") were skipped silently."),
              {part.last_retention, part.last_emitted}, &e);
    }
  }
  part.expected_next = std::max(part.expected_next, o + 1);
  if (!part.frontier.has_value() || x.event_time_ns() > *part.frontier) {
    part.frontier = x.event_time_ns();
  }
  // As MakeRef would build it, without its dispatch: this is the hot path.
  EventRef& ref = part.last_emitted;
  ref.seq = e.seq();
  ref.t = e.t_ns();
  ref.incarnation = e.incarnation();
  ref.kind = TraceEvent::kEmitted;
  ref.f[0] = 0;
  ref.f[1] = x.event_time_ns();
  ref.f[2] = static_cast<std::int64_t>(x.step());
  ref.f[3] = static_cast<std::int64_t>(LogRecordKey(x.partition(), o));
  UpdateCaughtUp(part, e.t_ns());
  if (part.open_epoch == epoch_ && open_.runs[part.open_run].to == o) {
    ++open_.runs[part.open_run].to;
  } else {
    part.open_epoch = epoch_;
    part.open_run = open_.runs.size();
    open_.runs.push_back(Run{x.partition(), o, o + 1});
  }
}

void LogRules::OnCheckpoint(const TraceEvent& e) {
  Epoch& epoch = pending_[e.checkpoint().checkpoint_id()];
  epoch.runs.insert(epoch.runs.end(), open_.runs.begin(), open_.runs.end());
  for (const auto& r : e.checkpoint().resume_points()) {
    epoch.resume_points.emplace_back(r.partition(), r.next_offset());
  }
  epoch.checkpoint = MakeRef(e);
  open_.runs.clear();
  ++epoch_;
}

void LogRules::OnCommitted(const TraceEvent& e) {
  auto node = pending_.extract(e.committed().checkpoint_id());
  if (node.empty()) return;
  Epoch& epoch = node.mapped();
  const EventRef committed = MakeRef(e);
  std::uint64_t duplicates = 0;
  std::optional<std::pair<std::uint32_t, std::uint64_t>> example;
  for (const Run& run : epoch.runs) {
    Partition& part = At(run.partition);
    if (!example.has_value() && run.from < part.committed.end()) {
      // Some offset of the run may be committed already: name the first.
      const auto fresh = part.committed.Missing(run.from, run.to);
      const std::uint64_t first_held =
          fresh.empty() || fresh.front().first > run.from ? run.from : fresh.front().second;
      if (first_held < run.to) example = std::make_pair(run.partition, first_held);
    }
    const std::uint64_t already = part.committed.Insert(run.from, run.to);
    duplicates += already;
    if (!part.first_commit.valid()) part.first_commit = committed;
  }
  for (const auto& [p, next] : epoch.resume_points) At(p).committed_resume = next;
  verdict_.duplicate_records += duplicates;
  if (duplicates > 0 && exactly_once_) {
    std::vector<EventRef> cited = {epoch.checkpoint, At(example->first).first_commit};
    report_(Invariant::kDuplicateOutput,
            absl::StrCat("Partition ", example->first, " offset ", example->second,
                         " has a second record in the committed output (checkpoint ",
                         e.committed().checkpoint_id(), ": ", duplicates,
                         duplicates == 1 ? " duplicate record)." : " duplicate records)."),
            std::move(cited), &e);
  }
}

void LogRules::OnCommitFailed(const TraceEvent& e) {
  pending_.erase(e.commit_failed().checkpoint_id());
}

void LogRules::DiscardUncommitted() {
  open_.runs.clear();
  ++epoch_;
  pending_.clear();
}

void LogRules::OnCrashed(const TraceEvent& /*e*/) { DiscardUncommitted(); }

void LogRules::OnOpened(const TraceEvent& e) {
  DiscardUncommitted();
  opened_ = MakeRef(e);
  incarnation_ = e.incarnation();
  stall_reported_ = false;
  new_partitions_held_ = e.opened().new_partitions_held();
  if (e.opened().spans_size() > 0) active_ = true;
  for (Partition& part : partitions_) {
    part.held = false;
    part.first_read_pending = false;
    part.read_next = 0;
    part.frontier.reset();
    part.caught_up_since = -1;
  }
  for (const auto& span : e.opened().spans()) {
    Partition& part = At(span.partition());
    part.held = true;
    part.resume = span.start_offset();
    part.expected_next = span.start_offset();
    part.first_read_pending = true;
    UpdateCaughtUp(part, e.t_ns());
  }
  if (new_partitions_held_) {
    for (std::uint32_t p = 0; p < partitions_.size(); ++p) {
      Partition& part = partitions_[p];
      if (part.held) continue;
      part.held = true;
      part.resume = 0;
      part.expected_next = 0;
      part.first_read_pending = true;
      UpdateCaughtUp(part, e.t_ns());
    }
  }
}

void LogRules::OnStepped(const TraceEvent& e, std::optional<std::int64_t> watermark,
                         const EventRef& watermark_ref) {
  if (!active_ || idle_timeout_ == 0 || stall_reported_) return;
  CheckPartitionStall(e, watermark, watermark_ref);
}

void LogRules::CheckPartitionStall(const TraceEvent& e, std::optional<std::int64_t> watermark,
                                   const EventRef& watermark_ref) {
  const VirtualTime t = e.t_ns();
  const VirtualDuration idle_after = idle_timeout_ + idle_max_lag_;
  std::optional<std::uint32_t> idle_partition;
  std::optional<std::int64_t> lowest;  // lowest frontier among partitions still active
  std::uint32_t lowest_partition = 0;
  for (std::uint32_t p = 0; p < partitions_.size(); ++p) {
    const Partition& part = partitions_[p];
    if (!part.held) continue;
    const bool idle = part.caught_up_since >= 0 && t - part.caught_up_since > idle_after;
    if (idle) {
      if (!idle_partition.has_value()) idle_partition = p;
      continue;
    }
    if (!part.frontier.has_value()) return;  // cannot tell where it stands yet
    if (!lowest.has_value() || *part.frontier < *lowest) {
      lowest = part.frontier;
      lowest_partition = p;
    }
  }
  if (!idle_partition.has_value() || !lowest.has_value()) return;
  const std::int64_t floor = *lowest - idle_max_lag_;
  if (watermark.has_value() && *watermark >= floor) return;
  stall_reported_ = true;
  const Partition& idle = partitions_[*idle_partition];
  report_(Invariant::kWatermarkStall,
          absl::StrCat("Partition ", *idle_partition, " has had nothing to read for ",
                       FormatTime(t - idle.caught_up_since), " (longer than the profile's ",
                       FormatTime(idle_timeout_), " plus ", FormatTime(idle_max_lag_),
                       ") and holds the watermark back: it is ",
                       watermark.has_value() ? FormatTime(*watermark) : std::string("not set"),
                       " while partition ", lowest_partition,
                       ", the slowest still active, has reached event time ",
                       FormatTime(*lowest), " (allowed lag: ", FormatTime(idle_max_lag_), ")."),
          {idle.last_emitted, watermark_ref}, &e);
}

void LogRules::OnRunEnded(const TraceEvent& e) {
  if (!active_) return;
  for (std::uint32_t p = 0; p < partitions_.size(); ++p) {
    const Partition& part = partitions_[p];
    if (part.appended == 0) continue;
    if (!part.ever_read && part.added.valid()) {
      report_(Invariant::kNewPartition,
              absl::StrCat("Partition ", p, " was added at ", FormatTime(part.added.t),
                           " and was never read: none of its ", part.appended,
                           " records reached the committed output."),
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
    report_(Invariant::kOffsetGap,
            absl::StrCat(part.ever_read ? "Partition " : "Partition (never read) ", p, ": ", lost,
                         lost == 1 ? " offset has" : " offsets have",
                         " no record in the committed output when the run ended (",
                         e.run_ended().reason(), "); the first missing: ",
                         Range(holes.front().first, holes.front().second),
                         holes.size() > 1 ? absl::StrCat(", and ", holes.size() - 1, " more ranges")
                                          : std::string(),
                         "."),
            {part.last_read, part.last_emitted, part.last_retention}, &e);
  }
}

}  // namespace weir
