#include "harness/search/guided_search.h"

#include <algorithm>

#include "absl/container/flat_hash_map.h"
#include "absl/container/flat_hash_set.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "harness/core/prng.h"

namespace weir {
namespace {

using google::protobuf::FieldDescriptor;

// The fields of FaultConfig a swarm configuration may switch off: rates
// (double fields named *_rate) and whole fault blocks (latency, the token
// bucket, throttle windows); never the scripted decisions.
bool Switchable(const FieldDescriptor* f) {
  if (f->name() == "scripted") return false;
  if (f->cpp_type() == FieldDescriptor::CPPTYPE_MESSAGE) return true;
  return f->cpp_type() == FieldDescriptor::CPPTYPE_DOUBLE && absl::EndsWith(f->name(), "_rate");
}

// One corpus entry: a run that showed something new, and the plan it applied.
struct Entry {
  std::size_t scenario;
  std::uint64_t seed;
  v1::FaultPlan plan;
  std::vector<std::string> features;
};

// A key for "this exact run was tried": scenario, seed, and the plan or the
// switched-off kinds.
std::string CandidateKey(const SearchCandidate& c) {
  std::string key = absl::StrCat(c.scenario, "/", c.seed, "/");
  if (c.plan.has_value()) {
    std::string bytes;
    c.plan->SerializeToString(&bytes);  // no maps in a plan: the same plan gives the same bytes
    absl::StrAppend(&key, "plan:", bytes);
  } else {
    for (const auto& f : c.switched_off) absl::StrAppend(&key, f, ",");
  }
  return key;
}

class Search {
 public:
  Search(const SearchOptions& options, const SearchRun& run)
      : options_(options), run_(run), rng_(PrngStream::Derive(options.seed, "guided-search")) {}

  absl::StatusOr<SearchResult> Go() {
    std::uint64_t attempts = 0;
    // Candidates already tried are not run again; give up after a while
    // (saturating: a huge --budget must not wrap the bound to a small one).
    constexpr std::uint64_t kMax = ~std::uint64_t{0};
    const std::uint64_t max_attempts = options_.budget > (kMax - 100) / 20 ? kMax : options_.budget * 20 + 100;
    while (result_.runs < options_.budget) {
      if (options_.stop && options_.stop()) break;
      if (++attempts > max_attempts) break;
      SearchCandidate c = Next();
      if (!tried_.insert(CandidateKey(c)).second) continue;
      auto fb = run_(c);
      if (!fb.ok()) return fb.status();
      ++result_.runs;
      bool is_new = false;
      for (const std::string& f : fb->features) {
        is_new |= seen_.insert(f).second;
        ++hits_[f];
      }
      if (is_new && !options_.blind) corpus_.push_back(Entry{c.scenario, c.seed, fb->plan, fb->features});
      result_.features_after_run.push_back(seen_.size());
      if (!fb->failed.empty()) {
        std::vector<Invariant> failed = fb->failed;
        std::sort(failed.begin(), failed.end());
        if (distinct_.insert(Key(failed)).second) {
          SearchCandidate found = c;
          found.plan = fb->plan;
          result_.findings.push_back(SearchFinding{std::move(found), fb->failed, result_.runs});
        }
      }
      if (options_.progress) {
        options_.progress({result_.runs, seen_.size(), corpus_.size(), result_.findings.size(), is_new});
      }
      if (!result_.findings.empty() && !options_.collect) break;
    }
    result_.features = seen_.size();
    result_.corpus = corpus_.size();
    return result_;
  }

 private:
  static std::string Key(const std::vector<Invariant>& failed) {
    std::string k;
    for (Invariant i : failed) absl::StrAppend(&k, InvariantName(i), ",");
    return k;
  }

  std::uint64_t Below(std::uint64_t n) { return n == 0 ? 0 : rng_.NextU64() % n; }
  bool Coin(double p) { return rng_.Bernoulli(p); }

