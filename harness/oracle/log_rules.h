// File: log_rules.h
//
// The oracle's rules for the log shape, as a stream over the trace. The
// Oracle (oracle.h) owns one and hands it every log event (appended, read,
// retention, new partition, bookmark, gap) and every event that moves epochs
// and incarnations; the rules that hold in both shapes (watermark,
// throttling, retries, connector failures) stay in the Oracle.
//
// Words: a record is named by (partition, offset). The *resume point* of a
// partition is the next offset to read; a committed checkpoint carries one per
// partition. A *bookmark* is a position saved at the broker.
//
// Rules (each stated once more in README's oracle table and tested in
// log_rules_test.cc):
//   offset-gap: at the end of the run, every offset appended to a partition
//     has a record in the committed output, except offsets retention deleted
//     before any incarnation had read them and before a committed resume point
//     passed them ("deleted unread": a figure, never a failure), and, when the
//     profile allows gaps, offsets the connector reported as a gap. A
//     partition no incarnation ever read is named as such.
//   duplicate-output: (exactly-once) an offset with a second record in the
//     committed output; under at-least-once, counted as a figure.
//   position-before-commit: a bookmark saved for a partition beyond the resume
//     point of that partition in the last committed checkpoint (the log twin
//     of ack-before-commit).
//   resume-exact: the first Read of each held partition after an Open starts
//     at the resume point Open gave it (the restored checkpoint's, or the
//     span's start); reading further on is a skip, reading earlier a rewind
//     (under at-least-once a rewind is counted, not failed).
//   silent-skip: within an incarnation the records of a partition are emitted
//     in order from its resume point; when the next record emitted jumps past
//     offsets that retention had deleted, the connector must have reported
//     those offsets as a gap first.
//   new-partition: a partition added while the run went on, with records
//     appended to it, is read by some incarnation.
//   watermark-stall, per partition (checked when the profile claims a
//     watermark and idle_timeout_ms > 0): once a partition has had nothing left
//     to emit for longer than idle_timeout + idle_max_lag, it must not hold the
//     watermark back: at the end of each step the watermark is at least the
//     lowest event-time frontier (largest event time emitted in this
//     incarnation) of the partitions that are not idle, minus idle_max_lag.
//     Not checked while such a partition has emitted nothing yet.
//   protocol-error: a record of an offset the emitting incarnation never read.
//
// Many readers (readers > 1; docs/many-readers.md). Every rule above that is
// about "the incarnation" is judged per reader (each reader's view of each
// partition: the span it holds, where it read and emitted); the committed
// output, retention and gaps are shared. A bookmark is judged against the
// saving reader's own committed resume point. And:
//   record-outside-span: a record's offset lies in a span its reader holds at
//     that moment: [start as told, end), not revoked, not cut away.
//   double-holding: when a span is assigned or opened, no other live reader
//     holds any offset of it.
//   cut-conservation: the head of a cut starts where the span did, the tail
//     starts where the head ends and ends where the span did (or the cut is
//     declined: the head is the whole span), and the head holds every offset
//     the reader has emitted from the span.
//   checkpoint-coverage: a reader's checkpoint names a resume point for every
//     partition it holds and for no other, each within its span.
//
// Memory: O(partitions + holes): per partition a few counters and offset
// ranges (committed, deleted unread, reported gaps, the open and pending
// epochs), each a handful of ranges for a reader that goes in order; never
// anything per offset.
//
// Thread safety: none.
#pragma once

#include <cstdint>
#include <deque>
#include <functional>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "harness/core/offset_ranges.h"
#include "harness/core/virtual_time.h"
#include "harness/oracle/verdict.h"
#include "harness/trace/event_ref.h"
#include "weir/v1/scenario.pb.h"
#include "weir/v1/trace.pb.h"

namespace weir {

class LogRules {
 public:
  // Reports one violation: (invariant, sentence, cited events, the event at hand).
  using ReportFn = std::function<void(Invariant, const std::string&, std::vector<EventRef>, const v1::TraceEvent*)>;

  // readers: the run's reader slots (1: one reader; the many-reader rules off).
  LogRules(const v1::Profile& profile, Verdict& verdict, ReportFn report, std::uint32_t readers = 1);

  // True once any log event was seen: the run's broker is a log.
  bool active() const { return active_; }

  void OnAppended(const v1::TraceEvent& e);
  void OnLogRead(const v1::TraceEvent& e);
  void OnRetention(const v1::TraceEvent& e);
  void OnPartitionAdded(const v1::TraceEvent& e);
  void OnBookmarkSaved(const v1::TraceEvent& e);
  void OnGapReported(const v1::TraceEvent& e);
  // A record with a partition and an offset.
  void OnEmitted(const v1::TraceEvent& e);
  void OnCheckpoint(const v1::TraceEvent& e);
  void OnCommitted(const v1::TraceEvent& e);
  void OnCommitFailed(const v1::TraceEvent& e);
  void OnOpened(const v1::TraceEvent& e);
  void OnCrashed(const v1::TraceEvent& e);
  // The end of a step, with the watermark the Oracle holds after it.
  void OnStepped(const v1::TraceEvent& e, std::optional<std::int64_t> watermark, const EventRef& watermark_ref);
  void OnRunEnded(const v1::TraceEvent& e);
  // Many readers.
  void OnAssigned(const v1::TraceEvent& e);
  void OnRevoked(const v1::TraceEvent& e);
  void OnCut(const v1::TraceEvent& e);
  void OnReaderLeft(const v1::TraceEvent& e);
  // Makes reader r's view the current one (every per-reader event first).
  void SwitchTo(std::uint32_t r);

