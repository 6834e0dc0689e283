// What one call through weir costs against the physical limit, the bare gRPC
// round trip, measured in the same run:
//
//   1. echo: a bare unary echo (100-byte payload) between this process and a
//      child process (this binary with --echo-server), over loopback TCP and a
//      Unix socket, one call outstanding: round trips per second.
//   2. weir: a run of the steady scenario with the reference connector over
//      gRPC on both transports, counting every connector call (Open, Advance,
//      Checkpoint, Committed) and every broker call the connector made.
//      Per-call cost = (run wall time - time spent starting and killing
//      incarnations) / calls; the ratio to the echo round trip of the same
//      transport is the figure the target (at most 1.5x) is about. The same
//      scenario in-process (no gRPC) shows what the simulation itself costs.
//   3. restart: median wall time of Kill + Start + Open of an incarnation.
//
// usage: call_cost CONNECTOR SCENARIO [ECHO_CALLS [RESTARTS [ROUNDS [LOAD]]]]
//   LOAD: busy-looping processes kept running beside every measurement (the
//   loaded variant; bench/run_all.sh uses one per core), default 0.
//   WEIR_BENCH_ECHO_SERVER=CMD: the echo child is CMD (same handshake; words split
//   and quoted as in --connector) instead
//   of this binary, e.g. the Go echo server to measure a Go connector against
//   gRPC for Go's own round trip.
//   defaults: 20000 echo calls per transport, 30 restarts, 5 rounds. A round
//   is echo TCP, weir TCP, echo Unix, weir Unix, back to back; figures are
//   medians over rounds and ratios medians of the per-round ratios.
// Prints one human line per measurement, then `result NAME VALUE` lines for
// bench/run_all.sh. Exits 1 if a weir run does not pass.
#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <string>
#include <vector>

#include <grpcpp/grpcpp.h>

#include "absl/synchronization/mutex.h"

#include "bench/echo_baseline.h"
#include "fixtures/connectors/reference_source.h"
#include "harness/edge/broker_server.h"
#include "harness/edge/child_process.h"
#include "harness/edge/grpc_connector_port.h"
#include "harness/edge/grpc_run.h"
#include "harness/edge/private_dir.h"
#include "harness/inprocess/in_process_port.h"
#include "harness/scenario/scenario_file.h"

namespace weir {
namespace {

using Clock = std::chrono::steady_clock;

double Seconds(Clock::duration d) { return std::chrono::duration<double>(d).count(); }

using bench::Fail;
using bench::ListenAddress;
using bench::MeasureEcho;
using bench::Median;

const char* Name(Transport t) { return bench::TransportName(t); }

// --- 2. calls through weir ---------------------------------------------------

// Protobuf bytes sent and answered over all counted calls.
struct CallBytes {
  std::uint64_t sent = 0;
  std::uint64_t answered = 0;
  void Add(const google::protobuf::Message& request, const google::protobuf::Message& answer) {
    sent += request.ByteSizeLong();
    answered += answer.ByteSizeLong();
  }
};

class CountingBroker : public BrokerEndpoint {
 public:
  CountingBroker(BrokerEndpoint& inner, std::uint64_t& calls, CallBytes& bytes)
      : inner_(inner), calls_(calls), bytes_(bytes) {}
  CallStatus Pull(const v1::PullRequest& rq, v1::PullResponse* rs) override {
    return Count(rq, rs, &BrokerEndpoint::Pull);
  }
  CallStatus Ack(const v1::AckRequest& rq, v1::AckResponse* rs) override { return Count(rq, rs, &BrokerEndpoint::Ack); }
  CallStatus Nack(const v1::NackRequest& rq, v1::NackResponse* rs) override {
    return Count(rq, rs, &BrokerEndpoint::Nack);
  }
  CallStatus ExtendLease(const v1::ExtendLeaseRequest& rq, v1::ExtendLeaseResponse* rs) override {
    return Count(rq, rs, &BrokerEndpoint::ExtendLease);
  }
  CallStatus ListPartitions(const v1::ListPartitionsRequest& rq, v1::ListPartitionsResponse* rs) override {
    return Count(rq, rs, &BrokerEndpoint::ListPartitions);
  }
  CallStatus Read(const v1::ReadRequest& rq, v1::ReadResponse* rs) override {
    return Count(rq, rs, &BrokerEndpoint::Read);
  }
  CallStatus SaveBookmarks(const v1::SaveBookmarksRequest& rq, v1::SaveBookmarksResponse* rs) override {
    return Count(rq, rs, &BrokerEndpoint::SaveBookmarks);
  }
  CallStatus LoadBookmarks(const v1::LoadBookmarksRequest& rq, v1::LoadBookmarksResponse* rs) override {
    return Count(rq, rs, &BrokerEndpoint::LoadBookmarks);
  }
  void OnStrayCall(const std::string& method) override { inner_.OnStrayCall(method); }
  bool CrashRequested() const override { return inner_.CrashRequested(); }

