#include "harness/suite/certify.h"

#include <chrono>
#include <mutex>
#include <thread>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "harness/cli/command_line.h"
#include "harness/oracle/verdict.h"

namespace weir {

std::string ReplayLine(const std::string& scenario_path, std::uint64_t seed, Transport transport,
                       const std::string& plan_path, const std::string& profile_path,
                       const std::vector<std::string>& argv) {
  std::string line = absl::StrCat("weir run --scenario ", ShellQuote(scenario_path), " --seed ", seed);
  if (transport == Transport::kUnix) absl::StrAppend(&line, " --transport unix");
  if (!plan_path.empty()) absl::StrAppend(&line, " --plan ", ShellQuote(plan_path));
  if (!profile_path.empty()) absl::StrAppend(&line, " --profile ", ShellQuote(profile_path));
  absl::StrAppend(&line, " --connector ", ShellQuote(ShellJoin(argv)));
  return line;
}

void Summarize(v1::SuiteReport* report) {
  report->clear_invariants();
  for (int i = 0; i < kInvariantCount; ++i) {
    v1::InvariantSummary* s = report->add_invariants();
    s->set_invariant(InvariantName(static_cast<Invariant>(i)));
  }
  for (const v1::RunRecord& run : report->runs()) {
    for (v1::InvariantSummary& s : *report->mutable_invariants()) {
      bool failed = false;
      for (const auto& name : run.failed_invariants()) failed |= name == s.invariant();
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
}

absl::StatusOr<v1::SuiteReport> Certify(const LoadedSuite& suite, const CertifyOptions& options) {
  struct Pair {
    std::uint64_t index;
    std::size_t scenario;
    std::uint64_t seed;
  };
  std::vector<Pair> pairs;
  std::uint64_t index = 0;
  for (std::size_t s = 0; s < suite.scenarios.size(); ++s) {
    for (std::uint64_t k = 0; k < suite.suite.seeds(); ++k, ++index) {
      if (index % options.shard.count != options.shard.index) continue;
      pairs.push_back(Pair{index, s, suite.suite.first_seed() + k});
    }
  }

  v1::SuiteReport report;
  report.set_suite_name(suite.suite.name());
  report.set_suite_digest(suite.digest);
  report.set_weir_version(WeirVersion());
  for (const auto& a : options.connector_argv) report.add_connector_argv(a);
  report.set_connector_sha256(options.connector_sha256);
  report.set_pairs_total(suite.pairs());
  report.set_shard_index(options.shard.index);
  report.set_shard_count(options.shard.count);

  std::vector<std::optional<v1::RunRecord>> results(pairs.size());
  std::mutex mu;
  std::size_t next = 0;
  std::uint64_t done = 0, failed = 0;
  std::string stopped;

  auto worker = [&] {
    for (;;) {
      std::size_t mine;
      {
        std::lock_guard<std::mutex> lock(mu);
        if (!stopped.empty() || next >= pairs.size()) return;
        if (options.stop != nullptr && options.stop->load()) {
          stopped = "interrupted by a signal";
          return;
        }
        if (options.max_failures > 0 && failed >= options.max_failures) {
          stopped = absl::StrCat("stopped after ", failed, " failed runs (--max-failures)");
          return;
        }
        mine = next++;
      }
      const Pair& p = pairs[mine];
      const std::string& scenario_path = suite.suite.scenarios(static_cast<int>(p.scenario));
      RunSpec spec;
      spec.scenario = suite.scenarios[p.scenario];
      if (options.profile.has_value()) *spec.scenario.mutable_profile() = *options.profile;
      spec.scenario_path = suite.scenario_paths[p.scenario];
      spec.seed = p.seed;
      spec.connector_argv = options.connector_argv;
      spec.transport = options.transport;
      if (options.first_failures != nullptr) spec.trace_path = options.first_failures->PathFor(p.index);
      spec.stop = options.stop;
      const auto start = std::chrono::steady_clock::now();
      auto out = options.runner ? options.runner(spec) : RunOverGrpc(spec);
      const double wall =
          std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
      if (absl::IsCancelled(out.status())) {
        // Abandoned half-way by a signal: not a finished run, so not reported.
        std::lock_guard<std::mutex> lock(mu);
        if (stopped.empty()) stopped = "interrupted by a signal";
        return;
      }

      v1::RunRecord rec;
      rec.set_scenario(scenario_path);
      rec.set_seed(p.seed);
      rec.set_pair_index(p.index);
      rec.set_wall_seconds(wall);
      rec.set_replay(ReplayLine(suite.scenario_paths[p.scenario], p.seed, options.transport, "",
                                options.profile_path, options.connector_argv));
      if (!out.ok()) {
        rec.set_passed(false);
        rec.set_harness_error(std::string(out.status().message()));
      } else {
        rec.set_digest(out->digest);
        rec.set_passed(out->verdict.passed());
        // The first violation is the one detected earliest in the trace (a
        // connector that died is named before the messages it then lost).
        std::uint64_t first_seq = ~std::uint64_t{0};
        for (int i = 0; i < kInvariantCount; ++i) {
          const InvariantResult& r = out->verdict.results[i];
          if (!r.checked || r.violations == 0) continue;
          rec.add_failed_invariants(InvariantName(static_cast<Invariant>(i)));
          if (r.first.empty()) continue;
          const Violation& v = r.first.front();
          const std::uint64_t seq = v.evidence.empty() ? ~std::uint64_t{0} - 1 : v.evidence.back().seq;
          if (rec.first_violation().empty() || seq < first_seq) {
            first_seq = seq;
            rec.set_first_violation(
                absl::StrCat(InvariantName(static_cast<Invariant>(i)), ": ", v.sentence));
          }
        }
      }
      if (options.first_failures != nullptr) options.first_failures->Offer(rec);
      std::lock_guard<std::mutex> lock(mu);
      ++done;
      if (!rec.passed()) ++failed;
      if (options.progress) options.progress({done, pairs.size(), failed}, rec);
      results[mine] = std::move(rec);
    }
  };

  const unsigned jobs = std::max(1u, options.jobs);
  std::vector<std::thread> threads;
  for (unsigned j = 0; j < jobs; ++j) threads.emplace_back(worker);
  for (auto& t : threads) t.join();

  for (auto& r : results) {
    if (r.has_value()) *report.add_runs() = std::move(*r);
  }
  report.set_complete(stopped.empty() && static_cast<std::size_t>(report.runs_size()) == pairs.size());
  report.set_stopped_because(stopped);
  Summarize(&report);
  return report;
}

}  // namespace weir
