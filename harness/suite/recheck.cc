#include "harness/suite/recheck.h"

#include <algorithm>
#include <queue>
#include <utility>

#include "absl/status/status.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "harness/core/prng.h"

namespace weir {

absl::StatusOr<RecheckRule> ParseRecheckRule(std::string_view text) {
  RecheckRule rule;
  if (text.empty() || text == "sample") {
    rule.kind = RecheckRule::Kind::kSample;
  } else if (text == "all") {
    rule.kind = RecheckRule::Kind::kAll;
  } else if (text == "none") {
    rule.kind = RecheckRule::Kind::kNone;
  } else if (text.find_first_not_of("0123456789") == std::string_view::npos &&
             absl::SimpleAtoi(absl::string_view(text.data(), text.size()), &rule.count)) {
    rule.kind = RecheckRule::Kind::kCount;
  } else {
    return absl::InvalidArgumentError(
        absl::StrCat("--recheck is '", std::string(text),
                     "'; expected a number of pairs to rerun (N), all, none or sample (the default)"));
  }
  return rule;
}

RecheckSample::RecheckSample(const RecheckRule& rule, std::string_view suite_digest, std::uint64_t pairs_total)
    : rule_(rule), pairs_(pairs_total) {
  switch (rule.kind) {
    case RecheckRule::Kind::kNone: size_ = 0; break;
    case RecheckRule::Kind::kAll: size_ = pairs_total; break;
    case RecheckRule::Kind::kSample: size_ = pairs_total == 0 ? 0 : std::max<std::uint64_t>(1, pairs_total / 10); break;
    case RecheckRule::Kind::kCount: size_ = std::min(rule.count, pairs_total); break;
  }
  if (rule.kind == RecheckRule::Kind::kNone || rule.kind == RecheckRule::Kind::kAll || size_ == 0) return;
  // The size_ smallest (key, index) pairs, kept in a max-heap: memory grows
  // with the sample, not with the suite.
  const std::uint64_t base = Fnv1a64(suite_digest);
  std::priority_queue<std::pair<std::uint64_t, std::uint64_t>> heap;
  for (std::uint64_t i = 0; i < pairs_total; ++i) {
    const std::pair<std::uint64_t, std::uint64_t> entry{Mix64(base ^ Mix64(i)), i};
    if (heap.size() < size_) {
      heap.push(entry);
    } else if (entry < heap.top()) {
      heap.pop();
      heap.push(entry);
    }
  }
  chosen_.reserve(heap.size());
  for (; !heap.empty(); heap.pop()) chosen_.push_back(heap.top().second);
  std::sort(chosen_.begin(), chosen_.end());
}

bool RecheckSample::Contains(std::uint64_t pair_index) const {
  switch (rule_.kind) {
    case RecheckRule::Kind::kNone: return false;
    case RecheckRule::Kind::kAll: return pair_index < pairs_;
    default: return std::binary_search(chosen_.begin(), chosen_.end(), pair_index);
  }
}

std::string RecheckSample::Describe() const {
  switch (rule_.kind) {
    case RecheckRule::Kind::kNone: return "none";
    case RecheckRule::Kind::kAll: return "every pair";
    case RecheckRule::Kind::kSample:
      return absl::StrCat(size_, " of ", pairs_, " pairs sampled by the suite digest (1 in 10, at least 1)",
                          " plus every failing run");
    case RecheckRule::Kind::kCount:
      return absl::StrCat(size_, " of ", pairs_, " pairs sampled by the suite digest (--recheck ", rule_.count,
                          ") plus every failing run");
  }
  return "none";
}

}  // namespace weir