 private:
  template <typename Rq, typename Rs>
  CallStatus Count(const Rq& rq, Rs* rs, CallStatus (BrokerEndpoint::*method)(const Rq&, Rs*)) {
    ++calls_;
    CallStatus status = (inner_.*method)(rq, rs);
    bytes_.Add(rq, *rs);
    return status;
  }

  BrokerEndpoint& inner_;
  std::uint64_t& calls_;
  CallBytes& bytes_;
};

// Counts connector and broker calls and the wall time spent starting and
// killing incarnations, around any port.
class CountingPort : public ConnectorPort {
 public:
  explicit CountingPort(ConnectorPort& inner) : inner_(inner) {}
  ConnectorFailure Start(std::uint64_t incarnation) override {
    const auto t0 = Clock::now();
    ConnectorFailure f = inner_.Start(incarnation);
    lifecycle_ += Clock::now() - t0;
    return f;
  }
  ConnectorFailure Open(const v1::OpenRequest& rq, v1::OpenResponse* rs, BrokerEndpoint& b) override {
    ++connector_calls;
    CountingBroker counting(b, broker_calls, bytes);
    ConnectorFailure f = inner_.Open(rq, rs, counting);
    bytes.Add(rq, *rs);
    return f;
  }
  ConnectorFailure Advance(const v1::AdvanceRequest& rq, v1::AdvanceResponse* rs, BrokerEndpoint& b) override {
    ++connector_calls;
    CountingBroker counting(b, broker_calls, bytes);
    ConnectorFailure f = inner_.Advance(rq, rs, counting);
    bytes.Add(rq, *rs);
    return f;
  }
  ConnectorFailure Checkpoint(const v1::CheckpointRequest& rq, v1::CheckpointResponse* rs, BrokerEndpoint& b) override {
    ++connector_calls;
    CountingBroker counting(b, broker_calls, bytes);
    ConnectorFailure f = inner_.Checkpoint(rq, rs, counting);
    bytes.Add(rq, *rs);
    return f;
  }
  ConnectorFailure Committed(const v1::CommittedRequest& rq, v1::CommittedResponse* rs, BrokerEndpoint& b) override {
    ++connector_calls;
    CountingBroker counting(b, broker_calls, bytes);
    ConnectorFailure f = inner_.Committed(rq, rs, counting);
    bytes.Add(rq, *rs);
    return f;
  }
  void Kill() override {
    const auto t0 = Clock::now();
    inner_.Kill();
    lifecycle_ += Clock::now() - t0;
  }
  double lifecycle_seconds() const { return Seconds(lifecycle_); }

  std::uint64_t connector_calls = 0;
  std::uint64_t broker_calls = 0;
  CallBytes bytes;

