// File: html_timeline.h
//
// A run drawn as SVG inside a self-contained HTML page: no scripts, no
// external fonts, styles or images, no network fetch of any kind. Used by
// `weir explain --html` (one run) and `weir certify --html` (the first failing
// run of each invariant).
//
// What is drawn, per run:
//   - an overview of the whole run against virtual time: one marker per
//     commit and per crash (class "mark commit" / "mark crash"), the proving
//     events, and the stretches each timeline below shows;
//   - per violation, a timeline of the events around it: three lanes (broker,
//     connector, runtime), one column per event in trace order, incarnations
//     as shaded bands, crashes as red rules across the lanes, proving events
//     ringed; each commit is joined to the records of the epoch it closed and
//     each ack to the record of its message; below the lanes, the watermark as
//     a step line against event time, with every record as a dot at its event
//     time (late ones red).
// Every string is escaped with EscapeMarkup (connector-supplied text included);
// the page is well-formed XML as well as HTML, so xmllint can read it.
//
// Bounds: the caller selects the events (RunTimelines carries what was left
// out, and the page says so); this renderer adds no more than it is given.
//
// Example:
//   RunTimelines run = …;                 // from ExplainTrace (harness/replay)
//   std::string page = HtmlPage("weir explain run.jsonl", RunTimelinesHtml(run));
//
// Thread safety: pure functions.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "weir/v1/trace.pb.h"

namespace weir {

// One event shown in a violation's timeline.
struct TimelineEvent {
  v1::TraceEvent event;
  bool proving = false;  // cited by the oracle for this violation
  // Emitted records only: the checkpoint that closed the record's epoch
  // (0: the epoch was never closed in the part of the trace read so far).
  std::uint64_t epoch_checkpoint = 0;
};

struct ViolationTimeline {
  std::string invariant;              // e.g. "ack-before-commit"
  std::string sentence;               // the oracle's one sentence about this violation
  std::vector<TimelineEvent> events;  // in trace order
  std::uint64_t elided = 0;           // selected around the violation but left out (bound)
};

// Whole-run markers for the overview.
struct RunOverview {
  std::uint64_t events = 0;  // events in the trace
  std::int64_t end_ns = 0;   // virtual time of the last event
  struct Mark {
    std::uint64_t seq = 0;
    std::int64_t t_ns = 0;
  };
  std::vector<Mark> commits, crashes;
  std::uint64_t commits_elided = 0, crashes_elided = 0;  // beyond the bound
};

struct RunTimelines {
  std::string title;     // e.g. "scenario steady_parcel_scanners, seed 7"
  std::string source;    // where the run came from (trace path)
  std::string scenario;  // path and name
  std::uint64_t seed = 0;
  std::string connector;  // shell-joined argv
  std::string replay;     // paste-ready replay line (may be empty)
  bool passed = true;
  RunOverview overview;
  std::vector<ViolationTimeline> violations;
  // Violations the oracle counted but that have no timeline here (only the
  // first few of each invariant are kept; pages bound their drawings).
  std::uint64_t violations_not_drawn = 0;
};

// A <section> with the run's header, overview and one timeline per violation.
std::string RunTimelinesHtml(const RunTimelines& run);

// A complete page around `body` (already-escaped markup), with inline styles.
// `title` is escaped here.
std::string HtmlPage(std::string_view title, std::string_view body);

}  // namespace weir
