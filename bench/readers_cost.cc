// Many readers: what a call costs with eight readers against one, in the same
// run, and whether weir's memory stays flat with sixteen readers over 200
// partitions as the run grows.
//
//   1. cost per call: a fault-free log scenario (16 partitions, steady
//      appends, a checkpoint every 64 records) run with 1 reader and with 8,
//      alternating which goes first, over gRPC (loopback TCP) with the log
//      reference connector. Per-call cost = wall time from the first step to
//      the end of the run (every reader is up by then: start-ups are not
//      calls) / the connector and broker calls in that stretch (Advance,
//      Checkpoint, Committed, Assign, Revoke, Cut, and every broker call).
//      Target: 8 readers within 1.15x of 1 reader (median of the per-round
//      ratios).
//      The same two runs in-process (the log reference linked in, no
//      processes, no gRPC) show what weir's own work per call costs.
//   2. memory: 16 readers, 200 partitions, with cuts and moves, at growing run
//      lengths in one process; weir's own peak resident set (VmHWM; the
//      readers are separate processes) after each run.
//
// usage: readers_cost LOG_CONNECTOR [RECORDS [ROUNDS [MEMORY_RECORDS]]]
//   defaults: 6000 records, 3 rounds, 8000 records for the first memory run
//   (then x2 and x4).
// Prints one human line per measurement and `result NAME VALUE` lines for
// bench/run_all.sh. Exits 1 if a run does not pass.
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include "bench/bench_support.h"
#include "fixtures/connectors/log_reference_source.h"
#include "harness/edge/grpc_run.h"
#include "harness/inprocess/in_process_port.h"

namespace weir {
namespace {

using Clock = std::chrono::steady_clock;

v1::Scenario Steady(std::uint64_t records, std::uint32_t readers, std::uint32_t partitions) {
  v1::Scenario s;
  s.set_name("readers-cost-river-gauges");
  auto* w = s.mutable_workload();
  w->set_messages(records);
  w->set_publish_interval_ms(2);
  w->set_payload_bytes(64);
  auto* l = s.mutable_log();
  l->set_partitions(partitions);
  l->set_keys(std::max<std::uint32_t>(64, partitions * 4));
  l->set_max_read(16);
  l->set_max_wait_ms(1000);
  l->set_broker_restart_ms(500);
  if (readers > 1) s.mutable_readers()->set_count(readers);
  auto* r = s.mutable_runtime();
  r->set_checkpoint_every_records(64);
  r->set_checkpoint_interval_ms(1000);
  r->set_drain_bound_ms(120000);
  r->set_call_timeout_wall_ms(60000);
  r->set_start_timeout_wall_ms(60000);
  r->set_max_same_time_steps(100000);
  r->set_max_same_time_wall_ms(60000);
  s.mutable_profile()->set_guarantee(v1::Profile::EXACTLY_ONCE);
  return s;
}

// Counts calls from the first step on and notes when that step came.
class CallClock : public TraceObserver {
 public:
  void OnEvent(const v1::TraceEvent& e) override {
    using K = v1::TraceEvent;
    if (!started_ && e.kind_case() == K::kStepped) {
      started_ = true;
      t0 = Clock::now();
    }
    if (!started_) return;
    switch (e.kind_case()) {
      case K::kStepped:
      case K::kCheckpoint:
      case K::kCommitNotice:
      case K::kAssigned:
      case K::kRevoked:
      case K::kCut:
      case K::kBrokerCall: ++calls; break;
      case K::kRunEnded: t1 = Clock::now(); break;
      default: break;
    }
  }
  Clock::time_point t0, t1;
  std::uint64_t calls = 0;