  SearchCandidate Next() {
    SearchCandidate c;
    // Fresh draws visit the scenarios in turn, each with the next seed.
    const auto fresh = [&] {
      c.scenario = next_scenario_++ % options_.scenarios.size();
      c.seed = options_.first_seed + next_seed_++;
    };
    if (options_.blind) {
      fresh();
      return c;
    }
    // Explore (a fresh seed, maybe a swarm of fault kinds) half of the time,
    // and whenever there is nothing to mutate yet; else mutate a corpus plan.
    if (corpus_.empty() || Coin(0.5)) {
      fresh();
      // Half of the fresh draws keep every kind on; the others are a swarm.
      if (Coin(0.5)) {
        for (const std::string& f : options_.scenarios[c.scenario].rates_on) {
          if (Coin(0.5)) c.switched_off.push_back(f);
        }
      }
      return c;
    }
    // Half of the time the entry with the rarest feature (seen in the fewest
    // runs; ties: the newest), else any: rare situations are closest to the
    // states no run has explored yet.
    const std::size_t n = corpus_.size();
    std::size_t pick = Below(n);
    if (Coin(0.5)) {
      std::uint64_t best = ~std::uint64_t{0};
      for (std::size_t i = 0; i < n; ++i) {
        std::uint64_t rarest = ~std::uint64_t{0};
        for (const std::string& f : corpus_[i].features) rarest = std::min<std::uint64_t>(rarest, hits_[f]);
        if (rarest <= best) {
          best = rarest;
          pick = i;
        }
      }
    }
    const Entry& e = corpus_[pick];
    c.scenario = e.scenario;
    c.seed = e.seed;
    v1::FaultPlan plan = e.plan;
    const std::uint64_t changes = 1 + Below(3);
    for (std::uint64_t k = 0; k < changes; ++k) Mutate(&plan, e.scenario);
    c.plan = std::move(plan);
    return c;
  }

  void Mutate(v1::FaultPlan* plan, std::size_t scenario) {
    auto* ds = plan->mutable_decisions();
    const int size = ds->size();
    switch (Below(6)) {
      case 0:  // drop one
        if (size > 1) {
          ds->DeleteSubrange(static_cast<int>(Below(static_cast<std::uint64_t>(size))), 1);
          return;
        }
        [[fallthrough]];
      case 1: {  // move one a little
        if (size == 0) break;
        auto* d = ds->Mutable(static_cast<int>(Below(static_cast<std::uint64_t>(size))));
        const std::int64_t delta = static_cast<std::int64_t>(1 + Below(3)) * (Coin(0.5) ? 1 : -1);
        d->set_position(
            static_cast<std::uint64_t>(std::max<std::int64_t>(1, static_cast<std::int64_t>(d->position()) + delta)));
        return;
      }
      case 2: {  // splice: a decision of another run of the same scenario
        std::vector<const Entry*> same;
        for (const Entry& e : corpus_) {
          if (e.scenario == scenario && e.plan.decisions_size() > 0) same.push_back(&e);
        }
        if (same.empty()) break;
        const Entry* other = same[Below(same.size())];
        *ds->Add() =
            other->plan.decisions(static_cast<int>(Below(static_cast<std::uint64_t>(other->plan.decisions_size()))));
        return;
      }
      case 3: {  // copy one to another position
        if (size == 0) break;
        v1::FaultDecision d = ds->Get(static_cast<int>(Below(static_cast<std::uint64_t>(size))));
        d.set_position(1 + Below(d.position() * 2 + 4));
        *ds->Add() = std::move(d);
        return;
      }
      case 4: {  // pair up: a decision of this or another plan, right next to one of this plan's
        if (size == 0) break;
        const v1::FaultDecision& anchor = ds->Get(static_cast<int>(Below(static_cast<std::uint64_t>(size))));
        std::vector<const v1::FaultDecision*> same_site;
        for (const Entry& e : corpus_) {
          if (e.scenario != scenario) continue;
          for (const auto& d : e.plan.decisions()) {
            if (d.site() == anchor.site() && d.fault_case() != anchor.fault_case()) same_site.push_back(&d);
          }
        }
        if (same_site.empty()) break;
        v1::FaultDecision d = *same_site[Below(same_site.size())];
        d.set_position(anchor.position() + 1);  // the very next call or step
        *ds->Add() = std::move(d);
        return;
      }
      default: {  // weaken one
        if (size == 0) break;
        auto* d = ds->Mutable(static_cast<int>(Below(static_cast<std::uint64_t>(size))));
        if (d->has_latency_ms()) d->set_latency_ms(d->latency_ms() / 2);
        if (d->has_visibility_delay_ms()) d->set_visibility_delay_ms(d->visibility_delay_ms() / 2);
        if (d->has_throttle_retry_after_ms()) d->set_throttle_retry_after_ms(d->throttle_retry_after_ms() / 2);
        return;
      }
    }
    // Nothing else applied (an empty plan): add a decision seen in any run.
    std::vector<const Entry*> any;
    for (const Entry& e : corpus_) {
      if (e.scenario == scenario && e.plan.decisions_size() > 0) any.push_back(&e);
    }
    if (any.empty()) return;
    const Entry* other = any[Below(any.size())];
    *ds->Add() =
        other->plan.decisions(static_cast<int>(Below(static_cast<std::uint64_t>(other->plan.decisions_size()))));
  }

