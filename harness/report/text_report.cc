#include "harness/report/text_report.h"

#include <cstdio>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"

namespace weir {

std::string FormatVerdictTable(const Verdict& verdict) {
  std::string out = absl::StrFormat("%-22s %-13s %10s  %s\n", "invariant", "verdict", "chances", "violations");
  for (int i = 0; i < kInvariantCount; ++i) {
    const auto inv = static_cast<Invariant>(i);
    const InvariantResult& r = verdict.at(inv);
    if (!r.applies) continue;  // the other broker shape's rule
    // Held means it had a chance to fail and did not (docs/coverage.md).
    const char* word = !r.checked         ? "not claimed"
                       : r.violations > 0 ? "FAILED"
                       : r.chances == 0   ? "not exercised"
                                          : "held";
    out += absl::StrFormat("%-22s %-13s %10s  %d%s\n", InvariantName(inv), word,
                           r.checked ? absl::StrCat(r.chances) : std::string("-"), r.violations,
                           r.echoes > 0 ? absl::StrCat(" (+", r.echoes, " repeats)") : std::string());
  }
  // Figures that never fail a run on their own (see Verdict).
  absl::StrAppend(&out, "figures: ", verdict.duplicate_records, " duplicate records, ", verdict.late_records,
                  " late records (", verdict.forced_late_records, " forced by crashes, not failed)");
  if (verdict.at(Invariant::kOffsetGap).applies) {
    absl::StrAppend(&out, ", ", verdict.deleted_unread, " offsets deleted unread, ", verdict.gap_offsets,
                    " offsets reported as gaps, ", verdict.rewinds, " rewinds");
  }
  out += "\n";
  return out;
}

std::string FormatViolations(const Verdict& verdict) {
  std::string out;
  // Causes first: the invariant whose violation started earliest leads.
  for (const Invariant inv : FailedByCause(verdict)) {
    const InvariantResult& r = verdict.at(inv);
    absl::StrAppend(&out, "\nFAILED ", InvariantName(inv), " (", r.violations,
                    r.violations == 1 ? " violation" : " violations",
                    r.echoes > 0 ? absl::StrCat("; ", r.echoes, r.echoes == 1 ? " repeat" : " repeats", " of ",
                                                r.violations == 1 ? "it" : "them", " not counted")
                                 : std::string(),
                    ")\n  rule: ", InvariantRule(inv), "\n");
    for (const Violation& v : r.first) {
      absl::StrAppend(&out, "  - ", v.sentence, "\n");
      for (const Evidence& e : v.evidence) {
        absl::StrAppend(
            &out, absl::StrFormat("      #%-7d %16s  inc %-3d %s\n", e.seq, FormatTime(e.t), e.incarnation, e.what));
      }
    }
    if (r.violations > r.first.size()) {
      absl::StrAppend(&out, "  … and ", r.violations - r.first.size(), " more\n");
    }
  }
  return out;
}

}  // namespace weir
