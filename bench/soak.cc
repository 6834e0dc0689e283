// File: soak.cc
//
// Soak benchmark: one long run of the reference connector over gRPC (default
// bench/soak.scenario: one million messages with redelivery, lost acks and
// crashes at every crash point). Prints weir's own peak resident memory
// (VmHWM) and current RSS when 100k, 500k and 1M messages have been
// published and at the end, then the verdict: memory must stay flat and nothing may be
// lost (the oracle's lost-message invariant).
//
//   build/bench/soak BUILD/fixtures/connectors/reference_connector [SCENARIO] [MESSAGES]
//
// MESSAGES overrides the scenario's message count (CI runs a tiny soak);
// milestones scale with it (10 %, 50 %, 100 %).
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <string>
#include <vector>

#include "bench/bench_support.h"
#include "harness/edge/grpc_run.h"
#include "harness/oracle/verdict.h"
#include "harness/scenario/scenario_file.h"
#include "harness/trace/trace_log.h"

namespace weir {
namespace {

// Prints memory figures as the count of published messages crosses each
// milestone, with the largest number of messages published and not yet
// acknowledged so far: the in-flight window weir's models must hold (bounded
// by rate × (checkpoint interval + lease + restart), not by run length).
class Milestones : public TraceObserver {
 public:
  explicit Milestones(std::vector<std::uint64_t> at) : at_(std::move(at)) {}
  void OnEvent(const v1::TraceEvent& e) override {
    if (e.kind_case() == v1::TraceEvent::kAcked) ++acked_;
    if (e.kind_case() != v1::TraceEvent::kPublished) return;
    ++published_;
    max_backlog_ = std::max(max_backlog_, published_ - std::min(published_, acked_));
    while (next_ < at_.size() && published_ >= at_[next_]) {
      Print("published", published_, e.seq());
      ++next_;
    }
  }
  void Print(const char* what, std::uint64_t count, std::uint64_t events) const {
    std::printf("%10llu %-9s %10llu events  max unacked %7llu  VmHWM %7ld kB  VmRSS %7ld kB\n",
                static_cast<unsigned long long>(count), what, static_cast<unsigned long long>(events),
                static_cast<unsigned long long>(max_backlog_), bench::StatusKb("VmHWM"), bench::StatusKb("VmRSS"));
    std::fflush(stdout);
  }
  bool all_reached() const { return next_ == at_.size(); }

 private:
  std::vector<std::uint64_t> at_;
  std::size_t next_ = 0;
  std::uint64_t acked_ = 0;
  std::uint64_t published_ = 0;
  std::uint64_t max_backlog_ = 0;
};

int Main(int argc, char** argv) {
  if (argc < 2 || argc > 4) {
    std::fprintf(stderr, "usage: soak CONNECTOR [SCENARIO] [MESSAGES]\n");
    return 2;
  }
  const std::string scenario_path = argc >= 3 ? argv[2] : WEIR_SOAK_SCENARIO;
  auto scenario = LoadScenario(scenario_path);
  if (!scenario.ok()) {
    std::fprintf(stderr, "%s\n", std::string(scenario.status().message()).c_str());
    return 2;
  }
  if (argc == 4) {
    char* end = nullptr;
    const unsigned long long m = std::strtoull(argv[3], &end, 10);
    if (end == argv[3] || *end != '\0' || m < 10) {
      std::fprintf(stderr, "MESSAGES: expected an integer >= 10, got '%s'\n", argv[3]);
      return 2;
    }
    scenario->mutable_workload()->set_messages(m);
  }
  const std::uint64_t n = scenario->workload().messages();
  Milestones milestones({n / 10, n / 2, n});

  RunSpec spec;
  spec.scenario = *scenario;
  spec.scenario_path = scenario_path;
  spec.seed = 1;
  spec.connector_argv = {argv[1]};
  spec.transport = Transport::kUnix;
  spec.observers = {&milestones};

  std::printf("soak: %s, %llu messages, seed 1\n", scenario_path.c_str(), static_cast<unsigned long long>(n));
  const auto start = std::chrono::steady_clock::now();
  auto out = RunOverGrpc(spec);
  const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  if (!out.ok()) {
    std::fprintf(stderr, "soak: harness error: %s\n", std::string(out.status().message()).c_str());
    return 3;
  }
  const InvariantResult& lost = out->verdict.at(Invariant::kLostMessage);
  std::printf(
      "wall %.1f s, %llu events (%.0f events/s), %llu steps, %llu incarnations, "
      "%llu crashes, %llu committed messages\n",
      wall, static_cast<unsigned long long>(out->events), out->events / wall,
      static_cast<unsigned long long>(out->summary.steps), static_cast<unsigned long long>(out->summary.incarnations),
      static_cast<unsigned long long>(out->summary.crashes),
      static_cast<unsigned long long>(out->summary.committed_messages));
  std::printf("lost messages: %llu; verdict: %s\n", static_cast<unsigned long long>(lost.violations),
              out->verdict.passed() ? "passed" : "FAILED");
  milestones.Print("committed", out->summary.committed_messages, out->events);
  if (!milestones.all_reached()) {
    std::printf("soak: fewer messages published than asked for (run ended: %s)\n", out->summary.end_reason.c_str());
    return 1;
  }
  return out->verdict.passed() ? 0 : 1;
}

}  // namespace
}  // namespace weir

int main(int argc, char** argv) { return weir::Main(argc, argv); }
