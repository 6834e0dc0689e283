#include "bench/echo_baseline.h"

#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <cstring>

#include <grpcpp/grpcpp.h>

#include "echo.grpc.pb.h"  // generated from bench/echo.proto
#include "harness/edge/command_line.h"

namespace weir::bench {
namespace {

using Clock = std::chrono::steady_clock;

double Seconds(Clock::duration d) { return std::chrono::duration<double>(d).count(); }

class EchoService final : public Echo::Service {
  grpc::Status Echo(grpc::ServerContext*, const EchoMessage* request, EchoMessage* response) override {
    if (request->answer_bytes() == 0) {
      response->set_payload(request->payload());
    } else {
      response->set_payload(std::string(request->answer_bytes(), 'y'));
    }
    return grpc::Status::OK;
  }
};

// The child: a sync echo server, started with weir's handshake (address on fd 3).
int ServeEcho() {
  const char* listen = std::getenv("WEIR_LISTEN_ADDRESS");
  if (listen == nullptr) return 2;
  EchoService service;
  grpc::ServerBuilder builder;
  builder.AddChannelArgument(GRPC_ARG_ALLOW_REUSEPORT, 0);
  int port = 0;
  builder.AddListeningPort(listen, grpc::InsecureServerCredentials(), &port);
  builder.RegisterService(&service);
  auto server = builder.BuildAndStart();
  if (server == nullptr) return 2;
  std::string address = listen;
  if (address.rfind("unix:", 0) != 0) {
    address = address.substr(0, address.rfind(':')) + ":" + std::to_string(port);
  }
  address += "\n";
  if (::write(3, address.data(), address.size()) != static_cast<ssize_t>(address.size())) return 2;
  ::close(3);
  server->Wait();
  return 0;
}

// The background load: spin until killed.
[[noreturn]] void Spin() {
  volatile std::uint64_t x = 0;
  for (;;) x = x + 1;
}

// An echo server child, its address, and a stub connected to it.
struct EchoChild {
  std::unique_ptr<ChildProcess> process;
  std::unique_ptr<Echo::Stub> stub;
};

EchoChild StartEcho(const std::string& self, const ListenAddress& listen) {
  ChildProcess::Options spawn;
  spawn.argv = {self, "--echo-server"};
  // Another echo server with the same handshake (e.g. one written in Go, to
  // measure a Go connector against its own language's round trip).
  if (const char* other = std::getenv("WEIR_BENCH_ECHO_SERVER"); other != nullptr && *other != '\0') {
    auto words = SplitCommandLine(other);
    if (!words.ok() || words->empty()) {
      Fail("WEIR_BENCH_ECHO_SERVER: " +
           (words.ok() ? std::string("no command") : std::string(words.status().message())));
    }
    spawn.argv = std::move(*words);
  }
  spawn.env["WEIR_LISTEN_ADDRESS"] = listen.address;
  auto child = ChildProcess::Spawn(spawn);
  if (!child.ok()) Fail(std::string(child.status().message()));
  auto line = (*child)->ReadReadyLine(std::chrono::milliseconds(30000));
  if (!line.ok()) Fail("echo server: " + std::string(line.status().message()));
  grpc::ChannelArguments args;
  args.SetInt(GRPC_ARG_ENABLE_RETRIES, 0);
  auto channel = grpc::CreateCustomChannel(*line, grpc::InsecureChannelCredentials(), args);
  if (!channel->WaitForConnected(std::chrono::system_clock::now() + std::chrono::seconds(30))) {
    Fail("cannot connect to the echo server at " + *line);
  }
  return EchoChild{std::move(*child), Echo::NewStub(channel)};
}

void CallEcho(Echo::Stub& stub, const EchoMessage& request, std::size_t expect) {
  grpc::ClientContext context;
  context.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(30));
  EchoMessage response;
  const grpc::Status status = stub.Echo(&context, request, &response);
  if (!status.ok() || response.payload().size() != expect) Fail("echo call failed: " + status.error_message());
}

}  // namespace

void Fail(const std::string& what) {
  std::fprintf(stderr, "bench: %s\n", what.c_str());
  std::exit(1);
}

double Median(std::vector<double> v) {
  if (v.empty()) return 0;
  std::sort(v.begin(), v.end());
  return v[v.size() / 2];
}

double Percentile(std::vector<double> v, double p) {
  if (v.empty()) return 0;
  std::sort(v.begin(), v.end());
  return v[std::min(v.size() - 1, static_cast<std::size_t>(p * static_cast<double>(v.size())))];
}

