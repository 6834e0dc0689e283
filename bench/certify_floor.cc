// The certify floor: how close a suite run comes to what its calls and
// restarts cost at the least. For every run of the suite weir counts the
// connector calls and broker calls it carried and the incarnations it started;
// the floor is
//
//   (calls x the bare echo round trip + starts x the bare restart) / jobs
//
// with both baselines measured in this same process run (echo_baseline.h), so
// the ratio wall / floor holds on a noisy machine. The goal is a ratio of at
// most 1.3 with --jobs equal to the cores; everything above 1 is weir's own
// work, the connector's, and what the scheduler takes.
//
// usage: certify_floor SUITE JOBS ECHO_CALLS RESTARTS -- CONNECTOR ARGS...
// Prints one human line per figure, then `result NAME VALUE` lines for
// bench/run_all.sh. Exits 1 if a run does not pass.
#include <atomic>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <mutex>
#include <string>
#include <vector>

#include "absl/synchronization/mutex.h"
#include "bench/echo_baseline.h"
#include "harness/edge/grpc_run.h"
#include "harness/suite/certify.h"
#include "harness/suite/suite_file.h"

int main(int argc, char** argv) {
  using namespace weir;
  absl::SetMutexDeadlockDetectionMode(absl::OnDeadlockCycle::kIgnore);
  if (std::optional<int> child = bench::ServeChildMode(argc, argv)) return *child;
  int dashes = 0;
  for (int i = 1; i < argc; ++i) {
    if (std::strcmp(argv[i], "--") == 0) {
      dashes = i;
      break;
    }
  }
  if (dashes != 5 || dashes + 1 >= argc) {
    std::fprintf(stderr, "usage: %s SUITE JOBS ECHO_CALLS RESTARTS -- CONNECTOR ARGS...\n", argv[0]);
    return 2;
  }
  const unsigned jobs = static_cast<unsigned>(std::max(1, std::atoi(argv[2])));
  const int echo_calls = std::max(1, std::atoi(argv[3]));
  const int restarts = std::max(1, std::atoi(argv[4]));
  const std::vector<std::string> connector(argv + dashes + 1, argv + argc);
  auto suite = LoadSuite(argv[1]);
  if (!suite.ok()) {
    std::fprintf(stderr, "%s\n", std::string(suite.status().message()).c_str());
    return 2;
  }
  const std::string self = bench::SelfPath();

  // The baselines, before and after the suite; the floor uses their means so
  // a machine that got busier or quieter meanwhile counts both ways.
  const double echo_before = bench::MeasureEcho(self, Transport::kTcp, echo_calls);
  const double restart_before = bench::MeasureBareRestart(self, Transport::kTcp, restarts);

  std::mutex mu;
  std::uint64_t calls = 0, starts = 0, runs = 0, failed = 0;
  CertifyOptions options;
  options.connector_argv = connector;
  options.jobs = jobs;
  options.runner = [&](const RunSpec& spec) -> absl::StatusOr<RunOutput> {
    auto out = RunOverGrpc(spec);
    if (out.ok()) {
      std::lock_guard<std::mutex> lock(mu);
      calls += out->summary.connector_calls + out->summary.broker_calls;
      starts += out->summary.incarnations;
      ++runs;
      if (!out->verdict.passed()) ++failed;
    }
    return out;
  };
  const auto t0 = std::chrono::steady_clock::now();
  auto result = Certify(*suite, options);
  const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  if (!result.ok()) {
    std::fprintf(stderr, "certify: %s\n", std::string(result.status().message()).c_str());
    return 3;
  }

  const double echo_after = bench::MeasureEcho(self, Transport::kTcp, echo_calls);
  const double restart_after = bench::MeasureBareRestart(self, Transport::kTcp, restarts);
  const double echo_us = (echo_before + echo_after) / 2;
  const double restart_ms = (restart_before + restart_after) / 2;
  const double floor = (static_cast<double>(calls) * echo_us * 1e-6 + static_cast<double>(starts) * restart_ms * 1e-3) /
                       static_cast<double>(jobs);
  std::printf(
      "suite %s, --jobs %u: %llu runs (%llu failed), %llu calls, %llu starts in %.2f s wall\n"
      "floor: %llu calls x %.1f us + %llu starts x %.1f ms, over %u jobs = %.2f s; wall / floor = %.2fx\n",
      argv[1], jobs, static_cast<unsigned long long>(runs), static_cast<unsigned long long>(failed),
      static_cast<unsigned long long>(calls), static_cast<unsigned long long>(starts), wall,
      static_cast<unsigned long long>(calls), echo_us, static_cast<unsigned long long>(starts), restart_ms, jobs, floor,
      wall / floor);
  std::printf("result floor_s %.3f\n", floor);
  std::printf("result wall_s %.3f\n", wall);
  std::printf("result floor_ratio %.2f\n", wall / floor);
  std::printf("result calls %llu\n", static_cast<unsigned long long>(calls));
  std::printf("result starts %llu\n", static_cast<unsigned long long>(starts));
  return failed == 0 && runs == result->tally.runs() ? 0 : 1;
}