 private:
  // A partition as the broker and the committed output know it (shared).
  // A committed run, kept as evidence for a later duplicate of its offsets.
  struct CommittedRun {
    std::uint64_t from;
    std::uint64_t to;
    EventRef first;   // the emitted event of offset `from`
    EventRef commit;  // the commit that made it durable
  };
  // Committed runs kept per partition (the latest), so memory stays bounded.
  static constexpr std::size_t kRecentCommittedRuns = 8;
  struct Partition {
    std::uint64_t appended = 0;  // next offset to be appended
    std::uint64_t first_retained = 0;
    EventRef added;  // partition_added (invalid for the initial ones)
    EventRef last_retention;
    OffsetRanges committed;
    EventRef first_commit;                      // the commit that first put a record of it in the output
    std::deque<CommittedRun> recent_committed;  // at most kRecentCommittedRuns, oldest first
    std::uint64_t committed_resume = 0;         // the highest committed resume point of any reader
    OffsetRanges deleted_unread;                // excused losses
    OffsetRanges gaps;                          // reported by the connector
    std::uint64_t read_high = 0;                // the furthest any read got
    bool ever_read = false;
    EventRef last_emitted;  // by any reader (kept at commit time)
  };
  // One reader's view of one partition, for its live incarnation.
  struct Live {
    bool held = false;
    std::uint64_t start = 0;           // the span's start as the reader was told
    std::optional<std::uint64_t> end;  // unset: open
    EventRef held_since;               // the opened, assigned or cut event
    std::uint64_t resume = 0;          // what Open (or the partition's start) gave it
    bool first_read_pending = false;
    std::uint64_t expected_next = 0;       // next offset to emit, in order
    std::uint64_t emitted_high = 0;        // one past the highest offset emitted from the span
    std::uint64_t read_next = 0;           // the furthest this incarnation read
    std::optional<std::int64_t> frontier;  // largest event time emitted
    VirtualTime caught_up_since = -1;      // -1: has records left to emit
    EventRef last_read;
    EventRef last_emitted;
    // The run of the open epoch this partition extends: open.runs[open_run]
    // when open_epoch == the view's epoch.
    std::size_t open_run = 0;
    std::uint64_t open_epoch = 0;
  };
  // Consecutive offsets of one partition emitted in one epoch.
  struct Run {
    std::uint32_t partition;
    std::uint64_t from;
    std::uint64_t to;  // exclusive
    EventRef first;    // the emitted event of offset `from`
  };
  struct ResumeAt {
    std::uint32_t reader;
    std::uint32_t partition;
    std::uint64_t next;
  };
  // Records of one epoch, as runs: a reader going in order makes one run per
  // partition, so an epoch costs a vector, not a set per partition. An offset
  // emitted twice within the epoch shows when the runs are committed one by
  // one. With several readers a pending epoch gathers every reader's part.
  struct Epoch {
    std::vector<Run> runs;
    std::vector<ResumeAt> resume_points;
    EventRef checkpoint;
  };
  // One reader: its partitions' live views, its open epoch, its incarnation.
  struct View {
    std::vector<Live> live;
    std::vector<std::uint64_t> committed_resume;  // by partition; survives restarts
    Epoch open;
    std::uint64_t epoch = 1;  // number of the open epoch; a new one at every checkpoint or crash
    std::uint64_t incarnation = 0;
    EventRef opened;
    bool stall_reported = false;  // one violation per incarnation
    bool new_partitions_held = false;
    bool live_reader = false;  // opened and not left
  };

  Partition& At(std::uint32_t p) {
    if (p >= partitions_.size()) partitions_.resize(static_cast<std::size_t>(p) + 1);
    return partitions_[p];
  }
  static Live& LiveOf(View& v, std::uint32_t p) {
    if (p >= v.live.size()) v.live.resize(static_cast<std::size_t>(p) + 1);
    return v.live[p];
  }
  Live& L(std::uint32_t p) { return LiveOf(v_, p); }
  View& ViewOf(std::uint32_t r) { return r == cur_ ? v_ : views_[r]; }
  void UpdateCaughtUp(const Partition& part, Live& live, VirtualTime t);
  void DiscardUncommitted();
  void CheckPartitionStall(const v1::TraceEvent& e, std::optional<std::int64_t> watermark,
                           const EventRef& watermark_ref);
  void Hold(Live& live, std::uint32_t p, const v1::SpanHeld& span, const v1::TraceEvent& e);
  void CheckDoubleHolding(std::uint32_t p, const Live& live, const v1::TraceEvent& e);

  const bool exactly_once_;
  const bool gaps_allowed_;
  const VirtualDuration idle_timeout_;  // 0: the partition stall rule is off
  const VirtualDuration idle_max_lag_;
  const bool many_;
  Verdict& verdict_;
  ReportFn report_;
  bool active_ = false;
  std::vector<Partition> partitions_;
  std::map<std::uint64_t, Epoch> pending_;  // by checkpoint id
  View v_;                                  // the current reader's view
  std::vector<View> views_;                 // every reader's; views_[cur_] is stale while current
  std::uint32_t cur_ = 0;
};

}  // namespace weir
