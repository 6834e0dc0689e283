#include "harness/suite/first_failures.h"

#include <cstdio>
#include <vector>

#include "absl/strings/str_cat.h"

namespace weir {

std::string FirstFailureTraces::PathFor(std::uint64_t pair_index) const {
  return absl::StrCat(dir_, "/pair-", pair_index, ".jsonl");
}

bool FirstFailureTraces::Referenced(std::uint64_t pair_index) const {
  for (const auto& [name, kept] : first_) {
    if (kept.pair_index == pair_index) return true;
  }
  return false;
}

void FirstFailureTraces::Offer(const v1::RunRecord& run) {
  const std::string path = PathFor(run.pair_index());
  std::lock_guard<std::mutex> lock(mu_);
  std::vector<std::uint64_t> replaced;
  if (run.harness_error().empty()) {
    for (const std::string& name : run.failed_invariants()) {
      auto it = first_.find(name);
      if (it != first_.end() && it->second.pair_index < run.pair_index()) continue;
      if (it != first_.end()) replaced.push_back(it->second.pair_index);
      first_[name] = {run.pair_index(), path, run.scenario(), run.seed(), run.replay()};
    }
  }
  if (!Referenced(run.pair_index())) std::remove(path.c_str());
  for (std::uint64_t old : replaced) {
    if (!Referenced(old)) std::remove(PathFor(old).c_str());
  }
}

std::map<std::string, FirstFailureTraces::Kept> FirstFailureTraces::First() const {
  std::lock_guard<std::mutex> lock(mu_);
  return first_;
}

}  // namespace weir
