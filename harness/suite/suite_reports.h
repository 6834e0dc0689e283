// File: suite_reports.h
//
// What `weir certify` writes: the JSON report (Protobuf's JSON mapping of
// weir.v1.SuiteReport, documented in proto/weir/v1/suite.proto), JUnit XML
// (one testcase per scenario × seed; valid against the strict JUnit schema),
// the terminal summary, and the certificate with its seal. No I/O here.
#pragma once

#include <string>

#include "absl/status/statusor.h"
#include "weir/v1/suite.pb.h"

namespace weir {

std::string SuiteReportJson(const v1::SuiteReport& report);
// Errors name the cause; the caller adds the file name.
[[nodiscard]] absl::StatusOr<v1::SuiteReport> ParseSuiteReportJson(std::string_view text);

// `timestamp` "YYYY-MM-DDTHH:MM:SS" (no zone), `hostname` non-empty.
std::string SuiteJUnitXml(const v1::SuiteReport& report, const std::string& timestamp,
                          const std::string& hostname);

// Per invariant: runs passed / failed, first failing seed and its replay line.
std::string SuiteSummaryText(const v1::SuiteReport& report);

// The same summary as an HTML <section> (suite facts, then one row per
// invariant: runs passed / failed, first failing seed, replay line); every
// string escaped. For HtmlPage (harness/report/html_timeline.h).
std::string SuiteSummaryHtml(const v1::SuiteReport& report);

// The certificate of a report: sealed, `certified` only when the report is
// complete, covers every pair of the suite and every run passed.
v1::Certificate MakeCertificate(const v1::SuiteReport& report);
// The seal a certificate should carry (sha256 of its deterministic
// serialization with `seal` empty).
std::string CertificateSeal(const v1::Certificate& certificate);
std::string CertificateJson(const v1::Certificate& certificate);
[[nodiscard]] absl::StatusOr<v1::Certificate> ParseCertificateJson(std::string_view text);

}  // namespace weir
