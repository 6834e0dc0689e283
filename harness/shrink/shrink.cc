#include "harness/shrink/shrink.h"

#include <algorithm>
#include <map>
#include <optional>
#include <utility>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"

namespace weir {

bool RerunResult::Fails(Invariant invariant) const {
  return std::find(failed.begin(), failed.end(), invariant) != failed.end();
}

namespace {

using Decisions = std::vector<v1::FaultDecision>;

v1::FaultPlan ToPlan(const Decisions& d) {
  v1::FaultPlan plan;
  for (const auto& x : d) *plan.add_decisions() = x;
  return plan;
}

std::string Key(const Decisions& d) {
  std::string key;
  for (const auto& x : d) {
    std::string one;
    x.SerializeToString(&one);
    absl::StrAppend(&key, one.size(), ":", one);
  }
  return key;
}

// The next later crash point of the same occurrence, or nullopt at the end
// of the protocol order (or past a bound on the call count).
std::optional<v1::Crash> LaterCrash(const v1::Crash& c) {
  constexpr std::uint32_t kMaxAfterCalls = 64;
  v1::Crash next;
  const std::uint32_t calls = std::max<std::uint32_t>(1, c.after_calls());
  switch (c.point()) {
    case v1::BEFORE_STEP:
      next.set_point(v1::IN_STEP_AFTER_BROKER_CALL);
      next.set_after_calls(1);
      return next;
    case v1::AFTER_CHECKPOINT_BEFORE_COMMIT: next.set_point(v1::AFTER_COMMIT_BEFORE_NOTICE); return next;
    case v1::AFTER_COMMIT_BEFORE_NOTICE:
      next.set_point(v1::IN_NOTICE_AFTER_ACK);
      next.set_after_calls(1);
      return next;
    case v1::IN_STEP_AFTER_BROKER_CALL:
    case v1::IN_NOTICE_AFTER_ACK:
    case v1::IN_NOTICE_AFTER_BOOKMARK_SAVE:
      if (calls >= kMaxAfterCalls) return std::nullopt;
      next.set_point(c.point());
      next.set_after_calls(calls + 1);
      return next;
    default: return std::nullopt;
  }
}

class Search {
 public:
  Search(const Rerun& rerun, const ShrinkOptions& options, std::size_t original_size)
      : rerun_(rerun), options_(options) {
    progress_.original_decisions = original_size;
    progress_.current_decisions = original_size;
  }

  // True when `d` is known to fail the target. Unknown (budget reached) counts
  // as not failing, so nothing unproven is ever accepted.
  bool Fails(const Decisions& d) {
    auto result = Run(d);
    return result != nullptr && result->Fails(options_.target);
  }

  // The (memoized) result of running `d`; nullptr when the budget is reached or
  // a rerun failed (error() says which).
  const RerunResult* Run(const Decisions& d) {
    const std::string key = Key(d);
    if (auto it = memo_.find(key); it != memo_.end()) return &it->second;
    if (stopped()) return nullptr;
    if ((options_.max_reruns > 0 && reruns_ >= options_.max_reruns) || (options_.stop && options_.stop())) {
      budget_reached_ = true;
      return nullptr;
    }
    auto r = rerun_(ToPlan(d));
    if (absl::IsCancelled(r.status())) {
      budget_reached_ = true;  // interrupted: this rerun has no result
      return nullptr;
    }
    ++reruns_;
    if (!r.ok()) {
      error_ = r.status();
      return nullptr;
    }
    auto [it, inserted] = memo_.emplace(key, std::move(*r));
    progress_.reruns = reruns_;
    if (options_.progress) options_.progress(progress_);
    return &it->second;
  }

