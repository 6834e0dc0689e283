// File: profile_file.h
//
// Profiles: what a connector claims (delivery guarantee, watermark policy,
// idle bound, minimum backoff), as a Protobuf text file against
// weir.v1.Profile (proto/weir/v1/scenario.proto). The same checks apply to a
// scenario's inline `profile { … }` block. Every error names
// file:line:column and what was expected. Bundled profiles live in
// fixtures/profiles/.
//
// Rules: every duration is 0 .. one year of milliseconds; allowed_lateness_ms
// needs watermark_policy BOUNDED_LATENESS; idle_timeout_ms and
// idle_max_lag_ms need a watermark policy (MONOTONIC or BOUNDED_LATENESS), and
// idle_max_lag_ms needs idle_timeout_ms; max_watermark_lead_ms applies under
// every policy.
#pragma once

#include <string>
#include <string_view>

#include "absl/status/statusor.h"
#include "harness/scenario/text_file.h"
#include "weir/v1/scenario.pb.h"

namespace weir {

[[nodiscard]] absl::StatusOr<v1::Profile> LoadProfile(const std::string& path);
// Same, from text in memory; `path` is used in messages only.
[[nodiscard]] absl::StatusOr<v1::Profile> ParseProfile(const std::string& path, std::string_view text);

// Records in `f` every rule the profile breaks. `in_scenario`: the profile is
// the scenario's `profile` field (errors are located inside it).
void ValidateProfile(TextFile& f, const v1::Profile& p, bool in_scenario);

}  // namespace weir
