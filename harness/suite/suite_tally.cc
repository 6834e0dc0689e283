#include "harness/suite/suite_tally.h"

#include "harness/oracle/verdict.h"

namespace weir {

SuiteTally::SuiteTally() {
  for (int i = 0; i < kInvariantCount; ++i) {
    invariants_.Add()->set_invariant(InvariantName(static_cast<Invariant>(i)));
  }
}

SuiteTally SuiteTally::Of(const v1::SuiteReport& report) {
  SuiteTally tally;
  for (const v1::RunRecord& run : report.runs()) tally.Add(run);
  return tally;
}

void SuiteTally::Add(const v1::RunRecord& run) {
  ++runs_;
  passed_ += run.passed() ? 1 : 0;
  verdicts_.push_back(run.passed() ? 'P' : 'F');
  wall_seconds_ += run.wall_seconds();
  if (run.rechecked()) {
    ++rechecked_;
    if (!run.recheck_digest().empty() && run.recheck_digest() != run.digest()) {
      ++diverged_;
      if (!first_divergence_.has_value()) {
        first_divergence_ =
            Divergence{run.scenario(), run.seed(), run.digest(), run.recheck_digest(), run.divergence(), run.replay()};
      }
    }
  }
  if (!run.harness_error().empty()) {
    ++harness_faults_;
    if (!first_harness_fault_.has_value()) {
      first_harness_fault_ = HarnessFault{run.scenario(), run.seed(), run.harness_error()};
    }
  } else if (!run.passed()) {
    ++invariant_failures_;
  }
  for (const v1::Count& f : run.faults_applied()) faults_applied_[f.name()] += f.count();
  for (v1::InvariantSummary& s : invariants_) {
    bool failed = false;
    for (const auto& name : run.failed_invariants()) failed |= name == s.invariant();
    if (const v1::Count* c = FindCount(run.chances(), s.invariant()); c != nullptr) {
      s.set_runs_judged(s.runs_judged() + 1);
      s.set_chances(s.chances() + c->count());
      if (c->count() > 0 || failed) s.set_runs_exercised(s.runs_exercised() + 1);
    }
    if (!failed) {
      if (run.harness_error().empty()) s.set_runs_passed(s.runs_passed() + 1);
      continue;
    }
    if (s.runs_failed() == 0) {
      s.set_first_failing_scenario(run.scenario());
      s.set_first_failing_seed(run.seed());
      s.set_first_failing_replay(run.replay());
    }
    s.set_runs_failed(s.runs_failed() + 1);
  }
}

std::vector<std::string> SuiteTally::not_exercised() const {
  std::vector<std::string> out;
  for (const v1::InvariantSummary& s : invariants_) {
    if (s.runs_judged() > 0 && s.runs_exercised() == 0 && s.runs_failed() == 0) out.push_back(s.invariant());
  }
  return out;
}

}  // namespace weir
