// File: shrink.h
//
// Shrinking a failing run's fault plan: the smallest, weakest plan under which
// the same invariant still fails. Pure search, no I/O and no clock: the caller
// supplies `Rerun` (run the scenario and seed under a given plan; the CLI
// plugs in the gRPC edge, tests the in-process host) and, if it wants a
// wall-time bound, a `stop` predicate.
//
// The search, in order:
//   1. Reproduce: rerun the unchanged plan. If the target invariant does not
//      fail, or the trace digest differs from the original run's, the
//      connector is nondeterministic (or the plan does not reproduce the run)
//      and nothing is shrunk: a plan shrunk against a coin toss means nothing.
//   2. Remove: delta debugging over the plan's decisions (ddmin, A. Zeller and
//      R. Hildebrandt, "Simplifying and Isolating Failure-Inducing Input",
//      IEEE TSE 28(2), 2002): try subsets, then complements, at ever finer
//      granularity, until no single decision can be removed.
//   3. Weaken what remains, keeping each change only if the invariant still
//      fails: shorter latencies, visibility delays and retry-after hints (the
//      smallest value that still fails, by bisection), later crash points
//      (BEFORE_STEP → IN_STEP_AFTER_BROKER_CALL after 1, 2, … calls;
//      AFTER_CHECKPOINT_BEFORE_COMMIT → AFTER_COMMIT_BEFORE_NOTICE →
//      IN_NOTICE_AFTER_ACK after 1, 2, … acks). Flags (duplicate, lost_ack,
//      reorder, broker_restart, commit_failure) and transient errors can only
//      be removed. After any weakening, step 2 runs again.
// It ends 1-minimal (`one_minimal`): removing any single decision of the
// result makes the target invariant hold. Every plan it accepts was seen to
// fail, so even a search stopped by its budget returns a failing plan.
//
// Reruns of a plan already tried are answered from memory and not counted.
//
// Example:
//   ShrinkOptions o;
//   o.target = Invariant::kDuplicateOutput;
//   auto r = ShrinkPlan(plan, original_digest, [&](const v1::FaultPlan& p) {
//     return RerunWith(p); }, o);
//   if (r.ok() && r->outcome == ShrinkOutcome::kShrunk) Save(r->minimal);
//
// Thread safety: none; calls rerun, stop and progress on the calling thread.
#pragma once

#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "harness/oracle/verdict.h"
#include "weir/v1/faults.pb.h"

namespace weir {

// What one rerun under a plan showed.
struct RerunResult {
  std::vector<Invariant> failed;  // the invariants that failed
  std::string digest;             // of the trace's event lines
  std::uint64_t events = 0;
  std::uint64_t steps = 0;

  bool Fails(Invariant invariant) const;
};

// Runs the scenario and seed under exactly `plan`. Errors are harness faults
// and end the search.
using Rerun = std::function<absl::StatusOr<RerunResult>(const v1::FaultPlan& plan)>;

struct ShrinkProgress {
  enum class Phase { kReproducing, kRemoving, kWeakening };
  Phase phase = Phase::kReproducing;
  std::uint64_t reruns = 0;  // counted reruns so far
  std::size_t original_decisions = 0;
  std::size_t current_decisions = 0;  // of the smallest failing plan so far
};

struct ShrinkOptions {
  Invariant target = Invariant::kCount;  // REQUIRES: a real invariant
  std::uint64_t max_reruns = 0;          // 0: no limit
  // Polled before every rerun; true stops the search (e.g. wall time is up).
  // A rerun that returns CANCELLED (abandoned by a signal) stops it the same
  // way: the search ends with the smallest failing plan found so far.
  std::function<bool()> stop;
  // Called after every counted rerun.
  std::function<void(const ShrinkProgress&)> progress;
};

enum class ShrinkOutcome {
  kShrunk,            // `minimal` fails the target (1-minimal unless stopped early)
  kNondeterministic,  // the unchanged plan did not fail the same way; nothing shrunk
};

struct ShrinkResult {
  ShrinkOutcome outcome = ShrinkOutcome::kShrunk;
  std::string nondeterminism;  // kNondeterministic: what differed, in one sentence

  v1::FaultPlan minimal;              // kShrunk: the smallest failing plan found
  RerunResult original_run;           // the rerun of the unchanged plan
  RerunResult minimal_run;            // the run of `minimal`
  std::uint64_t reruns = 0;           // counted reruns, the reproduction included
  std::uint64_t removal_steps = 0;    // accepted reductions
  std::uint64_t weakening_steps = 0;  // accepted weakenings
  bool one_minimal = false;           // every single removal was tried and held the target
  bool budget_reached = false;        // stopped by max_reruns or stop()
};

// Shrinks `original` for options.target. `original_digest`, when not empty, is
// the digest of the run that produced the plan; a reproduction with another
// digest is nondeterminism. Errors: the first harness fault of a rerun.
[[nodiscard]] absl::StatusOr<ShrinkResult> ShrinkPlan(const v1::FaultPlan& original, const std::string& original_digest,
                                                      const Rerun& rerun, const ShrinkOptions& options);

}  // namespace weir
