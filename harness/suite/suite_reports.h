// File: suite_reports.h
//
// What `weir certify` and `weir merge` write: the JSON report (Protobuf's JSON
// mapping of weir.v1.SuiteReport, documented in proto/weir/v1/suite.proto),
// JUnit XML (one testcase per scenario × seed; valid against the strict JUnit
// schema), the terminal summary, the HTML summary, and the certificate with
// its seal. No I/O here.
//
// A report is given in three parts: its head, a SuiteReport of which every
// field but `runs` is used (its own `runs` are ignored); the SuiteTally of
// its runs; and a RunReader over those runs in pair order. The JSON report and
// the JUnit XML pass the runs to a TextOut one at a time, so their memory does
// not grow with the number of runs (certify reads them from its RunLog); the
// summaries and the certificate need only the head and the tally. The
// whole-report forms at the end give the same bytes for a report in memory.
//
// Example:
//   auto runs = log.Read();
//   absl::Status st = WriteFileAtomically(path, [&](TextOut out) {
//     return WriteSuiteReportJson(head, *runs, out);
//   });
#pragma once

#include <string>

#include "absl/status/statusor.h"
#include "harness/scenario/text_file.h"
#include "harness/suite/run_log.h"
#include "harness/suite/suite_tally.h"
#include "weir/v1/suite.pb.h"

namespace weir {

// An invariant's verdict over a suite: "FAILED", "held", "not exercised"
// (judged, but no run gave it a chance to fail) or "not judged" (no run's
// profile claims it, or it is of the other broker shape).
const char* CoverageWord(const v1::InvariantSummary& summary);

// Error: a run could not be read (the text written so far is then cut short).
[[nodiscard]] absl::Status WriteSuiteReportJson(const v1::SuiteReport& head, RunReader& runs, TextOut out);
// Errors name the cause; the caller adds the file name.
[[nodiscard]] absl::StatusOr<v1::SuiteReport> ParseSuiteReportJson(std::string_view text);

// `timestamp` "YYYY-MM-DDTHH:MM:SS" (no zone), `hostname` non-empty.
// REQUIRES: `tally` is the tally of `runs`. Error: as WriteSuiteReportJson.
[[nodiscard]] absl::Status WriteSuiteJUnitXml(const v1::SuiteReport& head, const SuiteTally& tally, RunReader& runs,
                                              const std::string& timestamp, const std::string& hostname, TextOut out);

// Per invariant: runs passed / failed, first failing seed and its replay line.
std::string SuiteSummaryText(const v1::SuiteReport& head, const SuiteTally& tally);

// The same summary as an HTML <section> (suite facts, then one row per
// invariant: runs passed / failed, first failing seed, replay line); every
// string escaped. For HtmlPage (harness/report/html_timeline.h).
std::string SuiteSummaryHtml(const v1::SuiteReport& head, const SuiteTally& tally);

// The certificate of a report: sealed, `certified` only when the report is
// complete, covers every pair of the suite and every run passed.
v1::Certificate MakeCertificate(const v1::SuiteReport& head, const SuiteTally& tally);
// The seal a certificate should carry (sha256 of its deterministic
// serialization with `seal` and `signature` empty). Signing:
// certificate_trust.h.
std::string CertificateSeal(const v1::Certificate& certificate);
std::string CertificateJson(const v1::Certificate& certificate);
[[nodiscard]] absl::StatusOr<v1::Certificate> ParseCertificateJson(std::string_view text);

// Whole-report forms, for a report held in memory (its runs in pair order):
// the same text as the streaming forms above.
std::string SuiteReportJson(const v1::SuiteReport& report);
std::string SuiteJUnitXml(const v1::SuiteReport& report, const std::string& timestamp, const std::string& hostname);
std::string SuiteSummaryText(const v1::SuiteReport& report);
std::string SuiteSummaryHtml(const v1::SuiteReport& report);
v1::Certificate MakeCertificate(const v1::SuiteReport& report);

}  // namespace weir
