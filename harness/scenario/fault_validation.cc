#include "harness/scenario/fault_validation.h"

#include <string>

#include "absl/strings/str_cat.h"

namespace weir {
namespace {

// "faults.latency.rate" for ("rate", "latency"). (std::string: this abseil's
// StrCat does not take std::string_view.)
std::string Name(const std::string& field, const std::string& parent) {
  return parent.empty() ? "faults." + field : "faults." + parent + "." + field;
}

void At(TextFile& f, bool ok, const std::string& field, const std::string& parent,
        const std::string& message) {
  if (parent.empty()) {
    f.Require(ok, {"faults", field}, message);
  } else {
    f.Require(ok, {"faults", parent, field}, message);
  }
}

void Rate(TextFile& f, double v, const std::string& field, const std::string& parent = "") {
  const bool ok = v >= 0 && v <= 1;  // also false for NaN
  At(f, ok, field, parent,
     absl::StrCat(Name(field, parent), " is ", v, "; expected a probability in [0, 1]"));
}

void Duration(TextFile& f, std::int64_t v, const std::string& field,
              const std::string& parent = "") {
  At(f, v >= 0, field, parent,
     absl::StrCat(Name(field, parent), " is ", v, "; expected a duration >= 0"));
}

}  // namespace

void ValidateFaults(TextFile& f, const v1::FaultConfig& c) {
  const auto& l = c.latency();
  Rate(f, l.rate(), "rate", "latency");
  Rate(f, l.tail_probability(), "tail_probability", "latency");
  Duration(f, l.fixed_ms(), "fixed_ms", "latency");
  Duration(f, l.min_ms(), "min_ms", "latency");
  Duration(f, l.max_ms(), "max_ms", "latency");
  Duration(f, l.mean_ms(), "mean_ms", "latency");
  Duration(f, l.tail_ms(), "tail_ms", "latency");
  f.Require(l.min_ms() <= l.max_ms() || l.distribution() != v1::FaultConfig::UNIFORM,
            {"faults", "latency", "max_ms"},
            absl::StrCat("faults.latency.min_ms is ", l.min_ms(), " and max_ms is ", l.max_ms(),
                         "; expected min_ms <= max_ms"));

  Rate(f, c.visibility_delay_rate(), "visibility_delay_rate");
  Duration(f, c.max_visibility_delay_ms(), "max_visibility_delay_ms");
  f.Require(c.visibility_delay_rate() <= 0 || c.max_visibility_delay_ms() >= 1,
            {"faults", "max_visibility_delay_ms"},
            absl::StrCat("faults.max_visibility_delay_ms is ", c.max_visibility_delay_ms(),
                         "; expected at least 1 when visibility_delay_rate is set"));
  Rate(f, c.reorder_rate(), "reorder_rate");
  Rate(f, c.duplicate_rate(), "duplicate_rate");
  Rate(f, c.lost_ack_rate(), "lost_ack_rate");
  Rate(f, c.unavailable_rate(), "unavailable_rate");
  Rate(f, c.deadline_exceeded_rate(), "deadline_exceeded_rate");
  Rate(f, c.broker_restart_rate(), "broker_restart_rate");
  Rate(f, c.commit_failure_rate(), "commit_failure_rate");
  Rate(f, c.crash_rate(), "crash_rate");
  Rate(f, c.checkpoint_crash_rate(), "checkpoint_crash_rate");

  if (c.has_token_bucket()) {
    const auto& b = c.token_bucket();
    f.Require(b.rate_per_s() > 0, {"faults", "token_bucket", "rate_per_s"},
              absl::StrCat("faults.token_bucket.rate_per_s is ", b.rate_per_s(),
                           "; expected more than 0 tokens per second"));
    f.Require(b.burst() >= 1, {"faults", "token_bucket", "burst"},
              absl::StrCat("faults.token_bucket.burst is ", b.burst(), "; expected at least 1"));
  }

  for (int i = 0; i < c.throttle_windows_size(); ++i) {
    const auto& w = c.throttle_windows(i);
    const std::string at = absl::StrCat("throttle_windows[", i, "]");
    f.Require(w.start_ms() >= 0, {"faults", at},
              absl::StrCat("faults.", at, ".start_ms is ", w.start_ms(), "; expected >= 0"));
    f.Require(w.start_ms() < w.end_ms(), {"faults", at},
              absl::StrCat("faults.", at, " is [", w.start_ms(), ", ", w.end_ms(),
                           ") ms; expected start_ms < end_ms"));
  }

  for (int i = 0; i < c.scripted_size(); ++i) {
    const auto& d = c.scripted(i);
    const std::string at = absl::StrCat("scripted[", i, "]");
    f.Require(d.site() != v1::SITE_UNSPECIFIED, {"faults", at},
              absl::StrCat("faults.", at, ".site is unset; expected PULL, ACK, NACK, EXTEND_LEASE, "
                                          "PUBLISH, STEP or CHECKPOINT"));
    f.Require(d.position() >= 1, {"faults", at},
              absl::StrCat("faults.", at, ".position is ", d.position(), "; expected at least 1"));
    f.Require(d.fault_case() != v1::FaultDecision::FAULT_NOT_SET, {"faults", at},
              absl::StrCat("faults.", at, " names no fault; expected one, e.g. latency_ms: 50"));
    f.Require(d.latency_ms() >= 0 && d.throttle_retry_after_ms() >= 0 &&
                  d.visibility_delay_ms() >= 0,
              {"faults", at}, absl::StrCat("faults.", at, " has a negative duration; expected >= 0"));
  }
}

}  // namespace weir