std::string SelfPath() {
  char buf[4096];
  const ssize_t n = ::readlink("/proc/self/exe", buf, sizeof buf - 1);
  if (n <= 0) Fail("cannot read /proc/self/exe");
  return std::string(buf, static_cast<std::size_t>(n));
}

std::optional<int> ServeChildMode(int argc, char** argv) {
  if (argc == 2 && std::strcmp(argv[1], "--echo-server") == 0) return ServeEcho();
  if (argc == 2 && std::strcmp(argv[1], "--spin") == 0) Spin();
  return std::nullopt;
}

const char* TransportName(Transport t) { return t == Transport::kTcp ? "tcp" : "unix"; }

ListenAddress::ListenAddress(Transport transport, const char* name) {
  if (transport == Transport::kTcp) {
    address = "127.0.0.1:0";
    return;
  }
  auto made = PrivateDir::Create();
  if (!made.ok()) Fail(std::string(made.status().message()));
  dir = std::move(*made);
  address = "unix:" + dir->path() + "/" + name + ".sock";
}

double MeasureEcho(const std::string& self, Transport transport, int calls, std::size_t request_bytes,
                   std::size_t answer_bytes) {
  const ListenAddress listen(transport, "echo");
  EchoChild echo = StartEcho(self, listen);
  EchoMessage request;
  request.set_payload(std::string(request_bytes, 'x'));
  request.set_answer_bytes(static_cast<std::uint32_t>(answer_bytes));
  const std::size_t expect = answer_bytes == 0 ? request_bytes : answer_bytes;
  std::vector<double> us;
  us.reserve(static_cast<std::size_t>(calls));
  const int warm_up = std::max(1, calls / 20);
  Clock::time_point measured_from = Clock::now();
  for (int i = 0; i < warm_up + calls; ++i) {
    if (i == warm_up) measured_from = Clock::now();
    const auto t0 = Clock::now();
    CallEcho(*echo.stub, request, expect);
    if (i >= warm_up) us.push_back(Seconds(Clock::now() - t0) * 1e6);
  }
  const double wall = Seconds(Clock::now() - measured_from);
  const double mean = wall * 1e6 / calls;
  std::printf(
      "echo %-4s  %d calls, one outstanding, %zu B sent, %zu B answered: mean %.1f us, p50 %.1f us, "
      "p99 %.1f us = %.0f round trips/s\n",
      TransportName(transport), calls, request_bytes, expect, mean, Median(us), Percentile(us, 0.99), calls / wall);
  echo.process->Kill();
  return mean;
}

double MeasureBareRestart(const std::string& self, Transport transport, int restarts) {
  EchoMessage request;
  request.set_payload(std::string(100, 'x'));
  std::vector<double> ms;
  for (int i = 0; i < std::max(1, restarts); ++i) {
    const ListenAddress listen(transport, "restart");  // a fresh socket path each time
    const auto t0 = Clock::now();
    EchoChild echo = StartEcho(self, listen);
    CallEcho(*echo.stub, request, 100);
    echo.stub.reset();
    echo.process->Kill();
    ms.push_back(Seconds(Clock::now() - t0) * 1e3);
  }
  const double median = Median(ms);
  std::printf("bare restart %-4s median %.1f ms to start an echo server, connect, answer one call and kill it (%d)\n",
              TransportName(transport), median, static_cast<int>(ms.size()));
  return median;
}

ConnectorOnTcp::ConnectorOnTcp(const std::string& connector) {
  auto started = BrokerServer::Start("127.0.0.1:0");
  if (!started.ok()) Fail(std::string(started.status().message()));
  server = std::move(*started);
  GrpcConnectorPort::Options options;
  options.argv = {connector};
  options.broker_address = server->address();
  options.listen_address = "127.0.0.1:0";
  port = std::make_unique<GrpcConnectorPort>(options, *server);
}

BusyLoad::BusyLoad(const std::string& self, int processes) {
  for (int i = 0; i < processes; ++i) {
    ChildProcess::Options spawn;
    spawn.argv = {self, "--spin"};
    spawn.ready_pipe = false;
    auto child = ChildProcess::Spawn(spawn);
    if (!child.ok()) Fail(std::string(child.status().message()));
    children_.push_back(std::move(*child));
  }
}

BusyLoad::~BusyLoad() {
  for (auto& c : children_) c->Kill();
}

}  // namespace weir::bench
