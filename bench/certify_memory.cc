// Certify's peak memory against the number of runs: a 10,000-run certify must
// stay flat, so a suite's size is never limited by the memory of a CI runner.
//
// Runs one certify over a tiny scenario with RUNS seeds, in-process (the
// reference source, or with --failing the ack-on-pull mutant so every run
// fails and the first-failure trace keeping of `certify --html` is exercised
// on every run). The runs go through the same Certify() as over gRPC — the
// scheduling, RunRecords, summary and trace keeping are shared; only the
// runner differs (no connector process) — so the aggregation's memory is what
// is measured here. Prints the peak resident set size (VmHWM) when 10 %, 20 %,
// 50 % and 100 % of the runs are done, then after writing each report (JSON
// and JUnit streamed from the run log into files, the certificate, the HTML
// summary), and the growth per run between the first and the last mark. The
// run log itself is a file: on a tmpfs $TMPDIR its pages are the kernel's
// page cache, not this process's resident set.
//
// usage: certify_memory RUNS [--failing] [--jobs N]
//   build/bench/certify_memory 10000 --failing
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "fixtures/connectors/reference_source.h"
#include "bench/bench_support.h"
#include "harness/edge/private_dir.h"
#include "harness/inprocess/in_process_port.h"
#include "harness/report/html_timeline.h"
#include "harness/suite/certify.h"
#include "harness/suite/first_failures.h"
#include "harness/suite/suite_file.h"
#include "harness/suite/suite_reports.h"
#include "harness/suite/suite_tally.h"

namespace {

// A few messages, one checkpoint interval, one crash chance: about as small
// as a run that still exercises the runtime gets.
constexpr char kScenario[] = R"(
name: "memory-bench-beehive-scales"
description: "Three hive scales, six readings; a crash now and then."
workload { messages: 6 publish_interval_ms: 100 sources: ["hive-a", "hive-b", "hive-c"] }
broker { lease_ms: 2000 max_pull: 32 redelivery_horizon_ms: 120000 }
runtime { checkpoint_every_records: 3 checkpoint_interval_ms: 1000 drain_bound_ms: 600000 }
faults { crash_rate: 0.02 }
profile { guarantee: EXACTLY_ONCE }
)";

}  // namespace

