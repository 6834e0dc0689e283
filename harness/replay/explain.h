// File: explain.h
//
// weir explain: the part of a saved run that matters around each violation,
// as a text timeline. The streaming Oracle is rerun over the trace's events
// (judged by the profile embedded in the header); then, per kept violation,
// the timeline shows grouped by incarnation, with virtual times:
//   - its proving events (marked "=>"),
//   - every event about the messages the proving events name (published,
//     delivered, records, acks, nacks, leases),
//   - within a window around each proving event: checkpoints, commits, commit
//     failures, notices, crashes, opens, exits, throttles and broker errors,
//     protocol and connector errors, faults applied, and steps that moved the
//     watermark;
//   - every fault applied at the virtual time of an event shown (a broker
//     restart with the lease expiries it caused), however far from the window.
// The same pass also selects, for the first violation of each failed
// invariant, the events an HTML timeline draws (html_timeline.h): the text's
// events (faults included) plus every other event in a wider window
// (deliveries, records, acks, steps), at most kMaxDrawnEvents, and the whole run's commits and crashes
// for the overview, at most kMaxOverviewMarks each. What is left out is
// counted so the page can say so.
// The trace is read three times as a stream; memory is bounded by the
// oracle's in-flight state and these per-violation bounds.
#pragma once

#include <cstddef>
#include <string>

#include "absl/status/statusor.h"
#include "harness/report/html_timeline.h"

namespace weir {

struct ExplainOptions {
  // Explain only this invariant (its name, e.g. "lost-message"); empty: all.
  std::string only_invariant;
  // The replay line shown on the HTML page; empty: "weir replay TRACE".
  std::string replay;
};

struct ExplainOutput {
  std::string text;
  bool passed = true;      // no checked invariant failed
  RunTimelines timelines;  // for RunTimelinesHtml
};

inline constexpr std::size_t kMaxDrawnEvents = 240;     // per violation timeline
inline constexpr std::size_t kMaxOverviewMarks = 2000;  // commits, and crashes, per run

// Errors: a bad trace file (InvalidArgument/NotFound "file:line: …").
[[nodiscard]] absl::StatusOr<ExplainOutput> ExplainTrace(const std::string& path, const ExplainOptions& options = {});

}  // namespace weir
