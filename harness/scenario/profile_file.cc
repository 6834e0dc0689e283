#include "harness/scenario/profile_file.h"

#include "absl/strings/str_cat.h"

namespace weir {
namespace {

// One year of virtual time: larger durations are surely typos.
constexpr std::int64_t kMaxMillis = 365LL * 24 * 3600 * 1000;

}  // namespace

void ValidateProfile(TextFile& f, const v1::Profile& p, bool in_scenario) {
  const std::string prefix = in_scenario ? "profile." : "";
  auto require = [&](bool ok, std::string_view field, const std::string& message) {
    if (in_scenario) {
      f.Require(ok, {"profile", field}, prefix + message);
    } else {
      f.Require(ok, {field}, message);
    }
  };
  auto millis = [&](std::string_view field, std::int64_t value) {
    require(value >= 0 && value <= kMaxMillis, field,
            absl::StrCat(std::string(field), " is ", value, "; expected 0 ..", std::int64_t{kMaxMillis},
                         " (milliseconds)"));
  };
  millis("min_backoff_ms", p.min_backoff_ms());
  millis("allowed_lateness_ms", p.allowed_lateness_ms());
  millis("idle_timeout_ms", p.idle_timeout_ms());
  if (p.has_idle_max_lag_ms()) millis("idle_max_lag_ms", p.idle_max_lag_ms());
  millis("max_watermark_lead_ms", p.max_watermark_lead_ms());
  const bool claims =
      p.watermark_policy() == v1::Profile::MONOTONIC || p.watermark_policy() == v1::Profile::BOUNDED_LATENESS;
  require(p.allowed_lateness_ms() == 0 || p.watermark_policy() == v1::Profile::BOUNDED_LATENESS, "allowed_lateness_ms",
          "allowed_lateness_ms is set; expected watermark_policy: BOUNDED_LATENESS with it");
  require(p.idle_timeout_ms() == 0 || claims, "idle_timeout_ms",
          "idle_timeout_ms is set; expected watermark_policy: MONOTONIC or BOUNDED_LATENESS "
          "with it (the stall rule needs a watermark)");
  require(!p.has_idle_max_lag_ms() || p.idle_timeout_ms() > 0, "idle_max_lag_ms",
          "idle_max_lag_ms is set; expected idle_timeout_ms > 0 with it");
}

absl::StatusOr<v1::Profile> ParseProfile(const std::string& path, std::string_view text) {
  TextFile f(path);
  v1::Profile p;
  if (absl::Status st = f.ParseText(text, &p); !st.ok()) return st;
  // A profile file is a claim: an empty one is surely a mistake.
  f.Require(p.guarantee() != v1::Profile::GUARANTEE_UNSPECIFIED, {"guarantee"},
            "expected guarantee: AT_LEAST_ONCE or EXACTLY_ONCE (a profile file must state its "
            "delivery guarantee)");
  ValidateProfile(f, p, /*in_scenario=*/false);
  if (absl::Status st = f.status(); !st.ok()) return st;
  return p;
}

absl::StatusOr<v1::Profile> LoadProfile(const std::string& path) {
  std::string text;
  if (absl::Status st = ReadWholeFile(path, &text, 1u << 20); !st.ok()) return st;
  return ParseProfile(path, text);
}

}  // namespace weir