 private:
  ConnectorPort& inner_;
  Clock::duration lifecycle_{};
};

struct WeirFigures {
  double per_call_us = 0;
  double steps_per_s = 0;
  std::size_t mean_sent_bytes = 0;  // Protobuf bytes per call, rounded
  std::size_t mean_answered_bytes = 0;
};

WeirFigures Report(const char* name, const RunOutput& out, const CountingPort& counted, double wall,
                   double baseline_us) {
  if (!out.verdict.passed()) Fail(std::string(name) + ": the reference connector did not pass");
  const double calls = static_cast<double>(counted.connector_calls + counted.broker_calls);
  const double busy = wall - counted.lifecycle_seconds();
  WeirFigures f;
  f.per_call_us = busy * 1e6 / calls;
  f.steps_per_s = static_cast<double>(out.summary.steps) / busy;
  f.mean_sent_bytes = static_cast<std::size_t>(static_cast<double>(counted.bytes.sent) / calls + 0.5);
  f.mean_answered_bytes = static_cast<std::size_t>(static_cast<double>(counted.bytes.answered) / calls + 0.5);
  std::printf(
      "weir %-8s %llu steps, %llu connector + %llu broker calls (mean %zu B sent, %zu B answered) in "
      "%.3f s (%.3f s starting/killing): %.0f steps/s, %.1f us per call",
      name, static_cast<unsigned long long>(out.summary.steps),
      static_cast<unsigned long long>(counted.connector_calls), static_cast<unsigned long long>(counted.broker_calls),
      f.mean_sent_bytes, f.mean_answered_bytes, wall, counted.lifecycle_seconds(), f.steps_per_s, f.per_call_us);
  if (baseline_us > 0) std::printf(" = %.2fx the echo round trip", f.per_call_us / baseline_us);
  std::printf("\n");
  return f;
}

RunSpec SpecFor(const v1::Scenario& scenario, const std::string& path, const std::string& connector) {
  RunSpec spec;
  spec.scenario = scenario;
  spec.scenario_path = path;
  spec.seed = 1;
  spec.connector_argv = {connector};
  return spec;
}

// The edge as RunOverGrpc wires it, with a CountingPort around the real port.
WeirFigures MeasureWeir(const RunSpec& spec, Transport transport, double baseline_us) {
  const ListenAddress broker_listen(transport, "broker");
  const ListenAddress connector_listen(transport, "connector");
  const auto bound = std::chrono::milliseconds(spec.scenario.runtime().call_timeout_wall_ms());
  auto server = BrokerServer::Start(broker_listen.address);
  if (!server.ok()) Fail(std::string(server.status().message()));
  GrpcConnectorPort::Options options;
  options.argv = spec.connector_argv;
  options.broker_address = (*server)->address();
  options.listen_address = connector_listen.address;
  options.call_timeout = bound;
  GrpcConnectorPort port(options, **server);
  CountingPort counted(port);
  const auto t0 = Clock::now();
  auto out = RunWithPort(spec, counted);
  const double wall = Seconds(Clock::now() - t0);
  if (!out.ok()) Fail(std::string(out.status().message()));
  return Report(Name(transport), *out, counted, wall, baseline_us);
}

WeirFigures MeasureInProcess(const RunSpec& spec) {
  InProcessPort port([] { return std::make_unique<fixtures::ReferenceSource>(); });
  CountingPort counted(port);
  const auto t0 = Clock::now();
  auto out = RunWithPort(spec, counted);
  const double wall = Seconds(Clock::now() - t0);
  if (!out.ok()) Fail(std::string(out.status().message()));
  return Report("in-proc", *out, counted, wall, 0);
}

// --- 3. restart cost ---------------------------------------------------------

using bench::NoBroker;

// Median milliseconds of Kill + Start + Open of an incarnation over TCP.
double MeasureRestart(const std::string& connector, int restarts) {
  bench::ConnectorOnTcp run(connector);
  GrpcConnectorPort& port = *run.port;
  NoBroker broker;
  std::vector<double> ms;
  for (int i = 0; i <= restarts; ++i) {
    const auto t0 = Clock::now();
    port.Kill();
    if (ConnectorFailure f = port.Start(static_cast<std::uint64_t>(i + 1)); !f.ok()) Fail("start: " + f.detail);
    v1::OpenRequest request;
    request.set_incarnation(static_cast<std::uint64_t>(i + 1));
    v1::OpenResponse response;
    if (ConnectorFailure f = port.Open(request, &response, broker); !f.ok()) Fail("open: " + f.detail);
    if (i > 0) ms.push_back(Seconds(Clock::now() - t0) * 1e3);  // the first start has nothing to kill
  }
  port.Kill();
  const double median = Median(ms);
  std::printf(
      "restart   median %.1f ms to kill an incarnation, start the next and answer Open "
      "(%d restarts, min %.1f ms, max %.1f ms)\n",
      median, restarts, *std::min_element(ms.begin(), ms.end()), *std::max_element(ms.begin(), ms.end()));
  return median;
}

}  // namespace
}  // namespace weir