  // ddmin over *c (which fails). Returns true when it ended 1-minimal.
  bool RemoveDecisions(Decisions* c) {
    progress_.phase = ShrinkProgress::Phase::kRemoving;
    Note(*c);
    if (!c->empty() && Fails({})) {
      ++removal_steps_;
      c->clear();
      Note(*c);
    }
    std::size_t n = 2;
    while (c->size() >= 2) {
      n = std::min(n, c->size());
      const std::vector<Decisions> parts = Split(*c, n);
      bool reduced = false;
      for (const auto& part : parts) {  // reduce to a subset
        if (Fails(part)) {
          *c = part;
          n = 2;
          reduced = true;
          break;
        }
        if (stopped()) return false;
      }
      if (!reduced && n > 2) {  // reduce to a complement (for n == 2 they are the subsets)
        for (std::size_t i = 0; i < parts.size(); ++i) {
          Decisions complement;
          for (std::size_t j = 0; j < parts.size(); ++j) {
            if (j != i) complement.insert(complement.end(), parts[j].begin(), parts[j].end());
          }
          if (Fails(complement)) {
            *c = std::move(complement);
            n = std::max<std::size_t>(n - 1, 2);
            reduced = true;
            break;
          }
          if (stopped()) return false;
        }
      }
      if (stopped()) return false;
      if (reduced) {
        ++removal_steps_;
        Note(*c);
        continue;
      }
      if (n >= c->size()) break;  // every single removal tried: 1-minimal
      n = std::min(c->size(), 2 * n);
    }
    if (c->size() == 1 && Fails({})) {  // known from the start; memoized
      c->clear();
      Note(*c);
    }
    return !stopped();
  }

  std::uint64_t reruns() const { return reruns_; }
  std::uint64_t removal_steps() const { return removal_steps_; }
  std::uint64_t weakening_steps() const { return weakening_steps_; }
  bool budget_reached() const { return budget_reached_; }
  const absl::Status& error() const { return error_; }
  bool stopped() const { return budget_reached_ || !error_.ok(); }

  // A numeric fault field: reads and writes it on a decision.
  struct Field {
    std::int64_t (*get)(const v1::FaultDecision&);
    void (*set)(v1::FaultDecision*, std::int64_t);
    std::int64_t lowest;
  };

  // The smallest value of field f of (*c)[i] in [f.lowest, current] that still
  // fails, by bisection (assumes roughly: the longer, the more it fails).
  bool Shorten(Decisions* c, std::size_t i, const Field& f) {
    std::int64_t good = f.get((*c)[i]);
    if (good <= f.lowest) return false;
    const std::int64_t start = good;
    Decisions trial = *c;
    const auto fails_with = [&](std::int64_t v) {
      f.set(&trial[i], v);
      return Fails(trial);
    };
    std::int64_t bad = f.lowest - 1;
    if (fails_with(f.lowest)) {
      good = f.lowest;
    } else {
      bad = f.lowest;
      while (good - bad > 1 && !stopped()) {
        const std::int64_t mid = bad + (good - bad) / 2;
        if (fails_with(mid)) {
          good = mid;
        } else {
          bad = mid;
        }
      }
    }
    if (good == start) return false;
    f.set(&(*c)[i], good);
    ++weakening_steps_;
    Note(*c);
    return true;
  }

  // Moves the crash of (*c)[i] to later points while it still fails.
  bool PostponeCrash(Decisions* c, std::size_t i) {
    bool changed = false;
    while (!stopped()) {
      auto later = LaterCrash((*c)[i].crash());
      if (!later) break;
      Decisions trial = *c;
      *trial[i].mutable_crash() = *later;
      if (!Fails(trial)) break;
      *c = std::move(trial);
      ++weakening_steps_;
      changed = true;
      Note(*c);
    }
    return changed;
  }

  // One pass of weakenings over *c (which fails). True when one was accepted.
  bool WeakenAll(Decisions* c) {
    progress_.phase = ShrinkProgress::Phase::kWeakening;
    static constexpr Field kLatency{[](const v1::FaultDecision& d) { return d.latency_ms(); },
                                    [](v1::FaultDecision* d, std::int64_t v) { d->set_latency_ms(v); }, 1};
    static constexpr Field kRetryAfter{[](const v1::FaultDecision& d) { return d.throttle_retry_after_ms(); },
                                       [](v1::FaultDecision* d, std::int64_t v) { d->set_throttle_retry_after_ms(v); },
                                       0};
    static constexpr Field kVisibility{[](const v1::FaultDecision& d) { return d.visibility_delay_ms(); },
                                       [](v1::FaultDecision* d, std::int64_t v) { d->set_visibility_delay_ms(v); }, 1};
    static constexpr Field kOutage{[](const v1::FaultDecision& d) { return d.partition_outage_ms(); },
                                   [](v1::FaultDecision* d, std::int64_t v) { d->set_partition_outage_ms(v); }, 1};
    bool changed = false;
    for (std::size_t i = 0; i < c->size() && !stopped(); ++i) {
      switch ((*c)[i].fault_case()) {
        case v1::FaultDecision::kLatencyMs: changed |= Shorten(c, i, kLatency); break;
        case v1::FaultDecision::kPartitionOutageMs: changed |= Shorten(c, i, kOutage); break;
        case v1::FaultDecision::kThrottleRetryAfterMs: changed |= Shorten(c, i, kRetryAfter); break;
        case v1::FaultDecision::kVisibilityDelayMs: changed |= Shorten(c, i, kVisibility); break;
        case v1::FaultDecision::kCrash: changed |= PostponeCrash(c, i); break;
        default: break;
      }
    }
    return changed;
  }

