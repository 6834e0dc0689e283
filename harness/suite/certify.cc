#include "harness/suite/certify.h"

#include <chrono>
#include <cstdio>
#include <mutex>
#include <thread>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "harness/edge/replay_line.h"
#include "harness/oracle/verdict.h"
#include "harness/replay/replay.h"
#include "harness/suite/reorder_buffer.h"

namespace weir {

absl::StatusOr<SuiteResult> Certify(const LoadedSuite& suite, const CertifyOptions& options) {
  // Pair k of this shard is pair index + k * count of the suite (scenario-major,
  // then seed); computed when launched, so nothing is kept per pair.
  const std::uint64_t seeds = suite.suite.seeds();
  const std::uint64_t total = suite.pairs();
  const std::uint64_t mine_total =
      options.shard.index < total ? (total - options.shard.index + options.shard.count - 1) / options.shard.count : 0;

  auto log = RunLog::Create();
  if (!log.ok()) return log.status();
  SuiteResult result;
  result.runs = std::move(*log);
  v1::SuiteReport& head = result.head;
  head.set_suite_name(suite.suite.name());
  head.set_suite_digest(suite.digest);
  head.set_weir_version(WeirVersion());
  for (const auto& a : options.connector_argv) head.add_connector_argv(a);
  head.set_connector_sha256(options.connector_sha256);
  head.set_pairs_total(total);
  head.set_shard_index(options.shard.index);
  head.set_shard_count(options.shard.count);
  // The profile every run is judged by: the caller's, else the suite's.
  const std::optional<v1::Profile>& profile = options.profile.has_value() ? options.profile : suite.profile;
  const std::string& profile_path = options.profile.has_value() ? options.profile_path : suite.profile_path;
  head.set_profile(profile_path);
  if (options.recheck.has_value()) head.set_recheck(options.recheck->Describe());
  head.set_weir_sha256(options.weir_sha256);

  std::mutex mu;
  std::uint64_t next = 0;
  std::uint64_t done = 0, failed = 0;
  std::string stopped;
  ReorderBuffer<v1::RunRecord> order;
  absl::Status log_status;
  auto in_order = [&](v1::RunRecord rec) {  // REQUIRES: mu held
    result.tally.Add(rec);
    if (log_status.ok()) log_status = result.runs->Append(rec);
  };

  auto worker = [&] {
    for (;;) {
      std::uint64_t mine;
      {
        std::lock_guard<std::mutex> lock(mu);
        if (!stopped.empty() || !log_status.ok() || next >= mine_total) return;
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
      const std::uint64_t index = options.shard.index + mine * options.shard.count;
      const std::size_t scenario = static_cast<std::size_t>(index / seeds);
      const std::uint64_t seed = suite.suite.first_seed() + index % seeds;
      // One form of the path everywhere (summary, records, replay lines).
      const std::string& scenario_path = suite.scenario_paths[scenario];
      RunSpec spec;
      spec.scenario = suite.scenarios[scenario];
      if (profile.has_value()) *spec.scenario.mutable_profile() = *profile;
      spec.scenario_path = suite.scenario_paths[scenario];
      spec.seed = seed;
      spec.connector_argv = options.connector_argv;
      spec.transport = options.transport;
      const bool rechecking = options.recheck.has_value() && options.recheck->RechecksFailures();
      bool scratch_trace = false;
      if (options.first_failures != nullptr) {
        spec.trace_path = options.first_failures->PathFor(index);
      } else if (rechecking && !options.scratch_dir.empty()) {
        spec.trace_path = absl::StrCat(options.scratch_dir, "/pair-", index, ".jsonl");
        scratch_trace = true;
      }
      spec.stop = options.stop;
      auto run_once = [&](const RunSpec& s) { return options.runner ? options.runner(s) : RunOverGrpc(s); };
      const auto start = std::chrono::steady_clock::now();
      auto out = run_once(spec);
      const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
      // The determinism recheck: the same spec once more.
      const bool recheck = out.ok() && options.recheck.has_value() &&
                           (options.recheck->Contains(index) || (rechecking && !out->verdict.passed()));
      std::optional<absl::StatusOr<RunOutput>> again;
      ReplayResult compared;
      absl::Status compare_status = absl::UnknownError("no trace of the first run to compare");
      if (recheck) {
        RunSpec second = spec;
        if (!spec.trace_path.empty()) second.trace_path = spec.trace_path + ".recheck";
        again = run_once(second);
        if (again->ok() && (*again)->digest != out->digest && !spec.trace_path.empty()) {
          compare_status = CompareTraceFiles(spec.trace_path, second.trace_path, &compared);
        }
        if (!second.trace_path.empty()) std::remove(second.trace_path.c_str());
      }
      if (scratch_trace) std::remove(spec.trace_path.c_str());
      if (absl::IsCancelled(out.status()) || (again.has_value() && absl::IsCancelled(again->status()))) {
        // Abandoned half-way by a signal: not a finished run, so not reported.
        std::lock_guard<std::mutex> lock(mu);
        if (stopped.empty()) stopped = "interrupted by a signal";
        order.Put(mine, std::nullopt, in_order);
        return;
      }

      v1::RunRecord rec;
      rec.set_scenario(scenario_path);
      rec.set_seed(seed);
      rec.set_pair_index(index);
      rec.set_wall_seconds(wall);
      rec.set_replay(ReplayLine(scenario_path, seed, options.transport, "", profile_path, options.connector_argv));
      if (!out.ok()) {
        rec.set_passed(false);
        rec.set_harness_error(std::string(out.status().message()));
      } else {
        rec.set_digest(out->digest);
        rec.set_passed(out->verdict.passed());
        for (int i = 0; i < kInvariantCount; ++i) {
          const InvariantResult& r = out->verdict.results[i];
          const char* name = InvariantName(static_cast<Invariant>(i));
          if (r.checked && r.violations > 0) rec.add_failed_invariants(name);
          if (r.judged()) AddCount(rec.mutable_chances(), name, r.chances);
        }
        for (const auto& [fault, n] : out->verdict.faults_applied) AddCount(rec.mutable_faults_applied(), fault, n);
        // The first violation is the one whose cause came earliest (a
        // connector that died is named before the messages it then lost).
        const auto by_cause = ViolationsByCause(out->verdict);
        if (!by_cause.empty()) {
          rec.set_first_violation(
              absl::StrCat(InvariantName(by_cause.front()->invariant), ": ", by_cause.front()->sentence));
        }
      }
      if (again.has_value()) {
        rec.set_rechecked(true);
        if (!again->ok()) {
          rec.set_passed(false);
          rec.set_harness_error(absl::StrCat("determinism recheck: ", again->status().message()));
        } else {
          rec.set_recheck_digest((*again)->digest);
          if ((*again)->digest != out->digest) {
            if (compare_status.ok() && !compared.identical) {
              rec.set_divergence(absl::StrCat("event #", compared.diverged_at, ": expected ", compared.expected_what,
                                              ", got ", compared.got_what));
            }
            // A run that failed an invariant keeps that as its first
            // violation (the bug it found); a passing one is failed here.
            const bool had_violation = !rec.first_violation().empty();
            rec.set_passed(false);
            rec.add_failed_invariants(kNondeterministicOutcome);
            if (!had_violation) {
              rec.set_first_violation(absl::StrCat(
                  kNondeterministicOutcome, ": the same scenario, seed and connector gave trace digest ", out->digest,
                  ", then ", (*again)->digest,
                  rec.divergence().empty() ? std::string() : absl::StrCat("; first difference at ", rec.divergence()),
                  " (the connector reads the wall clock, uses unseeded randomness or races threads: its failures "
                  "cannot be replayed)"));
            }
          }
        }
      }
      if (options.first_failures != nullptr) options.first_failures->Offer(rec);
      std::lock_guard<std::mutex> lock(mu);
      ++done;
      if (!rec.passed()) ++failed;
      if (options.progress) options.progress({done, mine_total, failed}, rec);
      order.Put(mine, std::move(rec), in_order);
    }
  };

  const unsigned jobs = std::max(1u, options.jobs);
  std::vector<std::thread> threads;
  for (unsigned j = 0; j < jobs; ++j) threads.emplace_back(worker);
  for (auto& t : threads) t.join();

  // Every launched run was put (finished or abandoned), so nothing waits.
  if (log_status.ok()) log_status = result.runs->Finish();
  if (!log_status.ok()) return log_status;
  head.set_complete(stopped.empty() && result.tally.runs() == mine_total);
  head.set_stopped_because(stopped);
  *head.mutable_invariants() = result.tally.invariants();
  for (const auto& [fault, n] : result.tally.faults_applied()) AddCount(head.mutable_faults_applied(), fault, n);
  head.set_runs_rechecked(result.tally.rechecked());
  head.set_runs_diverged(result.tally.diverged());
  return result;
}

absl::StatusOr<v1::SuiteReport> LoadReport(const SuiteResult& result) {
  v1::SuiteReport report = result.head;
  report.clear_runs();
  auto reader = result.runs->Read();
  for (;;) {
    v1::RunRecord* run = report.add_runs();
    absl::StatusOr<bool> more = reader->Next(run);
    if (!more.ok()) return more.status();
    if (!*more) break;
  }
  report.mutable_runs()->RemoveLast();
  return report;
}

}  // namespace weir
