// File: recheck.h
//
// Certify's determinism recheck: which pairs of a suite are run a second
// time to check that the connector gives the same trace digest again. A
// connector that reads the wall clock, uses unseeded randomness or races
// threads can pass every invariant, yet its failures cannot be replayed; a
// rerun whose digest differs fails the certificate as "nondeterministic".
//
// The rule (docs/certificates.md):
//   sample (the default)  k = max(1, pairs / 10) pairs: 1 in 10, at least 1
//   N                     k = min(N, pairs) pairs
//   all                   every pair
//   none                  nothing, not even failing runs
// and, unless the rule is none, every run that failed an invariant (harness
// faults are not rerun). The k pairs are the ones whose key
//   key(i) = Mix64(Fnv1a64(suite digest) ^ Mix64(i))      (harness/core/prng.h)
// is among the k smallest, ties by pair index: a function of the suite digest
// and the number of pairs only, so every shard of a sharded run, and a rerun
// of the same suite, picks the same pairs.
//
// Example:
//   auto rule = ParseRecheckRule("3");
//   RecheckSample sample(*rule, suite.digest, suite.pairs());
//   if (sample.Contains(pair_index) || failed) { … rerun and compare … }
//
// Thread safety: a RecheckSample is immutable after construction.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "absl/status/statusor.h"

namespace weir {

struct RecheckRule {
  enum class Kind { kNone, kSample, kCount, kAll };
  Kind kind = Kind::kNone;
  std::uint64_t count = 0;  // kCount: N
};

// "sample" (the default, also for ""), "all", "none" or a whole number N.
// Error: InvalidArgument naming what was expected.
[[nodiscard]] absl::StatusOr<RecheckRule> ParseRecheckRule(std::string_view text);

class RecheckSample {
 public:
  RecheckSample() = default;  // rule none
  RecheckSample(const RecheckRule& rule, std::string_view suite_digest, std::uint64_t pairs_total);

  // Whether pair `pair_index` (of the whole suite) is in the sample.
  bool Contains(std::uint64_t pair_index) const;
  // Whether failing runs are rerun (every rule but none).
  bool RechecksFailures() const { return rule_.kind != RecheckRule::Kind::kNone; }
  // Pairs in the sample (failing runs not counted).
  std::uint64_t size() const { return size_; }
  // For the reports: "none", "every pair", or "2 of 24 pairs sampled by the
  // suite digest (1 in 10, at least 1) plus every failing run".
  std::string Describe() const;

 private:
  RecheckRule rule_;
  std::uint64_t pairs_ = 0;
  std::uint64_t size_ = 0;
  std::vector<std::uint64_t> chosen_;  // sorted; empty for all and none
};

}  // namespace weir
