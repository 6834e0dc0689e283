// File: fault_source.h
//
// Decides which faults happen where. Every decision is keyed by a logical
// position — (site, position), e.g. the 17th pull or the 3rd checkpoint —
// never by wall time. Two modes:
//   - draw: rates from the scenario's FaultConfig, plus its scripted
//     decisions; every fault that applies is recorded, so the run's fault plan
//     materializes as it goes;
//   - plan: exactly the decisions of a given FaultPlan, and nothing else.
// Each applied decision is written to the trace as a fault_applied event.
//
// Draws are a pure function of (seed, stream name, position, salt), so turning
// one fault kind off, or deleting one decision from a plan, never moves the
// numbers any other kind sees.
//
// Example (in the broker session, at the k-th pull):
//   auto d = faults.Decide(v1::PULL, k, v1::FaultDecision::kLatencyMs, now,
//                          [&](v1::FaultDecision* out) {
//                            if (!faults.Chance("latency", k, cfg.rate())) return false;
//                            out->set_latency_ms(...);
//                            return true;
//                          });
//   if (d) now += Millis(d->latency_ms());
//
// Thread safety: none; the simulation thread owns it.
#pragma once

#include <cstdint>
#include <functional>
#include <optional>
#include <string_view>
#include <tuple>

#include "absl/container/flat_hash_map.h"
#include "harness/core/virtual_time.h"
#include "harness/trace/trace_log.h"
#include "weir/v1/faults.pb.h"

namespace weir {

class FaultSource {
 public:
  // Draw mode. REQUIRES: trace outlives the source.
  FaultSource(const v1::FaultConfig& config, std::uint64_t seed, TraceLog& trace);
  // Plan mode.
  FaultSource(v1::FaultPlan plan, std::uint64_t seed, TraceLog& trace);

  bool plan_given() const { return plan_given_; }
  const v1::FaultConfig& config() const { return config_; }
  // Draw mode: the decisions applied so far. Plan mode: the given plan.
  const v1::FaultPlan& plan() const { return plan_given_ ? given_ : applied_; }

  using Draw = std::function<bool(v1::FaultDecision* out)>;
  // The decision of kind `kind` at (site, position), if one applies: in plan
  // mode the plan's; in draw mode a scripted one, else whatever `draw` fills
  // in (return false: no fault). An applied decision is traced at time `now`
  // and, in draw mode, recorded into the plan.
  std::optional<v1::FaultDecision> Decide(v1::Site site, std::uint64_t position, v1::FaultDecision::FaultCase kind,
                                          VirtualTime now, const Draw& draw);

  // Uniform in [0, 1), a pure function of (seed, stream, position, salt).
  double Unit(std::string_view stream, std::uint64_t position, std::uint64_t salt = 0) const;
  // True with probability `rate` (never draws when rate <= 0 or >= 1).
  bool Chance(std::string_view stream, std::uint64_t position, double rate) const;
  // Uniform integer in [lo, hi]. REQUIRES: lo <= hi.
  std::int64_t Int(std::string_view stream, std::uint64_t position, std::int64_t lo, std::int64_t hi,
                   std::uint64_t salt = 0) const;

 private:
  using Key = std::tuple<int, std::uint64_t, int>;  // site, position, fault case
  void Index(const v1::FaultPlan& plan, absl::flat_hash_map<Key, int>* index);
  void Trace(const v1::FaultDecision& d, VirtualTime now);

  const v1::FaultConfig config_;
  const std::uint64_t seed_;
  TraceLog& trace_;
  const bool plan_given_;
  v1::FaultPlan given_;                  // plan mode: the plan; draw mode: the scripted decisions
  v1::FaultPlan applied_;                // draw mode: what applied
  absl::flat_hash_map<Key, int> index_;  // into given_
};

}  // namespace weir
