// File: guided_search.h
//
// Guided search for a failing run: spends a budget of runs on a connector,
// choosing what to run by feedback instead of drawing blind seeds. Pure
// search, no I/O and no clock: the caller supplies `SearchRun` (run one
// candidate; the CLI plugs in the gRPC edge, tests a fake) and, if it wants a
// wall-time bound, a `stop` predicate.
//
// A candidate is a scenario (by index), a seed, and either
//   - a swarm configuration: some of the scenario's fault kinds switched off
//     (their rates set to 0) and the rest drawn from the seed as usual — swarm
//     testing (A. Groce, C. Zhang, E. Eide, Y. Chen, J. Regehr, "Swarm
//     Testing", ISSTA 2012): a run with fewer kinds of fault reaches states a
//     run with all of them switched on rarely does; or
//   - an exact fault plan, mutated from one in the corpus.
// Feedback: a run's features (FeaturesOf): each rule that had chances (by
// order of magnitude), each fault kind and place applied, and each pair of
// them applied in the same run. A run that shows a feature not seen before
// joins the corpus with the plan it actually applied. Mutations of a corpus
// plan: drop a decision, move one (its position ±1..3), copy one from another
// corpus plan of the same scenario (two faults that were each seen alone meet
// in one run), pair one up (a decision of another kind at the same site put at
// the very next position after one of the plan's), copy one to another
// position, weaken one (halve a latency, delay or retry-after). Fresh draws (half of the runs) visit the scenarios in
// turn. Blind mode (`blind`) draws seed after seed, the scenarios in turn, with
// every fault kind on, for comparison.
//
// The search stops at the first failing run (or, with `collect`, goes on and
// keeps one finding per distinct set of failed invariants) or when the budget
// is spent. Runs of the same (scenario, seed, plan) are not repeated.
//
// Determinism: the choice of every candidate is a pure function of
// `options.seed` and the feedback so far.
//
// Thread safety: none; calls run, stop and progress on the calling thread.
#pragma once

#include <cstdint>
#include <functional>
#include <optional>
#include <set>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "harness/oracle/verdict.h"
#include "weir/v1/faults.pb.h"

namespace weir {

struct SearchCandidate {
  std::size_t scenario = 0;  // index into the caller's scenarios
  std::uint64_t seed = 0;
  // Draw mode: the rate fields (names in FaultConfig) switched off.
  std::vector<std::string> switched_off;
  // Plan mode: exactly this plan.
  std::optional<v1::FaultPlan> plan;
};

// What one run showed.
struct SearchFeedback {
  std::vector<Invariant> failed;
  std::vector<std::string> features;  // FeaturesOf(verdict)
  v1::FaultPlan plan;                 // the plan the run applied
};

using SearchRun = std::function<absl::StatusOr<SearchFeedback>(const SearchCandidate&)>;

struct SearchScenario {
  // The scenario's fault-rate fields that are not zero (RatesOn()).
  std::vector<std::string> rates_on;
};

struct SearchProgress {
  std::uint64_t runs = 0;
  std::size_t features = 0;
  std::size_t corpus = 0;
  std::size_t findings = 0;
  bool last_was_new = false;  // the last run showed a new feature
};

struct SearchOptions {
  std::vector<SearchScenario> scenarios;  // REQUIRES: not empty
  std::uint64_t budget = 100;             // runs
  std::uint64_t seed = 1;                 // of the search's own choices
  std::uint64_t first_seed = 1;           // run seeds are drawn from here on
  bool blind = false;
  bool collect = false;  // go on after a failure, one finding per distinct failure
  std::function<bool()> stop;
  std::function<void(const SearchProgress&)> progress;
};

struct SearchFinding {
  SearchCandidate candidate;  // plan set: the plan the failing run applied
  std::vector<Invariant> failed;
  std::uint64_t run = 0;  // 1-based: the run that found it
};

struct SearchResult {
  std::uint64_t runs = 0;
  std::size_t features = 0;
  std::size_t corpus = 0;
  std::vector<SearchFinding> findings;
  // Features seen after each run (for the coverage-against-runs plot).
  std::vector<std::size_t> features_after_run;
};

// Errors: a run's harness fault (the search ends there).
[[nodiscard]] absl::StatusOr<SearchResult> GuidedSearch(const SearchOptions& options, const SearchRun& run);

// A run's features: "chance <rule> ≥10^k" for each rule with chances,
// "fault <kind at place>" for each fault applied, "pair <a> + <b>" for each
// two of them, "failed <rule>" for each failure.
std::vector<std::string> FeaturesOf(const Verdict& verdict);

// The fields of a fault configuration a swarm may switch off (double fields
// named *_rate, and the latency, token-bucket and throttle-window blocks)
// that are on (not zero, set, not empty), in field order; and the
// configuration with some switched off.
std::vector<std::string> RatesOn(const v1::FaultConfig& config);
void SwitchOff(const std::vector<std::string>& fields, v1::FaultConfig* config);

}  // namespace weir
