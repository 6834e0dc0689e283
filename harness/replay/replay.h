// File: replay.h
//
// weir replay: reruns a run from a saved trace's header alone (embedded
// scenario, seed, connector argv, and the header's fault plan applied as a
// given plan, like --plan) and compares the rerun's events with the saved
// ones, line by line. Equal lines mean equal events (trace_format.h), so the
// first unequal line is the first event where the connector answered the same
// inputs differently: a nondeterministic connector — unless the connector is
// not the recorded one (its binary or file argument changed: `changes`) or
// never came up (`start_failure`), which the result says instead.
//
// The connector is started as it was resolved at record time
// (connector_identity.h), so a replay works from any directory.
//
// Memory: the rerun writes its trace to a file in a private temporary
// directory; the comparison streams both files and keeps only the first
// difference.
#pragma once

#include <atomic>

#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "harness/edge/grpc_run.h"
#include "harness/trace/trace_log.h"
#include "weir/v1/trace.pb.h"

namespace weir {

struct ReplayOptions {
  Transport transport = Transport::kTcp;
  // Replaces the header's connector argv when not empty (the binary moved).
  std::vector<std::string> connector_argv;
  // When it becomes true the rerun is abandoned (connector killed and
  // reaped) and ReplayTrace returns CANCELLED. Not owned.
  const std::atomic<bool>* stop = nullptr;

  // Debugging the connector (RunSpec has the details). None of these changes
  // the rerun's events: the comparison is the same.
  bool wall_bounds = true;                // false: --no-wall-bounds
  std::vector<std::string> wrapper_argv;  // --wrap: started in front of the connector
  bool echo_output = false;               // the connector's output to weir's stderr
  // > 0: hold the rerun before event #stop_before (1 .. saved events - 1)
  // and call on_hold with where it holds and the saved trace's event
  // #stop_before (described, then its line). Lifts the wall bounds too, so a
  // long hold inside a connector call does not time the call out.
  std::uint64_t stop_before = 0;
  std::function<void(const HoldPoint& at, const std::string& next_what, const std::string& next_line)> on_hold;
};

struct ReplayResult {
  std::string saved_digest;
  std::string rerun_digest;
  std::uint64_t saved_events = 0;
  std::uint64_t rerun_events = 0;
  bool identical = false;
  // First difference (identical == false): event index, and each side's line
  // (without newline); empty when that side had ended.
  std::uint64_t diverged_at = 0;
  std::string expected_line;
  std::string got_line;
  std::string expected_what;  // DescribeEvent, or "the end of the run"
  std::string got_what;
  std::string weir_version;                 // of the saved trace
  std::vector<std::string> connector_argv;  // what was rerun
  // The connector's files that differ from the recorded ones, one line each
  // ("the connector binary changed since this trace was recorded: …").
  std::vector<std::string> changes;
  // Not empty when the rerun's connector never came up where the saved run's
  // did (identical == false): why. A divergence then means nothing.
  std::string start_failure;
};

// Checks the saved trace first (InvalidArgument/NotFound "file:line: …" for a
// bad file, or a stop_before outside the trace), then that the connector can be started (FailedPrecondition "the
// connector cannot start: …"); other errors are harness faults.
[[nodiscard]] absl::StatusOr<ReplayResult> ReplayTrace(const std::string& path, const ReplayOptions& options);

// The comparison ReplayTrace makes, of any two trace files (certify's
// determinism recheck uses it): fills `result`'s digests, event counts,
// `identical` and, at the first difference, diverged_at, both lines and
// their descriptions and start_failure; leaves the other fields alone.
// Errors: a file that cannot be read or is not a whole trace.
[[nodiscard]] absl::Status CompareTraceFiles(const std::string& saved_path, const std::string& rerun_path,
                                             ReplayResult* result);

// Builds the RunSpec a trace header describes (no trace path set), with the
// connector command as given.
RunSpec SpecFromHeader(const v1::TraceHeader& header);

// Why the connector never came up, when `event` is the failure of a "Start"
// call (exited, timed out or refused before its handshake); else nullopt.
std::optional<std::string> StartFailure(const v1::TraceEvent& event);

// Watches a run for the first StartFailure (add to RunSpec::observers).
class StartFailureWatch : public TraceObserver {
 public:
  void OnEvent(const v1::TraceEvent& event) override;
  // The first start failure: its reason and incarnation; empty reason: none.
  const std::string& reason() const { return reason_; }
  std::uint64_t incarnation() const { return incarnation_; }

 private:
  std::string reason_;
  std::uint64_t incarnation_ = 0;
};

}  // namespace weir