 private:
  static std::vector<Decisions> Split(const Decisions& c, std::size_t n) {
    std::vector<Decisions> parts;
    std::size_t start = 0;
    for (std::size_t k = 0; k < n; ++k) {
      const std::size_t end = start + (c.size() - start) / (n - k);
      parts.emplace_back(c.begin() + static_cast<std::ptrdiff_t>(start), c.begin() + static_cast<std::ptrdiff_t>(end));
      start = end;
    }
    return parts;
  }

  void Note(const Decisions& c) { progress_.current_decisions = c.size(); }

  const Rerun& rerun_;
  const ShrinkOptions& options_;
  std::map<std::string, RerunResult> memo_;
  std::uint64_t reruns_ = 0;
  std::uint64_t removal_steps_ = 0;
  std::uint64_t weakening_steps_ = 0;
  bool budget_reached_ = false;
  absl::Status error_;
  ShrinkProgress progress_;
};

}  // namespace

absl::StatusOr<ShrinkResult> ShrinkPlan(const v1::FaultPlan& original, const std::string& original_digest,
                                        const Rerun& rerun, const ShrinkOptions& options) {
  if (options.target == Invariant::kCount) {
    return absl::InvalidArgumentError("shrink: no target invariant");
  }
  const Decisions start(original.decisions().begin(), original.decisions().end());
  Search search(rerun, options, start.size());
  ShrinkResult result;

  const RerunResult* first = search.Run(start);
  if (first == nullptr) {
    if (!search.error().ok()) return search.error();
    result.budget_reached = true;  // not even the reproduction fitted the budget
    result.minimal = original;
    result.reruns = search.reruns();
    return result;
  }
  result.original_run = *first;
  const char* target = InvariantName(options.target);
  if (!first->Fails(options.target)) {
    result.outcome = ShrinkOutcome::kNondeterministic;
    result.nondeterminism = absl::StrCat("the unchanged fault plan no longer fails ", target,
                                         first->failed.empty() ? " (every invariant held)" : "");
  } else if (!original_digest.empty() && first->digest != original_digest) {
    result.outcome = ShrinkOutcome::kNondeterministic;
    result.nondeterminism = absl::StrCat("the unchanged fault plan gave trace digest ", first->digest,
                                         ", the original run ", original_digest);
  }
  if (result.outcome == ShrinkOutcome::kNondeterministic) {
    result.minimal = original;
    result.reruns = search.reruns();
    return result;
  }

  Decisions c = start;
  bool one_minimal = false;
  constexpr int kMaxRounds = 16;  // removal then weakening; weakenings are finite anyway
  for (int round = 0; round < kMaxRounds; ++round) {
    one_minimal = search.RemoveDecisions(&c);
    if (!one_minimal) break;
    if (!search.WeakenAll(&c)) break;
    one_minimal = false;  // a weakened plan needs its removals tried again
  }
  if (!search.error().ok()) return search.error();

  result.minimal = ToPlan(c);
  const RerunResult* last = search.Run(c);  // memoized: every accepted plan was run
  result.minimal_run = last != nullptr ? *last : *first;
  result.reruns = search.reruns();
  result.removal_steps = search.removal_steps();
  result.weakening_steps = search.weakening_steps();
  result.one_minimal = one_minimal && !search.budget_reached();
  result.budget_reached = search.budget_reached();
  return result;
}

}  // namespace weir
