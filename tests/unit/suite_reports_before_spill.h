// The suite reports as weir wrote them before certify spilled its runs to a
// run log: whole-report functions over a SuiteReport in memory, copied
// verbatim from harness/suite/suite_reports.cc and Summarize() from
// harness/suite/certify.cc (commit 40c04e9). The streaming writers must give
// the same bytes: this is their oracle in suite_reports_test. Do not "fix"
// anything here; a change of output format changes both, deliberately.
#pragma once

#include <google/protobuf/field_mask.pb.h>
#include <google/protobuf/util/field_mask_util.h>
#include <google/protobuf/util/json_util.h>

#include <map>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "harness/oracle/verdict.h"
#include "harness/report/markup_escape.h"
#include "harness/suite/suite_reports.h"
#include "weir/v1/suite.pb.h"

namespace weir::before_spill {

inline std::string ToJson(const google::protobuf::Message& m) {
  std::string out;
  google::protobuf::util::JsonPrintOptions options;
  options.add_whitespace = true;
  options.preserve_proto_field_names = true;
  options.always_print_primitive_fields = true;
  (void)google::protobuf::util::MessageToJsonString(m, &out, options);
  return out;
}

inline void Summarize(v1::SuiteReport* report) {
  report->clear_invariants();
  for (int i = 0; i < kInvariantCount; ++i) {
    v1::InvariantSummary* s = report->add_invariants();
    s->set_invariant(InvariantName(static_cast<Invariant>(i)));
  }
  report->clear_faults_applied();
  std::map<std::string, std::uint64_t> faults;
  for (const v1::RunRecord& run : report->runs()) {
    for (const v1::Count& f : run.faults_applied()) faults[f.name()] += f.count();
    for (v1::InvariantSummary& s : *report->mutable_invariants()) {
      bool failed = false;
      for (const auto& name : run.failed_invariants()) failed |= name == s.invariant();
      for (const v1::Count& c : run.chances()) {
        if (c.name() != s.invariant()) continue;
        s.set_runs_judged(s.runs_judged() + 1);
        s.set_chances(s.chances() + c.count());
        if (c.count() > 0 || failed) s.set_runs_exercised(s.runs_exercised() + 1);
      }
      if (!failed) {
        if (run.harness_error().empty()) s.set_runs_passed(s.runs_passed() + 1);
        continue;
      }
      if (s.runs_failed() == 0) {
        s.set_first_failing_scenario(run.scenario());
        s.set_first_failing_seed(run.seed());
        s.set_first_failing_replay(run.replay());
      }
      s.set_runs_failed(s.runs_failed() + 1);
    }
  }
  for (const auto& [name, n] : faults) {
    v1::Count* c = report->add_faults_applied();
    c->set_name(name);
    c->set_count(n);
  }
}

// Judged, never exercised, never failed (coverage), in table order.
inline std::vector<std::string> NotExercised(const v1::SuiteReport& report) {
  std::vector<std::string> out;
  for (const auto& s : report.invariants()) {
    if (s.runs_judged() > 0 && s.runs_exercised() == 0 && s.runs_failed() == 0) out.push_back(s.invariant());
  }
  return out;
}

inline v1::Certificate MakeCertificate(const v1::SuiteReport& report) {
  v1::Certificate c;
  c.set_suite_name(report.suite_name());
  c.set_suite_digest(report.suite_digest());
  c.set_weir_version(report.weir_version());
  *c.mutable_connector_argv() = report.connector_argv();
  c.set_connector_sha256(report.connector_sha256());
  std::uint64_t passed = 0;
  std::string verdicts;
  for (const auto& run : report.runs()) {
    passed += run.passed() ? 1 : 0;
    verdicts.push_back(run.passed() ? 'P' : 'F');
  }
  c.set_runs(static_cast<std::uint64_t>(report.runs_size()));
  c.set_runs_passed(passed);
  c.set_runs_failed(c.runs() - passed);
  c.set_verdicts(verdicts);
  c.set_certified(report.complete() && report.shard_count() <= 1 && c.runs() == report.pairs_total() &&
                  c.runs_failed() == 0);
  for (const auto& s : report.invariants()) {
    if (s.runs_judged() > 0) {
      v1::Count* n = c.add_chances();
      n->set_name(s.invariant());
      n->set_count(s.chances());
    }
  }
  for (const auto& name : NotExercised(report)) c.add_not_exercised(name);
  c.set_profile(report.profile());
  c.set_profile_sha256(report.profile_sha256());
  c.set_seal(CertificateSeal(c));
  return c;
}

inline std::string SuiteReportJson(const v1::SuiteReport& report) {
  google::protobuf::FieldMask mask;
  const google::protobuf::Descriptor* d = v1::SuiteReport::descriptor();
  for (int i = 0; i < d->field_count(); ++i) {
    if (d->field(i)->number() != v1::SuiteReport::kRunsFieldNumber) mask.add_paths(d->field(i)->name());
  }
  v1::SuiteReport head;
  google::protobuf::util::FieldMaskUtil::MergeMessageTo(report, mask, {}, &head);
  std::string out = ToJson(head);
  // With primitive fields always printed, the empty list is in the text; no
  // string value can contain it (its quotes would be escaped).
  constexpr std::string_view kEmpty = "\"runs\": []";
  const std::size_t at = out.find(kEmpty);
  if (at == std::string::npos || report.runs().empty()) return out;
  std::string runs = "\"runs\": [";
  for (int i = 0; i < report.runs_size(); ++i) {
    std::string one = ToJson(report.runs(i));
    while (!one.empty() && one.back() == '\n') one.pop_back();
    absl::StrAppend(&runs, i == 0 ? "\n" : ",\n", one);
  }
  runs += "\n]";
  out.replace(at, kEmpty.size(), runs);
  return out;
}

inline std::string SuiteJUnitXml(const v1::SuiteReport& report, const std::string& timestamp,
                                 const std::string& hostname) {
  std::uint64_t failures = 0, errors = 0;
  double time = 0;
  for (const auto& run : report.runs()) {
    if (!run.harness_error().empty()) {
      ++errors;
    } else if (!run.passed()) {
      ++failures;
    }
    time += run.wall_seconds();
  }
  const std::string name = report.suite_name().empty() ? "weir" : report.suite_name();
  std::string out = "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n";
  absl::StrAppend(&out, "<testsuite name=\"", EscapeMarkup(name), "\" timestamp=\"", EscapeMarkup(timestamp),
                  "\" hostname=\"", EscapeMarkup(hostname.empty() ? "localhost" : hostname), "\" tests=\"",
                  report.runs_size(), "\" failures=\"", failures, "\" errors=\"", errors, "\" time=\"",
                  absl::StrFormat("%.3f", time), "\">\n");
  out += "  <properties>\n";
  auto property = [&out](const std::string& k, const std::string& v) {
    absl::StrAppend(&out, "    <property name=\"", EscapeMarkup(k), "\" value=\"", EscapeMarkup(v), "\"/>\n");
  };
  property("suite_digest", report.suite_digest());
  property("weir_version", report.weir_version());
  property("connector_sha256", report.connector_sha256());
  property("shard", absl::StrCat(report.shard_index(), "/", report.shard_count()));
  property("complete", report.complete() ? "true" : "false");
  property("profile", report.profile());
  for (const auto& s : report.invariants()) {
    if (s.runs_judged() == 0) continue;
    property(absl::StrCat("coverage.", s.invariant()),
             absl::StrCat(CoverageWord(s), "; ", s.chances(), " chances in ", s.runs_exercised(), " of ",
                          s.runs_judged(), " runs"));
  }
  std::string not_exercised;
  for (const auto& rule : NotExercised(report))
    absl::StrAppend(&not_exercised, not_exercised.empty() ? "" : ", ", rule);
  property("not_exercised", not_exercised);
  out += "  </properties>\n";
  for (const auto& run : report.runs()) {
    absl::StrAppend(&out, "  <testcase name=\"", EscapeMarkup(absl::StrCat("seed ", run.seed())), "\" classname=\"",
                    EscapeMarkup(run.scenario()), "\" time=\"", absl::StrFormat("%.3f", run.wall_seconds()), "\"");
    if (run.passed()) {
      out += "/>\n";
      continue;
    }
    out += ">\n";
    if (!run.harness_error().empty()) {
      absl::StrAppend(&out, "    <error type=\"harness-fault\" message=\"", EscapeMarkup(run.harness_error()), "\">",
                      EscapeMarkup(absl::StrCat(run.harness_error(), "\nreplay: ", run.replay())), "</error>\n");
    } else {
      std::string invariants;
      for (const auto& inv : run.failed_invariants()) {
        if (!invariants.empty()) invariants += ", ";
        invariants += inv;
      }
      absl::StrAppend(
          &out, "    <failure type=\"", EscapeMarkup(invariants), "\" message=\"", EscapeMarkup(run.first_violation()),
          "\">",
          EscapeMarkup(absl::StrCat("failed: ", invariants, "\n", run.first_violation(), "\nreplay: ", run.replay())),
          "</failure>\n");
    }
    out += "  </testcase>\n";
  }
  out += "  <system-out></system-out>\n  <system-err></system-err>\n</testsuite>\n";
  return out;
}

inline std::string SuiteSummaryText(const v1::SuiteReport& report) {
  std::uint64_t failed = 0;
  for (const auto& run : report.runs()) failed += run.passed() ? 0 : 1;
  std::string out;
  if (!report.profile().empty()) {
    absl::StrAppend(&out, "profile ", report.profile(), " (applied to every scenario)\n\n");
  }
  out += absl::StrFormat("%-22s %-13s %8s %8s %10s  %s\n", "invariant", "verdict", "passed", "failed", "chances",
                         "first failing seed");
  for (const auto& s : report.invariants()) {
    absl::StrAppend(&out,
                    absl::StrFormat("%-22s %-13s %8d %8d %10s  %s\n", s.invariant(), CoverageWord(s), s.runs_passed(),
                                    s.runs_failed(), s.runs_judged() > 0 ? absl::StrCat(s.chances()) : std::string("-"),
                                    s.runs_failed() == 0
                                        ? std::string("-")
                                        : absl::StrCat(s.first_failing_scenario(), " seed ", s.first_failing_seed())));
  }
  for (const auto& name : NotExercised(report)) {
    for (int i = 0; i < kInvariantCount; ++i) {
      const auto inv = static_cast<Invariant>(i);
      if (name != InvariantName(inv)) continue;
      absl::StrAppend(&out, "\nnot exercised: ", name,
                      " had no chance to fail in any run (a chance: ", InvariantChance(inv),
                      ").\n  would exercise it: ", InvariantExercisedBy(inv), "\n");
    }
  }
  if (!report.faults_applied().empty()) {
    out += "\nfaults applied:";
    for (const v1::Count& f : report.faults_applied()) absl::StrAppend(&out, " ", f.name(), " ×", f.count(), ";");
    out.back() = '\n';
  }
  for (const auto& s : report.invariants()) {
    if (s.runs_failed() > 0) {
      absl::StrAppend(&out, "\nfirst ", s.invariant(), " failure:\n  replay: ", s.first_failing_replay(), "\n");
    }
  }
  for (const auto& run : report.runs()) {
    if (!run.harness_error().empty()) {
      absl::StrAppend(&out, "\nharness fault in ", run.scenario(), " seed ", run.seed(), ": ", run.harness_error(),
                      "\n");
      break;
    }
  }
  absl::StrAppend(&out, "\n", report.runs_size(), " runs, ", report.runs_size() - static_cast<int>(failed), " passed, ",
                  failed, " failed",
                  report.complete() ? "" : " (INCOMPLETE: ", report.complete() ? "" : report.stopped_because(),
                  report.complete() ? "" : ")", "\n");
  return out;
}

inline std::string SuiteSummaryHtml(const v1::SuiteReport& report) {
  std::uint64_t failed = 0;
  const v1::RunRecord* harness_fault = nullptr;
  for (const auto& run : report.runs()) {
    failed += run.passed() ? 0 : 1;
    if (harness_fault == nullptr && !run.harness_error().empty()) harness_fault = &run;
  }
  const v1::Certificate cert = MakeCertificate(report);
  std::string connector;
  for (const auto& a : report.connector_argv()) absl::StrAppend(&connector, connector.empty() ? "" : " ", a);
  std::string out = "<section class=\"summary\">\n";
  absl::StrAppend(&out, "<h2>Suite ", EscapeMarkup(report.suite_name()), " &#8212; ",
                  report.shard_count() > 1 ? (failed == 0 ? "shard passed" : "shard FAILED")
                                           : (cert.certified() ? "CERTIFIED" : "NOT CERTIFIED"),
                  "</h2>\n<table class=\"facts\">\n");
  auto fact = [&out](const char* k, const std::string& v) {
    absl::StrAppend(&out, "<tr><th>", k, "</th><td><code>", EscapeMarkup(v), "</code></td></tr>\n");
  };
  fact("suite digest", report.suite_digest());
  fact("connector", connector);
  fact("connector sha256", report.connector_sha256());
  if (!report.profile().empty()) fact("profile (every scenario)", report.profile());
  fact("weir", report.weir_version());
  fact("shard", absl::StrCat(report.shard_index(), "/", report.shard_count()));
  fact("runs", absl::StrCat(report.runs_size(), " of ", report.pairs_total(),
                            " pairs: ", report.runs_size() - static_cast<int>(failed), " passed, ", failed, " failed",
                            report.complete() ? "" : absl::StrCat(" (INCOMPLETE: ", report.stopped_because(), ")")));
  out +=
      "</table>\n<table class=\"invariants\">\n<tr><th>invariant</th><th>verdict</th><th>chances</th>"
      "<th>runs passed</th><th>runs failed</th><th>first failing seed</th><th>replay</th></tr>\n";
  for (const auto& s : report.invariants()) {
    const bool bad = s.runs_failed() > 0;
    const std::string word = CoverageWord(s);
    absl::StrAppend(&out, "<tr><td>", EscapeMarkup(s.invariant()), "</td><td class=\"",
                    bad              ? "verdict failed"
                    : word == "held" ? "verdict passed"
                                     : "verdict unexercised",
                    "\">", word, "</td><td>", s.runs_judged() > 0 ? absl::StrCat(s.chances()) : std::string("&#8211;"),
                    "</td><td>", s.runs_passed(), "</td><td class=\"", bad ? "failed" : "passed", "\">",
                    s.runs_failed(), "</td><td>",
                    bad ? EscapeMarkup(absl::StrCat(s.first_failing_scenario(), " seed ", s.first_failing_seed()))
                        : std::string("&#8211;"),
                    "</td><td>", bad ? absl::StrCat("<code>", EscapeMarkup(s.first_failing_replay()), "</code>") : "",
                    "</td></tr>\n");
  }
  out += "</table>\n";
  if (harness_fault != nullptr) {
    absl::StrAppend(&out, "<p class=\"inv\">Harness fault in ", EscapeMarkup(harness_fault->scenario()), " seed ",
                    harness_fault->seed(), ": ", EscapeMarkup(harness_fault->harness_error()), "</p>\n");
  }
  out += "</section>\n";
  return out;
}

}  // namespace weir::before_spill
