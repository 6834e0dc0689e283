#include "harness/suite/suite_reports.h"

#include <google/protobuf/io/coded_stream.h>
#include <google/protobuf/io/zero_copy_stream_impl_lite.h>
#include <google/protobuf/field_mask.pb.h>
#include <google/protobuf/util/field_mask_util.h>
#include <google/protobuf/util/json_util.h>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "harness/oracle/verdict.h"
#include "harness/report/markup_escape.h"
#include "harness/trace/trace_format.h"

namespace weir {
namespace {

std::string ToJson(const google::protobuf::Message& m) {
  std::string out;
  google::protobuf::util::JsonPrintOptions options;
  options.add_whitespace = true;
  options.preserve_proto_field_names = true;
  options.always_print_primitive_fields = true;
  (void)google::protobuf::util::MessageToJsonString(m, &out, options);
  return out;
}

absl::Status FromJson(std::string_view text, google::protobuf::Message* m) {
  google::protobuf::util::JsonParseOptions options;
  auto st =
      google::protobuf::util::JsonStringToMessage(google::protobuf::StringPiece(text.data(), text.size()), m, options);
  if (!st.ok()) return absl::InvalidArgumentError(std::string(st.message()));
  return absl::OkStatus();
}

}  // namespace

const char* CoverageWord(const v1::InvariantSummary& s) {
  if (s.runs_failed() > 0) return "FAILED";
  if (s.runs_judged() == 0) return "not judged";
  if (s.runs_exercised() == 0) return "not exercised";
  return "held";
}

// The head is printed without its runs, and the runs are printed one at a
// time into the place of its empty list: converting a whole report at once
// costs about ten times the JSON's size in transient memory.
absl::Status WriteSuiteReportJson(const v1::SuiteReport& head, RunReader& runs, TextOut out) {
  google::protobuf::FieldMask mask;
  const google::protobuf::Descriptor* d = v1::SuiteReport::descriptor();
  for (int i = 0; i < d->field_count(); ++i) {
    if (d->field(i)->number() != v1::SuiteReport::kRunsFieldNumber) mask.add_paths(d->field(i)->name());
  }
  v1::SuiteReport without_runs;
  google::protobuf::util::FieldMaskUtil::MergeMessageTo(head, mask, {}, &without_runs);
  const std::string text = ToJson(without_runs);
  // With primitive fields always printed, the empty list is in the text; no
  // string value can contain it (its quotes would be escaped).
  constexpr std::string_view kEmpty = "\"runs\": []";
  const std::size_t at = text.find(kEmpty);
  if (at == std::string::npos) return absl::InternalError("suite report: the JSON printer left out \"runs\"");
  out(std::string_view(text).substr(0, at));
  bool any = false;
  v1::RunRecord run;
  for (;;) {
    absl::StatusOr<bool> more = runs.Next(&run);
    if (!more.ok()) return more.status();
    if (!*more) break;
    std::string one = ToJson(run);
    while (!one.empty() && one.back() == '\n') one.pop_back();
    out(any ? ",\n" : "\"runs\": [\n");
    out(one);
    any = true;
  }
  out(any ? std::string_view("\n]") : kEmpty);
  out(std::string_view(text).substr(at + kEmpty.size()));
  return absl::OkStatus();
}

absl::StatusOr<v1::SuiteReport> ParseSuiteReportJson(std::string_view text) {
  v1::SuiteReport r;
  if (absl::Status st = FromJson(text, &r); !st.ok()) return st;
  return r;
}

absl::Status WriteSuiteJUnitXml(const v1::SuiteReport& head, const SuiteTally& tally, RunReader& runs,
                                const std::string& timestamp, const std::string& hostname, TextOut out) {
  const std::string name = head.suite_name().empty() ? "weir" : head.suite_name();
  out("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
  out(absl::StrCat("<testsuite name=\"", EscapeMarkup(name), "\" timestamp=\"", EscapeMarkup(timestamp),
                   "\" hostname=\"", EscapeMarkup(hostname.empty() ? "localhost" : hostname), "\" tests=\"",
                   tally.runs(), "\" failures=\"", tally.invariant_failures(), "\" errors=\"", tally.harness_faults(),
                   "\" time=\"", absl::StrFormat("%.3f", tally.wall_seconds()), "\">\n"));
  out("  <properties>\n");
  auto property = [&out](const std::string& k, const std::string& v) {
    out(absl::StrCat("    <property name=\"", EscapeMarkup(k), "\" value=\"", EscapeMarkup(v), "\"/>\n"));
  };
  property("suite_digest", head.suite_digest());
  property("weir_version", head.weir_version());
  property("connector_sha256", head.connector_sha256());
  if (!head.weir_sha256().empty()) property("weir_sha256", head.weir_sha256());
  property("shard", absl::StrCat(head.shard_index(), "/", head.shard_count()));
  property("complete", head.complete() ? "true" : "false");
  property("profile", head.profile());
  // Coverage: per judged invariant its verdict word and chances.
  for (const auto& s : head.invariants()) {
    if (s.runs_judged() == 0) continue;
    property(absl::StrCat("coverage.", s.invariant()),
             absl::StrCat(CoverageWord(s), "; ", s.chances(), " chances in ", s.runs_exercised(), " of ",
                          s.runs_judged(), " runs"));
  }
  std::string not_exercised;
  for (const auto& rule : tally.not_exercised())
    absl::StrAppend(&not_exercised, not_exercised.empty() ? "" : ", ", rule);
  property("not_exercised", not_exercised);
  if (!head.recheck().empty()) {
    property("recheck", head.recheck());
    property("runs_rechecked", absl::StrCat(tally.rechecked()));
    property("runs_diverged", absl::StrCat(tally.diverged()));
  }
  out("  </properties>\n");
  v1::RunRecord run;
  for (;;) {
    absl::StatusOr<bool> more = runs.Next(&run);
    if (!more.ok()) return more.status();
    if (!*more) break;
    std::string one =
        absl::StrCat("  <testcase name=\"", EscapeMarkup(absl::StrCat("seed ", run.seed())), "\" classname=\"",
                     EscapeMarkup(run.scenario()), "\" time=\"", absl::StrFormat("%.3f", run.wall_seconds()), "\"");
    if (run.passed()) {
      one += "/>\n";
      out(one);
      continue;
    }
    one += ">\n";
    if (!run.harness_error().empty()) {
      absl::StrAppend(&one, "    <error type=\"harness-fault\" message=\"", EscapeMarkup(run.harness_error()), "\">",
                      EscapeMarkup(absl::StrCat(run.harness_error(), "\nreplay: ", run.replay())), "</error>\n");
    } else {
      std::string invariants;
      for (const auto& inv : run.failed_invariants()) {
        if (!invariants.empty()) invariants += ", ";
        invariants += inv;
      }
      absl::StrAppend(
          &one, "    <failure type=\"", EscapeMarkup(invariants), "\" message=\"", EscapeMarkup(run.first_violation()),
          "\">",
          EscapeMarkup(absl::StrCat("failed: ", invariants, "\n", run.first_violation(), "\nreplay: ", run.replay())),
          "</failure>\n");
    }
    one += "  </testcase>\n";
    out(one);
  }
  out("  <system-out></system-out>\n  <system-err></system-err>\n</testsuite>\n");
  return absl::OkStatus();
}

std::string SuiteSummaryText(const v1::SuiteReport& head, const SuiteTally& tally) {
  std::string out;
  if (!head.profile().empty()) {
    absl::StrAppend(&out, "profile ", head.profile(), " (applied to every scenario)\n\n");
  }
  out += absl::StrFormat("%-22s %-13s %8s %8s %10s  %s\n", "invariant", "verdict", "passed", "failed", "chances",
                         "first failing seed");
  for (const auto& s : head.invariants()) {
    const bool judged = s.runs_judged() > 0;
    absl::StrAppend(&out,
                    absl::StrFormat("%-22s %-13s %8d %8d %10s  %s\n", s.invariant(), CoverageWord(s), s.runs_passed(),
                                    s.runs_failed(), judged ? absl::StrCat(s.chances()) : std::string("-"),
                                    s.runs_failed() == 0
                                        ? std::string("-")
                                        : absl::StrCat(s.first_failing_scenario(), " seed ", s.first_failing_seed())));
  }
  for (const auto& name : tally.not_exercised()) {
    for (int i = 0; i < kInvariantCount; ++i) {
      const auto inv = static_cast<Invariant>(i);
      if (name != InvariantName(inv)) continue;
      absl::StrAppend(&out, "\nnot exercised: ", name,
                      " had no chance to fail in any run (a chance: ", InvariantChance(inv),
                      ").\n  would exercise it: ", InvariantExercisedBy(inv), "\n");
    }
  }
  if (!tally.faults_applied().empty()) {
    out += "\nfaults applied:";
    for (const auto& [fault, n] : tally.faults_applied()) absl::StrAppend(&out, " ", fault, " ×", n, ";");
    out.back() = '\n';
  }
  for (const auto& s : head.invariants()) {
    if (s.runs_failed() > 0) {
      absl::StrAppend(&out, "\nfirst ", s.invariant(), " failure:\n  replay: ", s.first_failing_replay(), "\n");
    }
  }
  if (const auto& fault = tally.first_harness_fault(); fault.has_value()) {
    absl::StrAppend(&out, "\nharness fault in ", fault->scenario, " seed ", fault->seed, ": ", fault->error, "\n");
  }
  if (!head.recheck().empty()) {
    absl::StrAppend(&out, "\ndeterminism recheck: ", tally.rechecked(), " rerun, ", tally.diverged(),
                    " diverged; rule: ", head.recheck(), "\n");
    if (const auto& d = tally.first_divergence(); d.has_value()) {
      absl::StrAppend(&out, "first nondeterministic run: ", d->scenario, " seed ", d->seed, ": trace digest ",
                      d->digest, ", its rerun ", d->recheck_digest, "\n");
      if (!d->divergence.empty()) absl::StrAppend(&out, "  first difference: ", d->divergence, "\n");
      absl::StrAppend(&out, "  replay: ", d->replay, "\n");
    }
  }
  absl::StrAppend(&out, "\n", tally.runs(), " runs, ", tally.passed(), " passed, ", tally.failed(), " failed",
                  head.complete() ? "" : " (INCOMPLETE: ", head.complete() ? "" : head.stopped_because(),
                  head.complete() ? "" : ")", "\n");
  return out;
}

std::string SuiteSummaryHtml(const v1::SuiteReport& head, const SuiteTally& tally) {
  const v1::Certificate cert = MakeCertificate(head, tally);
  std::string connector;
  for (const auto& a : head.connector_argv()) absl::StrAppend(&connector, connector.empty() ? "" : " ", a);
  std::string out = "<section class=\"summary\">\n";
  absl::StrAppend(&out, "<h2>Suite ", EscapeMarkup(head.suite_name()), " &#8212; ",
                  head.shard_count() > 1 ? (tally.failed() == 0 ? "shard passed" : "shard FAILED")
                                         : (cert.certified() ? "CERTIFIED" : "NOT CERTIFIED"),
                  "</h2>\n<table class=\"facts\">\n");
  auto fact = [&out](const char* k, const std::string& v) {
    absl::StrAppend(&out, "<tr><th>", k, "</th><td><code>", EscapeMarkup(v), "</code></td></tr>\n");
  };
  fact("suite digest", head.suite_digest());
  fact("connector", connector);
  fact("connector sha256", head.connector_sha256());
  if (!head.profile().empty()) fact("profile (every scenario)", head.profile());
  if (!head.recheck().empty()) {
    fact("determinism recheck",
         absl::StrCat(tally.rechecked(), " rerun, ", tally.diverged(), " diverged; rule: ", head.recheck()));
  }
  fact("weir", head.weir_version());
  fact("shard", absl::StrCat(head.shard_index(), "/", head.shard_count()));
  fact("runs",
       absl::StrCat(tally.runs(), " of ", head.pairs_total(), " pairs: ", tally.passed(), " passed, ", tally.failed(),
                    " failed", head.complete() ? "" : absl::StrCat(" (INCOMPLETE: ", head.stopped_because(), ")")));
  out +=
      "</table>\n<table class=\"invariants\">\n<tr><th>invariant</th><th>verdict</th><th>chances</th>"
      "<th>runs passed</th><th>runs failed</th><th>first failing seed</th><th>replay</th></tr>\n";
  for (const auto& s : head.invariants()) {
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
  if (const auto& fault = tally.first_harness_fault(); fault.has_value()) {
    absl::StrAppend(&out, "<p class=\"inv\">Harness fault in ", EscapeMarkup(fault->scenario), " seed ", fault->seed,
                    ": ", EscapeMarkup(fault->error), "</p>\n");
  }
  out += "</section>\n";
  return out;
}

std::string CertificateSeal(const v1::Certificate& certificate) {
  v1::Certificate copy = certificate;
  copy.clear_seal();
  copy.clear_signature();
  std::string bytes;
  {
    google::protobuf::io::StringOutputStream stream(&bytes);
    google::protobuf::io::CodedOutputStream coded(&stream);
    coded.SetSerializationDeterministic(true);
    copy.SerializeToCodedStream(&coded);
  }
  Sha256 h;
  h.Update(bytes);
  return h.HexDigest();
}

v1::Certificate MakeCertificate(const v1::SuiteReport& head, const SuiteTally& tally) {
  v1::Certificate c;
  c.set_suite_name(head.suite_name());
  c.set_suite_digest(head.suite_digest());
  c.set_weir_version(head.weir_version());
  *c.mutable_connector_argv() = head.connector_argv();
  c.set_connector_sha256(head.connector_sha256());
  c.set_runs(tally.runs());
  c.set_runs_passed(tally.passed());
  c.set_runs_failed(tally.failed());
  c.set_verdicts(tally.verdicts());
  c.set_weir_sha256(head.weir_sha256());
  c.set_recheck(head.recheck());
  c.set_runs_rechecked(tally.rechecked());
  c.set_runs_diverged(tally.diverged());
  c.set_certified(head.complete() && head.shard_count() <= 1 && c.runs() == head.pairs_total() && c.runs_failed() == 0);
  for (const auto& s : tally.invariants()) {
    if (s.runs_judged() > 0) AddCount(c.mutable_chances(), s.invariant(), s.chances());
  }
  for (const auto& name : tally.not_exercised()) c.add_not_exercised(name);
  c.set_profile(head.profile());
  c.set_profile_sha256(head.profile_sha256());
  c.set_seal(CertificateSeal(c));
  return c;
}

std::string CertificateJson(const v1::Certificate& certificate) { return ToJson(certificate); }

absl::StatusOr<v1::Certificate> ParseCertificateJson(std::string_view text) {
  v1::Certificate c;
  if (absl::Status st = FromJson(text, &c); !st.ok()) return st;
  return c;
}

std::string SuiteReportJson(const v1::SuiteReport& report) {
  std::string out;
  auto runs = ReadRunsInMemory(report.runs());
  // Runs in memory always read, and the printer always prints the empty list.
  (void)WriteSuiteReportJson(report, *runs, [&out](std::string_view piece) { out.append(piece); });
  return out;
}

std::string SuiteJUnitXml(const v1::SuiteReport& report, const std::string& timestamp, const std::string& hostname) {
  std::string out;
  auto runs = ReadRunsInMemory(report.runs());
  (void)WriteSuiteJUnitXml(report, SuiteTally::Of(report), *runs, timestamp, hostname,
                           [&out](std::string_view piece) { out.append(piece); });
  return out;
}

std::string SuiteSummaryText(const v1::SuiteReport& report) { return SuiteSummaryText(report, SuiteTally::Of(report)); }

std::string SuiteSummaryHtml(const v1::SuiteReport& report) { return SuiteSummaryHtml(report, SuiteTally::Of(report)); }

v1::Certificate MakeCertificate(const v1::SuiteReport& report) {
  return MakeCertificate(report, SuiteTally::Of(report));
}

}  // namespace weir