int main(int argc, char** argv) {
  using namespace weir;
  if (argc < 2 || std::atoll(argv[1]) <= 0) {
    std::fprintf(stderr, "usage: %s RUNS [--failing] [--jobs N]\n", argv[0]);
    return 2;
  }
  const std::uint64_t runs = static_cast<std::uint64_t>(std::atoll(argv[1]));
  bool failing = false;
  unsigned jobs = 1;
  for (int i = 2; i < argc; ++i) {
    if (std::strcmp(argv[i], "--failing") == 0) {
      failing = true;
    } else if (std::strcmp(argv[i], "--jobs") == 0 && i + 1 < argc) {
      jobs = static_cast<unsigned>(std::atoi(argv[++i]));
    } else {
      std::fprintf(stderr, "unknown argument %s\n", argv[i]);
      return 2;
    }
  }

  auto dir = PrivateDir::Create();
  if (!dir.ok()) {
    std::fprintf(stderr, "%s\n", std::string(dir.status().message()).c_str());
    return 3;
  }
  const std::string scenario_path = (*dir)->path() + "/bench.scenario";
  const std::string suite_path = (*dir)->path() + "/bench.suite";
  std::ofstream(scenario_path) << kScenario;
  std::ofstream(suite_path) << "name: \"memory-bench\"\nscenarios: [\"bench.scenario\"]\nseeds: " << runs
                            << "\nfirst_seed: 1\n";
  auto suite = LoadSuite(suite_path);
  if (!suite.ok()) {
    std::fprintf(stderr, "%s\n", std::string(suite.status().message()).c_str());
    return 3;
  }
  auto traces_dir = PrivateDir::Create();
  if (!traces_dir.ok()) return 3;
  FirstFailureTraces traces((*traces_dir)->path());

  fixtures::Bugs bugs;
  bugs.ack_on_pull = failing;
  CertifyOptions options;
  options.connector_argv = {failing ? "(in-process ack-on-pull mutant)" : "(in-process reference)"};
  options.jobs = jobs;
  options.first_failures = &traces;
  options.runner = [bugs](const RunSpec& spec) {
    return RunInProcess(spec, [bugs] { return std::make_unique<fixtures::ReferenceSource>(bugs); });
  };
  const std::vector<std::uint64_t> marks = {std::max<std::uint64_t>(1, runs / 10), std::max<std::uint64_t>(1, runs / 5),
                                            std::max<std::uint64_t>(1, runs / 2), runs};
  std::size_t next_mark = 0;
  std::vector<std::pair<std::uint64_t, long>> seen;
  options.progress = [&](const CertifyOptions::Progress& p, const v1::RunRecord&) {
    while (next_mark < marks.size() && p.done >= marks[next_mark]) {
      seen.emplace_back(p.done, bench::StatusKb("VmHWM"));
      std::printf("after %6llu runs (%llu failed): peak RSS %6ld KiB\n", static_cast<unsigned long long>(p.done),
                  static_cast<unsigned long long>(p.failed), seen.back().second);
      std::fflush(stdout);
      ++next_mark;
    }
  };
  std::printf("certify in-process, %llu runs of %s, --jobs %u, first-failure traces kept; start: peak RSS %ld KiB\n",
              static_cast<unsigned long long>(runs), failing ? "the ack-on-pull mutant" : "the reference source", jobs,
              bench::StatusKb("VmHWM"));
  auto result = Certify(*suite, options);
  if (!result.ok()) {
    std::fprintf(stderr, "%s\n", std::string(result.status().message()).c_str());
    return 3;
  }
  const SuiteTally& tally = result->tally;
  if (tally.runs() != runs || (failing && tally.failed() != runs) || (!failing && tally.failed() != 0)) {
    std::fprintf(stderr, "unexpected outcome: %llu runs, %llu failed\n", static_cast<unsigned long long>(tally.runs()),
                 static_cast<unsigned long long>(tally.failed()));
    auto reader = result->runs->Read();
    v1::RunRecord r;
    for (int shown = 0; shown < 5 && reader->Next(&r).value_or(false);) {
      if (r.passed() != failing) continue;
      ++shown;
      std::fprintf(stderr, "  seed %llu: %s\n", static_cast<unsigned long long>(r.seed()),
                   r.first_violation().empty() ? r.harness_error().c_str() : r.first_violation().c_str());
    }
    return 1;
  }
  const auto kept = traces.First();
  if (failing && kept.empty()) {
    std::fprintf(stderr, "no first-failure trace kept\n");
    return 1;
  }
  std::printf("run log: %llu runs, %llu B on disk\n", static_cast<unsigned long long>(result->runs->size()),
              static_cast<unsigned long long>(result->runs->bytes()));
  // The reports certify writes, one at a time as the CLI does: JSON and JUnit
  // streamed from the run log into files, each written atomically.
  auto write = [&](const char* what, const std::string& name, absl::FunctionRef<absl::Status(TextOut)> text) {
    const std::string path = (*dir)->path() + "/" + name;
    if (absl::Status st = WriteFileAtomically(path, text); !st.ok()) {
      std::fprintf(stderr, "%s\n", std::string(st.message()).c_str());
      std::exit(3);
    }
    std::ifstream in(path, std::ios::binary | std::ios::ate);
    std::printf("after the %s (%lld B written): peak RSS %ld KiB\n", what, static_cast<long long>(in.tellg()),
                bench::StatusKb("VmHWM"));
  };
  write("JSON report", "report.json", [&](TextOut out) {
    auto reader = result->runs->Read();
    return WriteSuiteReportJson(result->head, *reader, out);
  });
  write("JUnit report", "report.xml", [&](TextOut out) {
    auto reader = result->runs->Read();
    return WriteSuiteJUnitXml(result->head, tally, *reader, "2026-01-01T00:00:00", "bench", out);
  });
  write("certificate", "report.cert", [&](TextOut out) {
    out(CertificateJson(MakeCertificate(result->head, tally)));
    return absl::OkStatus();
  });
  write("HTML summary", "report.html", [&](TextOut out) {
    out(HtmlPage("bench", SuiteSummaryHtml(result->head, tally)));
    return absl::OkStatus();
  });
  std::printf("first-failure traces kept: %zu (one per failed invariant)\n", kept.size());
  const long end = bench::StatusKb("VmHWM");
  std::printf("peak RSS with every report written: %ld KiB\n", end);
  if (seen.size() >= 2 && seen.back().first > seen.front().first) {
    const double per_run = static_cast<double>(seen.back().second - seen.front().second) * 1024.0 /
                           static_cast<double>(seen.back().first - seen.front().first);
    std::printf(
        "growth from %llu to %llu runs: %ld KiB (%.0f bytes per run); peak at the end / at the first mark "
        "= %.2f\n",
        static_cast<unsigned long long>(seen.front().first), static_cast<unsigned long long>(seen.back().first),
        seen.back().second - seen.front().second, per_run,
        static_cast<double>(seen.back().second) / static_cast<double>(seen.front().second));
    std::printf("with every report written: %ld KiB above the first mark\n", end - seen.front().second);
  }
  return 0;
}
