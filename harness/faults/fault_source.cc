#include "harness/faults/fault_source.h"

#include "harness/core/prng.h"

namespace weir {

FaultSource::FaultSource(const v1::FaultConfig& config, std::uint64_t seed, TraceLog& trace)
    : config_(config), seed_(seed), trace_(trace), plan_given_(false) {
  for (const auto& d : config_.scripted()) *given_.add_decisions() = d;
  Index(given_, &index_);
}

FaultSource::FaultSource(v1::FaultPlan plan, std::uint64_t seed, TraceLog& trace)
    : seed_(seed), trace_(trace), plan_given_(true), given_(std::move(plan)) {
  Index(given_, &index_);
}

void FaultSource::Index(const v1::FaultPlan& plan, absl::flat_hash_map<Key, int>* index) {
  for (int i = 0; i < plan.decisions_size(); ++i) {
    const auto& d = plan.decisions(i);
    index->emplace(Key{d.site(), d.position(), d.fault_case()}, i);  // first one wins
  }
}

void FaultSource::Trace(const v1::FaultDecision& d, VirtualTime now) {
  auto& e = trace_.Append(now);
  *e.mutable_fault_applied()->mutable_decision() = d;
  trace_.Commit();
}

std::optional<v1::FaultDecision> FaultSource::Decide(v1::Site site, std::uint64_t position,
                                                     v1::FaultDecision::FaultCase kind, VirtualTime now,
                                                     const Draw& draw) {
  std::optional<v1::FaultDecision> out;
  if (auto it = index_.find(Key{site, position, kind}); it != index_.end()) {
    out = given_.decisions(it->second);
  } else if (!plan_given_) {
    v1::FaultDecision d;
    if (draw && draw(&d)) {
      d.set_site(site);
      d.set_position(position);
      out = std::move(d);
    }
  }
  if (!out.has_value()) return out;
  if (!plan_given_) *applied_.add_decisions() = *out;
  Trace(*out, now);
  return out;
}

double FaultSource::Unit(std::string_view stream, std::uint64_t position, std::uint64_t salt) const {
  const std::uint64_t base = Mix64(seed_ ^ Mix64(Fnv1a64(stream)));
  const std::uint64_t x = Mix64(base ^ Mix64(position * 0x9E3779B97F4A7C15ULL + salt));
  return static_cast<double>(x >> 11) * (1.0 / 9007199254740992.0);
}

bool FaultSource::Chance(std::string_view stream, std::uint64_t position, double rate) const {
  if (rate <= 0) return false;
  if (rate >= 1) return true;
  return Unit(stream, position) < rate;
}

std::int64_t FaultSource::Int(std::string_view stream, std::uint64_t position, std::int64_t lo, std::int64_t hi,
                              std::uint64_t salt) const {
  const double u = Unit(stream, position, salt + 1);
  const double span = static_cast<double>(hi) - static_cast<double>(lo) + 1.0;
  std::int64_t v = lo + static_cast<std::int64_t>(u * span);
  return v > hi ? hi : v;
}

}  // namespace weir
