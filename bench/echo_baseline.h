// File: echo_baseline.h
//
// The physical floor weir's benchmarks measure themselves against, in the
// same run: a bare gRPC unary echo between this process and a child process
// (the benchmark's own binary started with --echo-server, with weir's
// start-up handshake), and the bare cost of starting such a child and
// answering its first call. Also a stated background load (busy-looping
// children started with --spin) for the loaded figures.
//
// A benchmark's main() calls ServeChildMode() first: it serves the echo or
// spins when the process was started as one of these children.
#pragma once

#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "harness/edge/broker_server.h"
#include "harness/edge/child_process.h"
#include "harness/edge/grpc_connector_port.h"
#include "harness/edge/private_dir.h"
#include "harness/run/run.h"

namespace weir::bench {

// Exits with a message on stderr (a benchmark that cannot measure stops).
[[noreturn]] void Fail(const std::string& what);

double Median(std::vector<double> v);
double Percentile(std::vector<double> v, double p);

// This binary's absolute path (/proc/self/exe).
std::string SelfPath();

// The process's exit code when argv says it is an echo server or a spinner
// child, else nullopt (the benchmark goes on).
std::optional<int> ServeChildMode(int argc, char** argv);

const char* TransportName(Transport t);

// Where a server listens: loopback TCP with a port the server picks, or a
// Unix socket in a private directory that lives as long as this value.
struct ListenAddress {
  ListenAddress(Transport transport, const char* name);
  std::unique_ptr<PrivateDir> dir;
  std::string address;
};

// Mean microseconds per round trip of `calls` echo calls, one outstanding,
// after a warm-up; request_bytes sent, answer_bytes answered (0: the request's
// payload echoed). Prints one line.
double MeasureEcho(const std::string& self, Transport transport, int calls, std::size_t request_bytes = 100,
                   std::size_t answer_bytes = 0);

// Median milliseconds to start an echo server child, read its address from
// the ready pipe, connect, answer one call and kill it: what a restart costs
// with nothing of weir or a connector in it. Prints one line.
double MeasureBareRestart(const std::string& self, Transport transport, int restarts);

// A broker that answers every call with nothing: for timing a connector's
// start and Open, where no broker work is wanted.
class NoBroker : public BrokerEndpoint {
 public:
  CallStatus Pull(const v1::PullRequest&, v1::PullResponse*) override { return {}; }
  CallStatus Ack(const v1::AckRequest&, v1::AckResponse*) override { return {}; }
  CallStatus Nack(const v1::NackRequest&, v1::NackResponse*) override { return {}; }
  CallStatus ExtendLease(const v1::ExtendLeaseRequest&, v1::ExtendLeaseResponse*) override { return {}; }
  void OnStrayCall(const std::string&) override {}
};

// A connector run by weir's own port over loopback TCP, with a broker server
// that lives as long as this value: for timing starts, restarts and Open.
struct ConnectorOnTcp {
  explicit ConnectorOnTcp(const std::string& connector);
  std::unique_ptr<BrokerServer> server;
  std::unique_ptr<GrpcConnectorPort> port;  // declared after the server: destroyed first
};

// `processes` busy-looping children at normal priority for as long as this
// value lives (killed and reaped on destruction).
class BusyLoad {
 public:
  BusyLoad(const std::string& self, int processes);
  ~BusyLoad();
  BusyLoad(const BusyLoad&) = delete;
  BusyLoad& operator=(const BusyLoad&) = delete;
  int processes() const { return static_cast<int>(children_.size()); }

 private:
  std::vector<std::unique_ptr<ChildProcess>> children_;
};

}  // namespace weir::bench
