// File: plan_file.h
//
// Fault plan files: a weir.v1.FaultPlan in Protobuf text format, as written by
// `weir run --save-plan` and read by `weir run --plan`. Loading validates every
// decision and names file:line:column and what was expected.
#pragma once

#include <string>
#include <string_view>

#include "absl/status/statusor.h"
#include "weir/v1/faults.pb.h"

namespace weir {

[[nodiscard]] absl::StatusOr<v1::FaultPlan> LoadFaultPlan(const std::string& path);
[[nodiscard]] absl::StatusOr<v1::FaultPlan> ParseFaultPlan(const std::string& path, std::string_view text);

// The plan as text a person can edit, opening with a comment that says where it
// came from. Decisions keep their order.
std::string FormatFaultPlan(const v1::FaultPlan& plan, const std::string& comment);

}  // namespace weir
