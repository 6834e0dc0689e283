#include "harness/shrink/workload_shrink.h"

#include <algorithm>
#include <map>
#include <optional>

#include "absl/status/status.h"

namespace weir {

const char* WorkloadKnobName(WorkloadKnob knob) {
  switch (knob) {
    case WorkloadKnob::kMessages: return "workload.messages";
    case WorkloadKnob::kSources: return "workload.sources";
    case WorkloadKnob::kPartitions: return "log.partitions";
    case WorkloadKnob::kKeys: return "log.keys";
  }
  return "";
}

namespace {
// scenario.proto: log.keys 0 means 64 distinct keys.
constexpr std::uint64_t kDefaultKeys = 64;
}  // namespace

std::vector<KnobRange> WorkloadKnobs(const v1::Scenario& s) {
  std::vector<KnobRange> knobs;
  knobs.push_back({WorkloadKnob::kMessages, s.workload().messages(), 1});
  if (s.workload().sources_size() > 1) {
    knobs.push_back({WorkloadKnob::kSources, static_cast<std::uint64_t>(s.workload().sources_size()), 1});
  }
  if (s.has_log()) {
    std::uint64_t least = 1;
    for (std::uint32_t p : s.log().idle_partitions()) least = std::max<std::uint64_t>(least, p + 2ull);
    if (s.log().partitions() > least) knobs.push_back({WorkloadKnob::kPartitions, s.log().partitions(), least});
    const std::uint64_t keys = s.log().keys() == 0 ? kDefaultKeys : s.log().keys();
    if (keys > 1) knobs.push_back({WorkloadKnob::kKeys, keys, 1});
  }
  return knobs;
}

v1::Scenario WithKnob(const v1::Scenario& scenario, WorkloadKnob knob, std::uint64_t value) {
  v1::Scenario s = scenario;
  switch (knob) {
    case WorkloadKnob::kMessages: s.mutable_workload()->set_messages(value); break;
    case WorkloadKnob::kSources: {
      auto* sources = s.mutable_workload()->mutable_sources();
      while (static_cast<std::uint64_t>(sources->size()) > value) sources->RemoveLast();
      break;
    }
    case WorkloadKnob::kPartitions: s.mutable_log()->set_partitions(static_cast<std::uint32_t>(value)); break;
    case WorkloadKnob::kKeys: s.mutable_log()->set_keys(static_cast<std::uint32_t>(value)); break;
  }
  return s;
}

namespace {

class Search {
 public:
  Search(const WorkloadRerun& rerun, const WorkloadShrinkOptions& options) : rerun_(rerun), options_(options) {}

  // Seen to fail; nullopt-equivalent false when it held, or the budget is up
  // (nothing unproven is accepted). A harness fault ends the search.
  bool Fails(const v1::Scenario& s, WorkloadRun* run_out) {
    const std::string key = s.SerializeAsString();
    if (auto it = seen_.find(key); it != seen_.end()) {
      *run_out = it->second;
      return it->second.fails;
    }
    if (!error_.ok() || stopped_) return false;
    if ((options_.max_reruns > 0 && reruns_ >= options_.max_reruns) || (options_.stop && options_.stop())) {
      stopped_ = true;
      return false;
    }
    auto run = rerun_(s);
    if (absl::IsCancelled(run.status())) {
      stopped_ = true;
      return false;
    }
    if (!run.ok()) {
      error_ = run.status();
      return false;
    }
    ++reruns_;
    if (options_.progress) options_.progress(reruns_);
    seen_[key] = *run;
    *run_out = *run;
    return run->fails;
  }

  std::uint64_t reruns() const { return reruns_; }
  bool stopped() const { return stopped_; }
  const absl::Status& error() const { return error_; }

 private:
  const WorkloadRerun& rerun_;
  const WorkloadShrinkOptions& options_;
  std::map<std::string, WorkloadRun> seen_;
  std::uint64_t reruns_ = 0;
  bool stopped_ = false;
  absl::Status error_;
};

}  // namespace

absl::StatusOr<WorkloadShrinkResult> ShrinkWorkload(const v1::Scenario& scenario, const WorkloadRerun& rerun,
                                                    const WorkloadShrinkOptions& options) {
  Search search(rerun, options);
  WorkloadShrinkResult result;
  result.scenario = scenario;
  std::map<WorkloadKnob, std::uint64_t> before;
  for (const KnobRange& k : WorkloadKnobs(scenario)) before[k.knob] = k.value;

  for (bool changed = true; changed && !search.stopped() && search.error().ok();) {
    changed = false;
    for (const KnobRange& k : WorkloadKnobs(result.scenario)) {
      // hi: the smallest value seen failing (now); lo: the least value not
      // yet seen to hold.
      std::uint64_t hi = k.value, lo = k.least;
      WorkloadRun run;
      while (lo < hi) {
        // The least value first: often the whole knob goes in one rerun.
        const std::uint64_t mid = lo == k.least && hi == k.value ? lo : lo + (hi - lo) / 2;
        const v1::Scenario candidate = WithKnob(result.scenario, k.knob, mid);
        if (search.Fails(candidate, &run)) {
          hi = mid;
          result.scenario = candidate;
          result.events = run.events;
          result.digest = run.digest;
          changed = true;
        } else {
          if (search.stopped() || !search.error().ok()) break;
          lo = mid + 1;
        }
      }
      if (search.stopped() || !search.error().ok()) break;
    }
  }
  if (!search.error().ok()) return search.error();
  for (const KnobRange& k : WorkloadKnobs(scenario)) {
    std::uint64_t after = k.value;
    for (const KnobRange& now : WorkloadKnobs(result.scenario)) {
      if (now.knob == k.knob) after = now.value;
    }
    // A knob can drop out of the list (sources down to 1, partitions down to
    // their least): read it from the scenario itself.
    if (k.knob == WorkloadKnob::kSources) after = static_cast<std::uint64_t>(result.scenario.workload().sources_size());
    if (k.knob == WorkloadKnob::kPartitions) after = result.scenario.log().partitions();
    if (k.knob == WorkloadKnob::kKeys)
      after = result.scenario.log().keys() == 0 ? kDefaultKeys : result.scenario.log().keys();
    if (after != before[k.knob]) result.changes.push_back({k.knob, before[k.knob], after});
  }
  result.reruns = search.reruns();
  result.budget_reached = search.stopped();
  return result;
}

}  // namespace weir