  const SearchOptions& options_;
  const SearchRun& run_;
  PrngStream rng_;
  std::uint64_t next_seed_ = 0;
  std::uint64_t next_scenario_ = 0;
  std::vector<Entry> corpus_;
  absl::flat_hash_set<std::string> seen_;
  absl::flat_hash_map<std::string, std::uint64_t> hits_;  // runs that showed each feature
  absl::flat_hash_set<std::string> tried_;
  std::set<std::string> distinct_;
  SearchResult result_;
};

}  // namespace

absl::StatusOr<SearchResult> GuidedSearch(const SearchOptions& options, const SearchRun& run) {
  if (options.scenarios.empty()) return absl::InvalidArgumentError("guided search: no scenario");
  return Search(options, run).Go();
}

std::vector<std::string> FeaturesOf(const Verdict& verdict) {
  std::vector<std::string> out;
  for (int i = 0; i < kInvariantCount; ++i) {
    const InvariantResult& r = verdict.results[i];
    const char* name = InvariantName(static_cast<Invariant>(i));
    if (r.judged() && r.chances > 0) {
      // By order of magnitude: ten times as many chances is news, one more is not.
      // Integer arithmetic: the same digits on every platform.
      int magnitude = 0;
      for (std::uint64_t c = r.chances; c >= 10; c /= 10) ++magnitude;
      out.push_back(absl::StrCat("chance ", name, " >=1e", magnitude));
    }
    if (r.checked && r.violations > 0) out.push_back(absl::StrCat("failed ", name));
  }
  std::vector<std::string> faults;
  for (const auto& [fault, n] : verdict.faults_applied) faults.push_back(fault);
  for (std::size_t a = 0; a < faults.size(); ++a) {
    out.push_back("fault " + faults[a]);
    for (std::size_t b = a + 1; b < faults.size(); ++b)
      out.push_back(absl::StrCat("pair ", faults[a], " + ", faults[b]));
  }
  return out;
}

std::vector<std::string> RatesOn(const v1::FaultConfig& config) {
  std::vector<std::string> out;
  const auto* d = config.GetDescriptor();
  const auto* r = config.GetReflection();
  for (int i = 0; i < d->field_count(); ++i) {
    const FieldDescriptor* f = d->field(i);
    if (!Switchable(f)) continue;
    const bool on = f->is_repeated()                                    ? r->FieldSize(config, f) > 0
                    : f->cpp_type() == FieldDescriptor::CPPTYPE_MESSAGE ? r->HasField(config, f)
                                                                        : r->GetDouble(config, f) > 0;
    if (on) out.push_back(f->name());
  }
  return out;
}

void SwitchOff(const std::vector<std::string>& fields, v1::FaultConfig* config) {
  const auto* d = config->GetDescriptor();
  const auto* r = config->GetReflection();
  for (const std::string& name : fields) {
    const FieldDescriptor* f = d->FindFieldByName(name);
    if (f != nullptr && Switchable(f)) r->ClearField(config, f);
  }
}

}  // namespace weir