int main(int argc, char** argv) {
  using namespace weir;
  // As weir's edge and the C++ adapter do: the echo baseline gets the same
  // gRPC process settings as the calls it is compared with.
  absl::SetMutexDeadlockDetectionMode(absl::OnDeadlockCycle::kIgnore);
  if (std::optional<int> child = bench::ServeChildMode(argc, argv)) return *child;
  if (argc < 3) {
    std::fprintf(stderr, "usage: %s CONNECTOR SCENARIO [ECHO_CALLS [RESTARTS [ROUNDS [LOAD]]]]\n", argv[0]);
    return 2;
  }
  const std::string connector = argv[1];
  const int echo_calls = argc > 3 ? std::atoi(argv[3]) : 20000;
  const int restarts = argc > 4 ? std::atoi(argv[4]) : 30;
  const int rounds = argc > 5 ? std::max(1, std::atoi(argv[5])) : 5;
  const int load = argc > 6 ? std::max(0, std::atoi(argv[6])) : 0;
  auto scenario = LoadScenario(argv[2]);
  if (!scenario.ok()) {
    std::fprintf(stderr, "%s\n", std::string(scenario.status().message()).c_str());
    return 2;
  }
  const RunSpec spec = SpecFor(*scenario, argv[2], connector);
  const std::string self = bench::SelfPath();
  // The loaded variant: LOAD busy-looping processes at normal priority beside
  // everything measured (echo and weir alike), started and stopped here.
  const bench::BusyLoad busy(self, load);
  std::printf("load: %d busy-looping process(es) beside the measurements\n", busy.processes());

  // Rounds interleave the echo and weir on each transport, so that both see
  // the same machine load; each figure is the median over rounds, and each
  // ratio the median of the per-round ratios.
  // A second baseline per transport: the echo carrying, each way, the mean
  // Protobuf size of weir's own calls in that round (the physical floor for
  // those calls; the 100-byte echo is the floor for calls that small).
  std::vector<double> echo_tcp, echo_unix, weir_tcp, weir_unix, ratio_tcp, ratio_unix, steps_tcp, steps_unix, sized_tcp,
      sized_unix, sized_ratio_tcp, sized_ratio_unix;
  for (int round = 1; round <= rounds; ++round) {
    std::printf("-- round %d of %d\n", round, rounds);
    echo_tcp.push_back(MeasureEcho(self, Transport::kTcp, echo_calls));
    const WeirFigures wt = MeasureWeir(spec, Transport::kTcp, echo_tcp.back());
    echo_unix.push_back(MeasureEcho(self, Transport::kUnix, echo_calls));
    const WeirFigures wu = MeasureWeir(spec, Transport::kUnix, echo_unix.back());
    weir_tcp.push_back(wt.per_call_us);
    weir_unix.push_back(wu.per_call_us);
    ratio_tcp.push_back(wt.per_call_us / echo_tcp.back());
    ratio_unix.push_back(wu.per_call_us / echo_unix.back());
    steps_tcp.push_back(wt.steps_per_s);
    steps_unix.push_back(wu.steps_per_s);
    sized_tcp.push_back(MeasureEcho(self, Transport::kTcp, echo_calls, wt.mean_sent_bytes, wt.mean_answered_bytes));
    sized_unix.push_back(MeasureEcho(self, Transport::kUnix, echo_calls, wu.mean_sent_bytes, wu.mean_answered_bytes));
    sized_ratio_tcp.push_back(wt.per_call_us / sized_tcp.back());
    sized_ratio_unix.push_back(wu.per_call_us / sized_unix.back());
    std::printf("weir against the echo of its own message sizes: %.2fx TCP, %.2fx Unix\n", sized_ratio_tcp.back(),
                sized_ratio_unix.back());
  }
  // The in-process figure runs the queue reference source: queue scenarios only.
  const WeirFigures in_process = spec.scenario.has_log() ? WeirFigures{} : MeasureInProcess(spec);
  const double restart_ms = MeasureRestart(connector, restarts);
  std::printf(
      "median of %d rounds: echo %.1f us TCP, %.1f us Unix; weir %.1f us per call TCP (%.2fx), "
      "%.1f us Unix (%.2fx)\n",
      rounds, Median(echo_tcp), Median(echo_unix), Median(weir_tcp), Median(ratio_tcp), Median(weir_unix),
      Median(ratio_unix));

  std::printf("result echo_tcp_us %.2f\n", Median(echo_tcp));
  std::printf("result echo_unix_us %.2f\n", Median(echo_unix));
  std::printf("result echo_tcp_rps %.0f\n", 1e6 / Median(echo_tcp));
  std::printf("result echo_unix_rps %.0f\n", 1e6 / Median(echo_unix));
  std::printf("result weir_tcp_us %.2f\n", Median(weir_tcp));
  std::printf("result weir_unix_us %.2f\n", Median(weir_unix));
  std::printf("result weir_tcp_ratio %.2f\n", Median(ratio_tcp));
  std::printf("result weir_unix_ratio %.2f\n", Median(ratio_unix));
  std::printf("result weir_tcp_steps_per_s %.0f\n", Median(steps_tcp));
  std::printf("result weir_unix_steps_per_s %.0f\n", Median(steps_unix));
  std::printf("result inprocess_us %.2f\n", in_process.per_call_us);
  std::printf("result restart_ms %.2f\n", restart_ms);
  std::printf("result echo_tcp_sized_us %.2f\n", Median(sized_tcp));
  std::printf("result echo_unix_sized_us %.2f\n", Median(sized_unix));
  std::printf("result weir_tcp_sized_ratio %.2f\n", Median(sized_ratio_tcp));
  std::printf("result weir_unix_sized_ratio %.2f\n", Median(sized_ratio_unix));
  return 0;
}