 private:
  bool started_ = false;
};

struct Figure {
  double ns_per_call = 0;
  std::uint64_t calls = 0;
};

// connector empty: the log reference in-process (no processes, no gRPC):
// what weir's own work per call costs.
bool Run(const v1::Scenario& s, const std::string& connector, Figure* out) {
  RunSpec spec;
  spec.scenario = s;
  spec.seed = 1;
  if (!connector.empty()) spec.connector_argv = {connector};
  CallClock clock;
  spec.observers = {&clock};
  auto result = connector.empty() ? RunInProcess(spec, [] { return std::make_unique<fixtures::LogReferenceSource>(); })
                                  : RunOverGrpc(spec);
  if (!result.ok()) {
    std::fprintf(stderr, "readers_cost: %s\n", std::string(result.status().message()).c_str());
    return false;
  }
  if (!result->verdict.passed()) {
    std::fprintf(stderr, "readers_cost: the run with %u readers did not pass\n",
                 std::max<std::uint32_t>(1, s.readers().count()));
    return false;
  }
  out->calls = clock.calls;
  out->ns_per_call =
      static_cast<double>(std::chrono::duration_cast<std::chrono::nanoseconds>(clock.t1 - clock.t0).count()) /
      static_cast<double>(std::max<std::uint64_t>(1, clock.calls));
  return true;
}

double Median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  return v.empty() ? 0 : v[v.size() / 2];
}

}  // namespace
}  // namespace weir

int main(int argc, char** argv) {
  using namespace weir;
  if (argc < 2) {
    std::fprintf(stderr, "usage: readers_cost LOG_CONNECTOR [RECORDS [ROUNDS [MEMORY_RECORDS]]]\n");
    return 2;
  }
  const std::string connector = argv[1];
  const std::uint64_t records = argc > 2 ? std::strtoull(argv[2], nullptr, 10) : 6000;
  const int rounds = argc > 3 ? std::atoi(argv[3]) : 3;
  const std::uint64_t memory_records = argc > 4 ? std::strtoull(argv[4], nullptr, 10) : 8000;

  std::vector<double> one, eight, ratio;
  for (int round = 0; round < rounds; ++round) {
    Figure a, b;
    const bool eight_first = round % 2 == 1;
    if (eight_first && !Run(Steady(records, 8, 16), connector, &b)) return 1;
    if (!Run(Steady(records, 1, 16), connector, &a)) return 1;
    if (!eight_first && !Run(Steady(records, 8, 16), connector, &b)) return 1;
    one.push_back(a.ns_per_call);
    eight.push_back(b.ns_per_call);
    ratio.push_back(b.ns_per_call / a.ns_per_call);
    std::printf("round %d: 1 reader %.1f us/call (%llu calls), 8 readers %.1f us/call (%llu calls), ratio %.3f\n",
                round + 1, a.ns_per_call / 1000, static_cast<unsigned long long>(a.calls), b.ns_per_call / 1000,
                static_cast<unsigned long long>(b.calls), b.ns_per_call / a.ns_per_call);
  }
  std::printf("cost per call, median: 1 reader %.1f us, 8 readers %.1f us, ratio %.3f (target <= 1.15)\n",
              Median(one) / 1000, Median(eight) / 1000, Median(ratio));
  std::printf("result readers_call_us_1 %.1f\nresult readers_call_us_8 %.1f\nresult readers_call_ratio %.3f\n",
              Median(one) / 1000, Median(eight) / 1000, Median(ratio));

  // The same comparison in-process: weir's own work per call, no processes.
  {
    std::vector<double> r;
    Figure a, b;
    for (int round = 0; round < rounds; ++round) {
      if (!Run(Steady(records, 1, 16), "", &a) || !Run(Steady(records, 8, 16), "", &b)) return 1;
      r.push_back(b.ns_per_call / a.ns_per_call);
    }
    std::printf("in-process (no processes, no gRPC): 1 reader %.2f us/call, 8 readers %.2f us/call, ratio %.3f\n",
                a.ns_per_call / 1000, b.ns_per_call / 1000, Median(r));
    std::printf("result readers_inprocess_ratio %.3f\n", Median(r));
  }

  for (std::uint64_t n : {memory_records, memory_records * 2, memory_records * 4}) {
    v1::Scenario s = Steady(n, 16, 200);
    s.mutable_readers()->set_cut_rate(0.02);
    s.mutable_readers()->set_move_rate(0.3);
    Figure f;
    const auto t0 = Clock::now();
    if (!Run(s, connector, &f)) return 1;
    const double secs = std::chrono::duration<double>(Clock::now() - t0).count();
    const long hwm = bench::StatusKb("VmHWM");
    std::printf("16 readers, 200 partitions, %llu records: %.1f s wall, %llu calls, weir peak RSS %.1f MB\n",
                static_cast<unsigned long long>(n), secs, static_cast<unsigned long long>(f.calls), hwm / 1024.0);
    std::printf("result readers16_hwm_kb_%llu %ld\n", static_cast<unsigned long long>(n), hwm);
  }
  return 0;
}
