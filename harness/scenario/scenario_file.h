// File: scenario_file.h
//
// Loads and validates a scenario file, then fills the defaults of fields the
// file leaves unset. Every error names file:line:column and what was expected.
//
// Defaults: broker.lease_ms 30000, broker.max_pull 1000,
// broker.redelivery_horizon_ms 60000, runtime.checkpoint_interval_ms 1000,
// runtime.drain_bound_ms 600000, runtime.call_timeout_wall_ms 10000,
// runtime.start_timeout_wall_ms 10000, workload.payload_bytes 32.
#pragma once

#include <string>

#include "absl/status/statusor.h"
#include "weir/v1/scenario.pb.h"

namespace weir {

[[nodiscard]] absl::StatusOr<v1::Scenario> LoadScenario(const std::string& path);
// Same, from text in memory; `path` is used in messages only.
[[nodiscard]] absl::StatusOr<v1::Scenario> ParseScenario(const std::string& path, std::string_view text);

// `scenario` as a scenario file that LoadScenario reads back as the same
// scenario: `comment` (each line after "# "), then the Protobuf text format.
std::string FormatScenario(const v1::Scenario& scenario, const std::string& comment);

}  // namespace weir
