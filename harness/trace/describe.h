// File: describe.h
//
// One-line human descriptions of trace events, for violation reports and
// timelines: "delivered message 17 (receipt 42, attempt 2)". Connector-supplied
// text is passed through as is; HTML output escapes it separately.
#pragma once

#include <string>

#include "weir/v1/trace.pb.h"

namespace weir {

std::string DescribeEvent(const v1::TraceEvent& event);

}  // namespace weir
