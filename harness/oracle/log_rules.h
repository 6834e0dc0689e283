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
// Memory: O(partitions + holes): per partition a few counters and offset
// ranges (committed, deleted unread, reported gaps, the open and pending
// epochs), each a handful of ranges for a reader that goes in order; never
// anything per offset.
//
// Thread safety: none.
#pragma once

#include <cstdint>
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
  using ReportFn = std::function<void(Invariant, const std::string&, std::vector<EventRef>,
                                      const v1::TraceEvent*)>;

  LogRules(const v1::Profile& profile, Verdict& verdict, ReportFn report);

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
  void OnStepped(const v1::TraceEvent& e, std::optional<std::int64_t> watermark,
                 const EventRef& watermark_ref);
  void OnRunEnded(const v1::TraceEvent& e);

 private:
  struct Partition {
    // The broker's side.
    std::uint64_t appended = 0;        // next offset to be appended
    std::uint64_t first_retained = 0;
    EventRef added;                    // partition_added (invalid for the initial ones)
    EventRef last_retention;
    // The committed side.
    OffsetRanges committed;
    EventRef first_commit;             // the commit that first put a record of it in the output
    std::uint64_t committed_resume = 0;  // in the last committed checkpoint
    OffsetRanges deleted_unread;       // excused losses
    OffsetRanges gaps;                 // reported by the connector
    std::uint64_t read_high = 0;       // the furthest any read got
    bool ever_read = false;
    // The live incarnation.
    bool held = false;
    std::uint64_t resume = 0;          // what Open (or the partition's start) gave it
    bool first_read_pending = false;
    std::uint64_t expected_next = 0;   // next offset to emit, in order
    std::uint64_t read_next = 0;       // the furthest this incarnation read
    std::optional<std::int64_t> frontier;  // largest event time emitted
    VirtualTime caught_up_since = -1;  // -1: has records left to emit
    EventRef last_read;
    EventRef last_emitted;
    EventRef last_bookmark;
    // The run of the open epoch this partition extends: open_.runs[open_run]
    // when open_epoch == epoch_ (the open epoch's number).
    std::size_t open_run = 0;
    std::uint64_t open_epoch = 0;
  };
  // Consecutive offsets of one partition emitted in one epoch.
  struct Run {
    std::uint32_t partition;
    std::uint64_t from;
    std::uint64_t to;  // exclusive
  };
  // Records of one epoch, as runs: a reader going in order makes one run per
  // partition, so an epoch costs a vector, not a set per partition. An offset
  // emitted twice within the epoch shows when the runs are committed one by
  // one.
  struct Epoch {
    std::vector<Run> runs;
    std::vector<std::pair<std::uint32_t, std::uint64_t>> resume_points;
    EventRef checkpoint;
  };

  Partition& At(std::uint32_t p) {
    if (p >= partitions_.size()) partitions_.resize(static_cast<std::size_t>(p) + 1);
    return partitions_[p];
  }
  void UpdateCaughtUp(Partition& part, VirtualTime t);
  void DiscardUncommitted();
  void CheckPartitionStall(const v1::TraceEvent& e, std::optional<std::int64_t> watermark,
                           const EventRef& watermark_ref);

  const bool exactly_once_;
  const bool gaps_allowed_;
  const VirtualDuration idle_timeout_;  // 0: the partition stall rule is off
  const VirtualDuration idle_max_lag_;
  Verdict& verdict_;
  ReportFn report_;
  bool active_ = false;
  bool new_partitions_held_ = false;
  std::vector<Partition> partitions_;
  Epoch open_;
  std::uint64_t epoch_ = 1;  // number of the open epoch; a new one at every checkpoint or crash
  std::map<std::uint64_t, Epoch> pending_;  // by checkpoint id
  std::uint64_t incarnation_ = 0;
  EventRef opened_;
  bool stall_reported_ = false;  // one violation per incarnation
};

}  // namespace weir
