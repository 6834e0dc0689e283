// File: workload_shrink.h
//
// Shrinking a failing run's workload, after its fault plan (shrink.h): a
// 1-decision plan can still replay thousands of events. With the plan fixed,
// the search lowers the scenario's workload numbers — how many messages, how
// many sources, partitions and keys — while the same invariant still fails.
// Pure search, no I/O and no clock: the caller supplies `WorkloadRerun` (run
// the scenario under the minimal plan; the CLI plugs in the gRPC edge, tests
// a fake) and, if it wants a wall-time bound, a `stop` predicate.
//
// The search: for each knob in turn (knobs below), first the knob's least
// value, then bisection between the least value not yet seen to fail and the
// smallest value seen failing (halving). Passes over all knobs repeat until a
// pass changes nothing. Only values seen to fail are ever accepted, so the
// result always fails, even when the predicate is not monotonic (a smaller
// workload that passes between two that fail) or the budget stops the search.
// Each knob costs about log2(value) reruns; candidates already tried are
// answered from memory and not counted.
//
// Knobs (only those the scenario has):
//   workload.messages   least 1
//   workload.sources    how many of the listed sources are used (a prefix), least 1
//   log.partitions      least 1, or one above the highest idle partition
//   log.keys            least 1 (0 in the file means the default, 64)
// Not shrunk: timings (a shorter drain bound could make a loss by itself),
// readers (the plan names reader indexes), faults (the plan is fixed).
//
// Example:
//   auto r = ShrinkWorkload(scenario, [&](const v1::Scenario& s) { return RunUnderMinimalPlan(s); }, {});
//   if (r.ok() && r->changed()) Save(r->scenario);
//
// Thread safety: none; calls rerun, stop and progress on the calling thread.
#pragma once

#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "weir/v1/scenario.pb.h"

namespace weir {

enum class WorkloadKnob { kMessages, kSources, kPartitions, kKeys };

// "workload.messages", "workload.sources", "log.partitions", "log.keys".
const char* WorkloadKnobName(WorkloadKnob knob);

struct KnobRange {
  WorkloadKnob knob;
  std::uint64_t value = 0;  // now
  std::uint64_t least = 0;  // the smallest value the search tries
};

// The knobs `scenario` has, with their values and least values, in the order
// the search takes them.
std::vector<KnobRange> WorkloadKnobs(const v1::Scenario& scenario);
// `scenario` with `knob` set to `value`. REQUIRES: value >= the knob's least.
v1::Scenario WithKnob(const v1::Scenario& scenario, WorkloadKnob knob, std::uint64_t value);

// What one rerun of a candidate scenario showed.
struct WorkloadRun {
  bool fails = false;        // the target invariant failed
  std::uint64_t events = 0;  // trace events of the run
  std::string digest;        // of its event lines
};

// Errors are harness faults and end the search; CANCELLED (a signal) stops it
// like `stop`, keeping the smallest failing scenario so far.
using WorkloadRerun = std::function<absl::StatusOr<WorkloadRun>(const v1::Scenario& scenario)>;

struct WorkloadShrinkOptions {
  std::uint64_t max_reruns = 0;  // 0: no limit
  std::function<bool()> stop;    // polled before every rerun
  // Called after every counted rerun with the reruns so far.
  std::function<void(std::uint64_t reruns)> progress;
};

struct KnobChange {
  WorkloadKnob knob;
  std::uint64_t before = 0;
  std::uint64_t after = 0;
};

struct WorkloadShrinkResult {
  v1::Scenario scenario;            // the smallest failing workload found
  std::vector<KnobChange> changes;  // the knobs that went down, in knob order
  // The run of `scenario` (empty when unchanged: the caller has it).
  std::uint64_t events = 0;
  std::string digest;
  std::uint64_t reruns = 0;     // counted reruns
  bool budget_reached = false;  // stopped by max_reruns, stop() or CANCELLED
  bool changed() const { return !changes.empty(); }
};

// REQUIRES: `scenario` is seen to fail (the caller's minimal run).
[[nodiscard]] absl::StatusOr<WorkloadShrinkResult> ShrinkWorkload(const v1::Scenario& scenario,
                                                                  const WorkloadRerun& rerun,
                                                                  const WorkloadShrinkOptions& options);

}  // namespace weir
