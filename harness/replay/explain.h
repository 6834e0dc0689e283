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
//     protocol errors, and steps that moved the watermark.
// The trace is read three times as a stream; memory is bounded by the
// oracle's in-flight state and kMaxLines per violation.
#pragma once

#include <string>

#include "absl/status/statusor.h"

namespace weir {

struct ExplainOutput {
  std::string text;
  bool passed = true;  // no checked invariant failed
};

// Errors: a bad trace file (InvalidArgument/NotFound "file:line: …").
[[nodiscard]] absl::StatusOr<ExplainOutput> ExplainTrace(const std::string& path);

}  // namespace weir
