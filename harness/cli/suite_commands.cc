#include "harness/cli/suite_commands.h"

#include <signal.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <map>
#include <memory>
#include <optional>
#include <thread>
#include <variant>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "harness/edge/command_line.h"
#include "harness/edge/connector_identity.h"
#include "harness/cli/stop_signal.h"
#include "harness/edge/private_dir.h"
#include "harness/replay/explain.h"
#include "harness/report/html_timeline.h"
#include "harness/report/markup_escape.h"
#include "harness/scenario/profile_file.h"
#include "harness/scenario/text_file.h"
#include "harness/suite/certificate_trust.h"
#include "harness/suite/certify.h"
#include "harness/suite/recheck.h"
#include "harness/suite/run_log.h"
#include "harness/suite/signature.h"
#include "harness/suite/suite_reports.h"
#include "harness/trace/trace_format.h"

namespace weir {
namespace {

int Usage(absl::string_view message) { return UsageError(message); }

// --signing-key: the key, nullopt when not given, or the exit code of a
// usage error (a key file others can read, not a key, no --certificate).
std::variant<std::optional<Ed25519Key>, int> LoadSigningKey(const SuiteCommands& s) {
  if (s.signing_key.empty()) return std::optional<Ed25519Key>();
  if (s.certificate.empty()) return Usage("--signing-key signs the certificate; give --certificate FILE too");
  auto key = ReadSigningKeyFile(s.signing_key);
  if (!key.ok()) return Usage(absl::StrCat("--signing-key ", key.status().message()));
  return std::optional<Ed25519Key>(std::move(*key));
}

// Signs `cert` when a key was given; prints why not and returns false on error.
bool MaybeSign(const std::optional<Ed25519Key>& key, v1::Certificate* cert) {
  if (!key.has_value()) return true;
  if (absl::Status st = SignCertificate(*key, cert); !st.ok()) {
    std::fprintf(stderr, "weir: harness fault: cannot sign the certificate: %s\n", std::string(st.message()).c_str());
    return false;
  }
  return true;
}

void Touch(const char* env) {
  const char* path = std::getenv(env);
  if (path == nullptr || *path == '\0') return;
  if (std::FILE* f = std::fopen(path, "a")) std::fclose(f);
}

// --shard I/N, else the sharding variables CI systems and job runners set.
absl::StatusOr<ShardSpec> ResolveShard(const SuiteCommands& s) {
  auto parse = [](const std::string& text, std::uint32_t* out) { return absl::SimpleAtoi(text, out); };
  ShardSpec spec;
  if (!s.shard.empty()) {
    std::vector<std::string> parts = absl::StrSplit(s.shard, '/');
    if (parts.size() != 2 || !parse(parts[0], &spec.index) || !parse(parts[1], &spec.count) || spec.count == 0 ||
        spec.index >= spec.count) {
      return absl::InvalidArgumentError(absl::StrCat("--shard is '", s.shard, "'; expected I/N with 0 <= I < N"));
    }
    return spec;
  }
  struct Convention {
    const char* total;
    const char* index;
    const char* status_file;
  };
  for (const Convention c : {Convention{"GTEST_TOTAL_SHARDS", "GTEST_SHARD_INDEX", "GTEST_SHARD_STATUS_FILE"},
                             Convention{"TEST_TOTAL_SHARDS", "TEST_SHARD_INDEX", "TEST_SHARD_STATUS_FILE"}}) {
    const char* total = std::getenv(c.total);
    const char* index = std::getenv(c.index);
    if (total == nullptr && index == nullptr) continue;
    if (total == nullptr || index == nullptr || !parse(total, &spec.count) || !parse(index, &spec.index) ||
        spec.count == 0 || spec.index >= spec.count) {
      return absl::InvalidArgumentError(absl::StrCat(c.total, "/", c.index, " are '", total ? total : "", "'/'",
                                                     index ? index : "",
                                                     "'; expected a total >= 1 and 0 <= index < total"));
    }
    Touch(c.status_file);
    return spec;
  }
  if (const char* job = std::getenv("JOB_COMPLETION_INDEX"); job != nullptr && s.shard_count_for_index > 0) {
    spec.count = s.shard_count_for_index;
    if (!parse(job, &spec.index) || spec.index >= spec.count) {
      return absl::InvalidArgumentError(
          absl::StrCat("JOB_COMPLETION_INDEX is '", job, "'; expected 0 <= index < ", spec.count));
    }
    return spec;
  }
  return spec;
}

// The HTML report: the summary, then the timeline of the first failing run of
// each failed invariant (from the traces certify kept), in table order.
std::string SuiteHtml(const v1::SuiteReport& head, const SuiteTally& tally, const FirstFailureTraces* traces) {
  std::string body = absl::StrCat("<h1>weir certify</h1>\n", SuiteSummaryHtml(head, tally));
  const auto kept = traces != nullptr ? traces->First() : std::map<std::string, FirstFailureTraces::Kept>{};
  for (const auto& inv : head.invariants()) {
    if (inv.runs_failed() == 0) continue;
    auto it = kept.find(inv.invariant());
    if (it == kept.end()) {
      absl::StrAppend(&body, "<p class=\"elided\">No timeline for ", EscapeMarkup(inv.invariant()),
                      traces == nullptr ? ": merged reports carry no traces (see each shard's --html page)."
                                        : ": its trace was not kept.",
                      "</p>\n");
      continue;
    }
    ExplainOptions options;
    options.only_invariant = inv.invariant();
    options.replay = it->second.replay;
    auto explained = ExplainTrace(it->second.path, options);
    if (!explained.ok()) {
      absl::StrAppend(&body, "<p class=\"inv\">No timeline for ", EscapeMarkup(inv.invariant()), ": ",
                      EscapeMarkup(std::string(explained.status().message())), "</p>\n");
      continue;
    }
    explained->timelines.title =
        absl::StrCat("first ", inv.invariant(), " failure: ", it->second.scenario, " seed ", it->second.seed);
    explained->timelines.source.clear();  // a temporary file, gone after certify
    absl::StrAppend(&body, RunTimelinesHtml(explained->timelines));
  }
  return HtmlPage(absl::StrCat("weir certify: ", head.suite_name()), body);
}

// Now, as JUnit's timestamp wants it: "YYYY-MM-DDTHH:MM:SS", UTC, no zone.
std::string UtcTimestamp() {
  char stamp[32];
  const std::time_t t = std::time(nullptr);
  std::tm tm{};
  ::gmtime_r(&t, &tm);
  std::strftime(stamp, sizeof stamp, "%Y-%m-%dT%H:%M:%S", &tm);
  return stamp;
}

std::string HostName() {
  char host[256] = "localhost";
  ::gethostname(host, sizeof host - 1);
  return host;
}

// Writes each report asked for (--json, --junit, --certificate, --html) from
// `result`, the JSON and JUnit ones streamed from its run log, each file
// atomically. Prints each error; with `announce`, a line per file written.
// Returns the number of reports that could not be written.
int WriteReports(const SuiteCommands& s, const SuiteResult& result, const v1::Certificate& cert,
                 const FirstFailureTraces* traces, bool announce) {
  int errors = 0;
  auto write = [&](const std::string& path, const char* what, absl::FunctionRef<absl::Status(TextOut)> text) {
    if (path.empty()) return;
    if (absl::Status st = WriteFileAtomically(path, text); !st.ok()) {
      std::fprintf(stderr, "weir: %s\n", std::string(st.message()).c_str());
      ++errors;
    } else if (announce) {
      std::printf("%-12s %s\n", what, path.c_str());
    }
  };
  write(s.json, "json report", [&](TextOut out) {
    auto runs = result.runs->Read();
    return WriteSuiteReportJson(result.head, *runs, out);
  });
  write(s.junit, "junit", [&](TextOut out) {
    auto runs = result.runs->Read();
    return WriteSuiteJUnitXml(result.head, result.tally, *runs, UtcTimestamp(), HostName(), out);
  });
  write(s.certificate, "certificate", [&](TextOut out) {
    out(CertificateJson(cert));
    return absl::OkStatus();
  });
  write(s.html, "html report", [&](TextOut out) {
    out(SuiteHtml(result.head, result.tally, traces));
    return absl::OkStatus();
  });
  return errors;
}

int Certify(SuiteCommands& s) {
  auto connector = ParseConnectorFlags(s.connector, ConnectorNeed::kRequired);
  if (!connector.ok()) return UsageError(connector.status().message());
  const std::vector<std::string>& argv = connector->argv;
  const Transport transport = connector->transport;
  const std::optional<std::string> binary = ResolveExecutable(argv[0]);
  if (s.progress != "auto" && s.progress != "bar" && s.progress != "lines" && s.progress != "none") {
    return Usage("--progress is '" + s.progress + "'; expected auto, bar, lines or none");
  }
  if (s.certify->count("--jobs") > 0 && (s.jobs < 1 || s.jobs > 1024)) {
    return Usage(absl::StrCat("--jobs is ", s.jobs, "; expected 1 ..1024 runs at a time"));
  }
  if (absl::Status st = CheckOutputPaths(
          {{"--json", s.json}, {"--junit", s.junit}, {"--certificate", s.certificate}, {"--html", s.html}});
      !st.ok()) {
    return UsageError(st.message());
  }
  auto shard = ResolveShard(s);
  if (!shard.ok()) return Usage(std::string(shard.status().message()));
  auto suite = LoadSuite(s.suite);
  if (!suite.ok()) {
    std::fprintf(stderr, "%s\n", std::string(suite.status().message()).c_str());
    return kExitUsage;
  }
  auto sha = FileSha256(*binary);
  if (!sha.ok()) return Usage(std::string(sha.status().message()));
  auto recheck_rule = ParseRecheckRule(s.recheck);
  if (!recheck_rule.ok()) return Usage(std::string(recheck_rule.status().message()));
  auto signing = LoadSigningKey(s);
  if (std::holds_alternative<int>(signing)) return std::get<int>(signing);
  const std::optional<Ed25519Key>& signing_key = std::get<0>(signing);
  auto weir_sha = FileSha256("/proc/self/exe");
  if (!weir_sha.ok()) {
    std::fprintf(stderr, "weir: harness fault: %s\n", std::string(weir_sha.status().message()).c_str());
    return kExitHarness;
  }

  CertifyOptions options;
  if (!s.profile.empty()) {
    auto profile = LoadProfile(s.profile);
    if (!profile.ok()) {
      std::fprintf(stderr, "%s\n", std::string(profile.status().message()).c_str());
      return kExitUsage;
    }
    options.profile = std::move(*profile);
    options.profile_path = s.profile;
  }
  options.recheck = RecheckSample(*recheck_rule, suite->digest, suite->pairs());
  options.weir_sha256 = *weir_sha;
  options.connector_argv = argv;
  options.connector_sha256 = *sha;
  options.jobs = s.jobs > 0 ? s.jobs : std::max(1u, std::thread::hardware_concurrency());
  options.max_failures = s.max_failures;
  options.shard = *shard;
  options.transport = transport;
  const std::atomic<bool>* stop = InstallStopSignals();
  options.stop = stop;
  std::unique_ptr<PrivateDir> trace_dir;
  std::unique_ptr<FirstFailureTraces> first_failures;
  if (!s.html.empty() || options.recheck->RechecksFailures()) {
    auto dir = PrivateDir::Create();
    if (!dir.ok()) {
      std::fprintf(stderr, "weir: harness fault: %s\n", std::string(dir.status().message()).c_str());
      return kExitHarness;
    }
    trace_dir = std::move(*dir);
    if (!s.html.empty()) {
      first_failures = std::make_unique<FirstFailureTraces>(trace_dir->path());
      options.first_failures = first_failures.get();
    } else {
      options.scratch_dir = trace_dir->path();  // the recheck's traces
    }
  }

  const bool tty = s.progress == "bar" || (s.progress == "auto" && ::isatty(STDOUT_FILENO));
  const bool quiet = s.progress == "none";
  const auto start = std::chrono::steady_clock::now();
  auto last_line = start;
  options.progress = [&](const CertifyOptions::Progress& p, const v1::RunRecord& rec) {
    const auto now = std::chrono::steady_clock::now();
    const double elapsed = std::chrono::duration<double>(now - start).count();
    const double rate = elapsed > 0 ? static_cast<double>(p.done) / elapsed : 0;
    const double left = rate > 0 ? static_cast<double>(p.total - p.done) / rate : 0;
    if (quiet) return;
    if (tty) {
      const int width = 30;
      const int filled = p.total == 0 ? width : static_cast<int>(width * p.done / p.total);
      std::printf("\r[%s%s] %llu/%llu runs, %llu failed, %.1f runs/s, ~%.0f s left ",
                  std::string(static_cast<std::size_t>(filled), '#').c_str(),
                  std::string(static_cast<std::size_t>(width - filled), '.').c_str(),
                  static_cast<unsigned long long>(p.done), static_cast<unsigned long long>(p.total),
                  static_cast<unsigned long long>(p.failed), rate, left);
      if (p.done == p.total) std::printf("\n");
    } else if (!rec.passed() || now - last_line >= std::chrono::seconds(10) || p.done == p.total) {
      last_line = now;
      std::printf("certify: %llu/%llu runs, %llu failed, %.1f runs/s, ~%.0f s left%s\n",
                  static_cast<unsigned long long>(p.done), static_cast<unsigned long long>(p.total),
                  static_cast<unsigned long long>(p.failed), rate, left,
                  rec.passed()
                      ? ""
                      : absl::StrCat(" — FAILED ", rec.scenario(), " seed ", rec.seed(), ": ",
                                     rec.first_violation().empty() ? rec.harness_error() : rec.first_violation())
                            .c_str());
    }
    std::fflush(stdout);
  };

  std::printf("weir certify: suite %s (%s), %llu pairs, shard %u/%u, %u jobs\nconnector %s (%s)\n", s.suite.c_str(),
              suite->digest.c_str(), static_cast<unsigned long long>(suite->pairs()), options.shard.index,
              options.shard.count, options.jobs, ShellJoin(argv).c_str(), sha->c_str());
  if (options.profile.has_value()) {
    std::printf("profile %s (--profile, applied to every scenario)\n", options.profile_path.c_str());
  } else if (suite->profile.has_value()) {
    std::printf("profile %s (from the suite, applied to every scenario)\n", suite->profile_path.c_str());
  }
  std::printf("determinism recheck: %s\n", options.recheck->Describe().c_str());
  std::fflush(stdout);
  auto result = weir::Certify(*suite, options);
  if (!result.ok()) {
    std::fprintf(stderr, "weir: harness fault: %s\n", std::string(result.status().message()).c_str());
    return kExitHarness;
  }
  if (!result->head.profile().empty()) {
    auto profile_sha = FileSha256(result->head.profile());
    if (profile_sha.ok()) result->head.set_profile_sha256(*profile_sha);
  }
  const SuiteTally& tally = result->tally;
  v1::Certificate cert = MakeCertificate(result->head, tally);
  if (s.require_coverage) {
    // The certificate says what the command says: not certified while a
    // claimed invariant went unexercised.
    cert.set_coverage_required(true);
    if (cert.not_exercised_size() > 0) cert.set_certified(false);
    cert.set_seal(CertificateSeal(cert));
  }
  if (!MaybeSign(signing_key, &cert)) return kExitHarness;
  std::printf("\n%s", SuiteSummaryText(result->head, tally).c_str());
  const int write_errors = WriteReports(s, *result, cert, first_failures.get(), /*announce=*/true);
  if (signing_key.has_value() && write_errors == 0) {
    std::printf("%-12s %s (Ed25519)\n", "signed by", cert.key_fingerprint().c_str());
  }

  if (stop->load()) {
    std::printf("INTERRUPTED by signal %d: %llu finished run(s) reported; every connector was killed.\n", StopSignal(),
                static_cast<unsigned long long>(tally.runs()));
    return kExitInterrupted;
  }
  if (write_errors > 0 || tally.harness_faults() > 0) return kExitHarness;
  if (tally.invariant_failures() > 0) return kExitFailed;
  if (options.shard.count <= 1) {
    if (s.require_coverage && cert.not_exercised_size() > 0 && tally.failed() == 0 && result->head.complete()) {
      std::printf(
          "NOT CERTIFIED (--require-coverage): every run passed, but %d claimed invariant(s) had no "
          "chance to fail (see \"not exercised\" above).\n",
          cert.not_exercised_size());
      return kExitNotExercised;
    }
    std::printf("%s%s\n",
                cert.certified() ? "CERTIFIED: every run of the suite passed."
                                 : "NOT CERTIFIED: the suite did not run to completion.",
                cert.certified() && cert.not_exercised_size() > 0
                    ? absl::StrCat(" The certificate cannot vouch for ", cert.not_exercised_size(),
                                   " invariant(s) no run exercised; it lists them.")
                          .c_str()
                    : "");
    return cert.certified() ? kExitPassed : kExitFailed;
  }
  std::printf("shard %u/%u: every run passed; merge the shard reports with weir merge.\n", options.shard.index,
              options.shard.count);
  return kExitPassed;
}

int Verify(SuiteCommands& s) {
  std::string text;
  if (absl::Status st = ReadWholeFile(s.cert_file, &text); !st.ok()) return Usage(std::string(st.message()));
  auto cert = ParseCertificateJson(text);
  if (!cert.ok()) {
    return Usage(absl::StrCat(s.cert_file, ": not a certificate: ", cert.status().message()));
  }
  auto sha = FileSha256(s.connector_binary);
  if (!sha.ok()) return Usage(std::string(sha.status().message()));
  if (!s.trusted_key.empty()) {
    auto trusted = ReadTrustedKeyFile(s.trusted_key);
    if (!trusted.ok()) return Usage(absl::StrCat("--trusted-key ", trusted.status().message()));
    if (absl::Status st = CheckCertificateSignature(*cert, *trusted); !st.ok()) {
      std::printf("REJECTED: %s: %s.\n", s.cert_file.c_str(), std::string(st.message()).c_str());
      return kExitFailed;
    }
  }
  if (CertificateSeal(*cert) != cert->seal()) {
    std::printf("REJECTED: %s has been altered (its seal does not match its contents).\n", s.cert_file.c_str());
    return kExitFailed;
  }
  if (*sha != cert->connector_sha256()) {
    std::printf("REJECTED: %s certifies connector %s, but %s is %s.\n", s.cert_file.c_str(),
                cert->connector_sha256().c_str(), s.connector_binary.c_str(), sha->c_str());
    return kExitFailed;
  }
  if (!cert->certified()) {
    std::printf(
        "REJECTED: the certificate is intact and names this binary, but the suite did not pass "
        "(%llu of %llu runs failed).\n",
        static_cast<unsigned long long>(cert->runs_failed()), static_cast<unsigned long long>(cert->runs()));
    return kExitFailed;
  }
  std::printf("VERIFIED: %s certifies %s: suite %s (%s), %llu runs passed, weir %s.\n", s.cert_file.c_str(),
              s.connector_binary.c_str(), cert->suite_name().c_str(), cert->suite_digest().c_str(),
              static_cast<unsigned long long>(cert->runs()), cert->weir_version().c_str());
  if (!cert->profile().empty()) {
    std::printf("every run was judged by profile %s (sha256 %s)\n", cert->profile().c_str(),
                cert->profile_sha256().c_str());
  }
  if (cert->not_exercised_size() > 0) {
    std::string names;
    for (const auto& n : cert->not_exercised()) absl::StrAppend(&names, names.empty() ? "" : ", ", n);
    std::printf("not exercised (no run gave them a chance to fail; the certificate cannot vouch for them): %s\n",
                names.c_str());
  }
  std::printf("weir binary sha256 %s\n", cert->weir_sha256().empty() ? "(not recorded)" : cert->weir_sha256().c_str());
  if (!cert->recheck().empty()) {
    std::printf("determinism recheck: %llu rerun, %llu diverged; rule: %s\n",
                static_cast<unsigned long long>(cert->runs_rechecked()),
                static_cast<unsigned long long>(cert->runs_diverged()), cert->recheck().c_str());
  }
  if (!s.trusted_key.empty()) {
    std::printf("signed by the trusted key %s\n", cert->key_fingerprint().c_str());
  } else if (cert->signature().empty()) {
    std::printf(
        "note: the certificate is only sealed, not signed: anyone can recompute a seal "
        "(sign with weir certify --signing-key, check with --trusted-key)\n");
  } else {
    std::printf(
        "note: the certificate is signed by %s but only its seal was checked: "
        "pass --trusted-key to check the signature\n",
        cert->key_fingerprint().c_str());
  }
  return kExitPassed;
}

// Each shard's runs go to a run log of their own, sorted, one shard parsed at
// a time; the logs are then merged in pair order into the merged result's
// log. So merge holds one shard's parsed report at a time, not every shard's.
int Merge(SuiteCommands& s) {
  if (absl::Status st = CheckOutputPaths(
          {{"--json", s.json}, {"--junit", s.junit}, {"--certificate", s.certificate}, {"--html", s.html}});
      !st.ok()) {
    return UsageError(st.message());
  }
  auto harness_fault = [](const absl::Status& st) {
    std::fprintf(stderr, "weir: harness fault: %s\n", std::string(st.message()).c_str());
    return kExitHarness;
  };
  auto signing = LoadSigningKey(s);
  if (std::holds_alternative<int>(signing)) return std::get<int>(signing);
  const std::optional<Ed25519Key>& signing_key = std::get<0>(signing);
  v1::SuiteReport first;
  std::map<std::uint32_t, bool> seen;
  std::vector<std::unique_ptr<RunLog>> shard_runs;
  bool complete = true;
  std::string stopped;
  for (std::size_t i = 0; i < s.reports.size(); ++i) {
    const std::string& path = s.reports[i];
    std::string text;
    if (absl::Status st = ReadWholeFile(path, &text); !st.ok()) return Usage(std::string(st.message()));
    auto r = ParseSuiteReportJson(text);
    if (!r.ok()) return Usage(absl::StrCat(path, ": not a suite report: ", r.status().message()));
    text.clear();
    text.shrink_to_fit();
    if (i == 0) {
      first = *r;
      first.clear_runs();
    } else if (r->suite_digest() != first.suite_digest() || r->connector_sha256() != first.connector_sha256() ||
               r->shard_count() != first.shard_count() || r->pairs_total() != first.pairs_total()) {
      return Usage(absl::StrCat(path, ": belongs to another suite, connector or sharding than ", s.reports[0]));
    }
    if (seen[r->shard_index()]) return Usage(absl::StrCat(path, ": shard ", r->shard_index(), " given twice"));
    seen[r->shard_index()] = true;
    complete &= r->complete();
    if (!r->stopped_because().empty()) stopped = r->stopped_because();
    auto* runs = r->mutable_runs();
    std::sort(runs->pointer_begin(), runs->pointer_end(),
              [](const v1::RunRecord* a, const v1::RunRecord* b) { return a->pair_index() < b->pair_index(); });
    auto log = RunLog::Create();
    if (!log.ok()) return harness_fault(log.status());
    for (const v1::RunRecord& run : *runs) {
      if (absl::Status st = (*log)->Append(run); !st.ok()) return harness_fault(st);
    }
    if (absl::Status st = (*log)->Finish(); !st.ok()) return harness_fault(st);
    shard_runs.push_back(std::move(*log));
  }
  complete &= seen.size() == first.shard_count();

  SuiteResult merged;
  auto log = RunLog::Create();
  if (!log.ok()) return harness_fault(log.status());
  merged.runs = std::move(*log);
  struct Cursor {
    std::unique_ptr<RunReader> reader;
    v1::RunRecord run;
    bool more = false;
  };
  std::vector<Cursor> cursors(shard_runs.size());
  auto advance = [](Cursor& c) -> absl::Status {
    absl::StatusOr<bool> more = c.reader->Next(&c.run);
    if (!more.ok()) return more.status();
    c.more = *more;
    return absl::OkStatus();
  };
  for (std::size_t i = 0; i < shard_runs.size(); ++i) {
    cursors[i].reader = shard_runs[i]->Read();
    if (absl::Status st = advance(cursors[i]); !st.ok()) return harness_fault(st);
  }
  for (;;) {
    Cursor* lowest = nullptr;
    for (Cursor& c : cursors) {
      if (c.more && (lowest == nullptr || c.run.pair_index() < lowest->run.pair_index())) lowest = &c;
    }
    if (lowest == nullptr) break;
    merged.tally.Add(lowest->run);
    if (absl::Status st = merged.runs->Append(lowest->run); !st.ok()) return harness_fault(st);
    if (absl::Status st = advance(*lowest); !st.ok()) return harness_fault(st);
  }
  if (absl::Status st = merged.runs->Finish(); !st.ok()) return harness_fault(st);

  v1::SuiteReport& head = merged.head;
  head = first;
  head.set_shard_index(0);
  head.set_shard_count(1);
  head.set_complete(complete && merged.tally.runs() == head.pairs_total());
  head.set_stopped_because(complete ? "" : (stopped.empty() ? "shards missing" : stopped));
  *head.mutable_invariants() = merged.tally.invariants();
  head.clear_faults_applied();
  for (const auto& [fault, n] : merged.tally.faults_applied()) AddCount(head.mutable_faults_applied(), fault, n);
  head.set_runs_rechecked(merged.tally.rechecked());
  head.set_runs_diverged(merged.tally.diverged());
  v1::Certificate cert = MakeCertificate(head, merged.tally);
  if (!MaybeSign(signing_key, &cert)) return kExitHarness;
  std::printf("%s", SuiteSummaryText(head, merged.tally).c_str());
  if (WriteReports(s, merged, cert, nullptr, /*announce=*/false) > 0) return kExitHarness;
  return cert.certified() ? kExitPassed : kExitFailed;
}

int Keygen(SuiteCommands& s) {
  auto key = WriteNewKeyPair(s.key_out, s.key_force);
  if (!key.ok()) {
    if (absl::IsInternal(key.status())) {
      std::fprintf(stderr, "weir: harness fault: %s\n", std::string(key.status().message()).c_str());
      return kExitHarness;
    }
    return Usage(std::string(key.status().message()));
  }
  std::printf(
      "private key  %s (PEM PKCS#8, mode 0600: keep it secret; weir certify --signing-key)\n"
      "public key   %s.pub (PEM SubjectPublicKeyInfo; weir verify --trusted-key)\n"
      "fingerprint  %s\n",
      s.key_out.c_str(), s.key_out.c_str(), key->Fingerprint().c_str());
  return kExitPassed;
}

}  // namespace

void AddSuiteCommands(CLI::App& app, SuiteCommands& s) {
  s.certify = app.add_subcommand("certify", "Run a suite against a connector; write reports and a certificate");
  s.certify
      ->add_option("--suite", s.suite,
                   "Suite file (Protobuf text format), or a bundled suite's name (quick, standard, …)")
      ->required();
  AddConnectorFlags(*s.certify, s.connector, "Connector command 'CMD ARGS…' (no shell)");
  s.certify->add_option("--jobs", s.jobs, "Runs at a time (default: one per core)")
      ->multi_option_policy(CLI::MultiOptionPolicy::TakeLast)
      ->check(WholeNumber());
  s.certify->add_option("--max-failures", s.max_failures, "Stop launching runs after N failed runs")
      ->check(WholeNumber());
  s.certify->add_option("--shard", s.shard, "Run shard I of N (I/N); default from GTEST_*/TEST_* sharding variables");
  s.certify
      ->add_option("--shard-count", s.shard_count_for_index,
                   "Total shards when the index comes from JOB_COMPLETION_INDEX")
      ->check(WholeNumber());
  s.certify->add_option("--json", s.json, "Write the JSON report here");
  s.certify->add_option("--junit", s.junit, "Write JUnit XML here");
  s.certify->add_option("--certificate", s.certificate, "Write the certificate here");
  s.certify->add_option("--html", s.html,
                        "Write an HTML report here: summary and a timeline of each invariant's first failure");
  s.certify->add_option("--progress", s.progress, "auto (bar on a terminal), bar, lines or none");
  s.certify->add_option("--profile", s.profile,
                        "Profile file, or a bundled profile's name: what the connector claims; judges every "
                        "scenario by it (overrides the suite's and the scenarios' own)");
  s.certify->add_flag("--require-coverage", s.require_coverage,
                      "Refuse the certificate (exit 5) when an invariant the profile claims had no chance to "
                      "fail in any run");
  s.certify->add_option("--recheck", s.recheck,
                        "Rerun pairs to check determinism: N pairs, all or none (default: 1 in 10, at least 1, "
                        "chosen by the suite digest); failing runs are rerun unless none");
  s.certify->add_option("--signing-key", s.signing_key,
                        "Sign the certificate with this Ed25519 private key (weir keygen; mode 0600)");

  s.verify = app.add_subcommand("verify", "Check that a certificate is intact and belongs to a connector binary");
  s.verify->add_option("certificate", s.cert_file, "Certificate file")->required();
  s.verify->add_option("--connector-binary", s.connector_binary, "The connector binary to check")->required();
  s.verify->add_option("--trusted-key", s.trusted_key,
                       "Require a valid signature by this public key (weir keygen's KEY.pub)");

  s.merge = app.add_subcommand("merge", "Combine shard reports into one report and one certificate");
  s.merge->add_option("reports", s.reports, "Shard JSON reports")->required();
  s.merge->add_option("--json", s.json, "Write the merged JSON report here");
  s.merge->add_option("--junit", s.junit, "Write merged JUnit XML here");
  s.merge->add_option("--certificate", s.certificate, "Write the certificate here");
  s.merge->add_option("--html", s.html, "Write the merged HTML summary here");
  s.merge->add_option("--signing-key", s.signing_key,
                      "Sign the certificate with this Ed25519 private key (weir keygen; mode 0600)");

  s.keygen = app.add_subcommand("keygen", "Write an Ed25519 key pair to sign certificates with");
  s.keygen->add_option("--out", s.key_out, "Private key file; the public key goes to FILE.pub")->required();
  s.keygen->add_flag("--force", s.key_force, "Replace existing key files");
}

int RunSuiteCommand(SuiteCommands& s) {
  if (s.certify != nullptr && s.certify->parsed()) return Certify(s);
  if (s.verify != nullptr && s.verify->parsed()) return Verify(s);
  if (s.merge != nullptr && s.merge->parsed()) return Merge(s);
  if (s.keygen != nullptr && s.keygen->parsed()) return Keygen(s);
  return -1;
}

}  // namespace weir
