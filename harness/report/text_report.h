// File: text_report.h
//
// The terminal report of a run: the verdict table, then each kept violation
// with its one-sentence explanation and proving events, then the replay line.
#pragma once

#include <string>

#include "harness/oracle/verdict.h"

namespace weir {

// "invariant  verdict  violations" rows, one per invariant, then a line of
// figures (duplicate and late records).
std::string FormatVerdictTable(const Verdict& verdict);

// Every kept violation, in invariant order; empty when the run passed.
std::string FormatViolations(const Verdict& verdict);

}  // namespace weir
