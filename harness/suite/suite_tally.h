// File: suite_tally.h
//
// What the reports need to know about a suite's runs without reading them:
// per invariant, runs passed and failed and the first failing run, and its
// coverage (runs that judged it, runs that exercised it, chances: the
// InvariantSummary rows of the report), the faults applied, the counts JUnit's <testsuite> and
// the summaries print, the sum of wall times, the first harness fault, and
// the verdict string the certificate carries ("P" or "F" per run).
//
// Invariants: fed in pair order, "first" means first in pair order, and every
// figure equals what a pass over the whole report's runs gives (the wall-time
// sum is added in the same order, so it prints the same digits). Memory is
// constant but for the verdict string: one byte per run (10 kB for 10,000
// runs), kept because the certificate's seal covers it.
//
// Example:
//   SuiteTally tally;
//   for (const auto& run : report.runs()) tally.Add(run);
//   *head.mutable_invariants() = tally.invariants();
//
// Thread safety: none; one thread at a time.
#pragma once

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "weir/v1/suite.pb.h"

namespace weir {

// Appends (name, count) to a list of named counts.
inline void AddCount(google::protobuf::RepeatedPtrField<v1::Count>* list, const std::string& name,
                     std::uint64_t count) {
  v1::Count* c = list->Add();
  c->set_name(name);
  c->set_count(count);
}
// The count named `name`, or null.
inline const v1::Count* FindCount(const google::protobuf::RepeatedPtrField<v1::Count>& list, const std::string& name) {
  for (const v1::Count& c : list) {
    if (c.name() == name) return &c;
  }
  return nullptr;
}

class SuiteTally {
 public:
  // One summary row per invariant, in table order, all zero.
  SuiteTally();
  // The tally of every run of `report`, in the order they are listed.
  static SuiteTally Of(const v1::SuiteReport& report);

  // REQUIRES: runs come in pair order.
  void Add(const v1::RunRecord& run);

  std::uint64_t runs() const { return runs_; }
  std::uint64_t passed() const { return passed_; }
  std::uint64_t failed() const { return runs_ - passed_; }
  // Runs weir could not run (harness_error set).
  std::uint64_t harness_faults() const { return harness_faults_; }
  // Runs that did not pass and have no harness fault: an invariant failed.
  std::uint64_t invariant_failures() const { return invariant_failures_; }
  double wall_seconds() const { return wall_seconds_; }
  const std::string& verdicts() const { return verdicts_; }

  struct HarnessFault {
    std::string scenario;
    std::uint64_t seed = 0;
    std::string error;
  };
  const std::optional<HarnessFault>& first_harness_fault() const { return first_harness_fault_; }

  // The determinism recheck (recheck.h): runs rerun, and those whose rerun
  // gave another trace digest; the first of them in pair order.
  std::uint64_t rechecked() const { return rechecked_; }
  std::uint64_t diverged() const { return diverged_; }
  struct Divergence {
    std::string scenario;
    std::uint64_t seed = 0;
    std::string digest, recheck_digest, divergence, replay;
  };
  const std::optional<Divergence>& first_divergence() const { return first_divergence_; }

  const google::protobuf::RepeatedPtrField<v1::InvariantSummary>& invariants() const { return invariants_; }
  // Coverage: fault decisions that took effect, summed over the runs.
  const std::map<std::string, std::uint64_t>& faults_applied() const { return faults_applied_; }
  // Invariants some run judged that had no chance in any run and never
  // failed: the suite cannot vouch for them (table order).
  std::vector<std::string> not_exercised() const;

 private:
  std::uint64_t runs_ = 0;
  std::uint64_t passed_ = 0;
  std::uint64_t harness_faults_ = 0;
  std::uint64_t invariant_failures_ = 0;
  double wall_seconds_ = 0;
  std::string verdicts_;
  std::optional<HarnessFault> first_harness_fault_;
  std::uint64_t rechecked_ = 0;
  std::uint64_t diverged_ = 0;
  std::optional<Divergence> first_divergence_;
  google::protobuf::RepeatedPtrField<v1::InvariantSummary> invariants_;
  std::map<std::string, std::uint64_t> faults_applied_;
};

}  // namespace weir
