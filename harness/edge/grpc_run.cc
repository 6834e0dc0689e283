#include "harness/edge/grpc_run.h"

#include <memory>

#include "harness/edge/broker_server.h"
#include "harness/edge/grpc_connector_port.h"
#include "harness/edge/private_dir.h"

namespace weir {
namespace {

// Calls spec.on_hold once, right after event #(hold_before - 1), with the
// ports' live processes.
class HoldWatch : public TraceObserver {
 public:
  HoldWatch(const RunSpec& spec, const std::vector<std::unique_ptr<GrpcConnectorPort>>& ports)
      : spec_(spec), ports_(ports) {}
  void OnEvent(const v1::TraceEvent& event) override {
    if (done_ || event.seq() + 1 != spec_.hold_before) return;
    done_ = true;
    HoldPoint at;
    at.next_seq = spec_.hold_before;
    for (std::size_t r = 0; r < ports_.size(); ++r) {
      const GrpcConnectorPort& port = *ports_[r];
      if (port.pid() <= 0) continue;
      at.processes.push_back(
          HeldProcess{static_cast<std::uint32_t>(r), port.pid(), port.connector_address(), port.broker_address()});
    }
    spec_.on_hold(at);
  }

 private:
  const RunSpec& spec_;
  const std::vector<std::unique_ptr<GrpcConnectorPort>>& ports_;
  bool done_ = false;
};

}  // namespace

absl::StatusOr<RunOutput> RunOverGrpc(const RunSpec& spec) {
  // One broker server (its own socket and completion queue) and one port per
  // reader: a reader's broker calls can only ever reach its own window.
  const std::uint32_t readers = ReaderCount(spec.scenario);
  std::unique_ptr<PrivateDir> dir;
  if (spec.transport == Transport::kUnix) {
    auto d = PrivateDir::Create();
    if (!d.ok()) return d.status();
    dir = std::move(*d);
  }
  std::vector<std::unique_ptr<BrokerServer>> servers;
  std::vector<std::unique_ptr<GrpcConnectorPort>> ports;
  std::vector<ConnectorPort*> port_list;
  for (std::uint32_t r = 0; r < readers; ++r) {
    // Reader 0 keeps the names a single reader always had.
    const std::string suffix = r == 0 ? "" : "-" + std::to_string(r);
    std::string broker_listen = "127.0.0.1:0";
    std::string connector_listen = "127.0.0.1:0";
    if (dir != nullptr) {
      broker_listen = "unix:" + dir->path() + "/broker" + suffix + ".sock";
      connector_listen = "unix:" + dir->path() + "/connector" + suffix + ".sock";
    }
    auto server = BrokerServer::Start(broker_listen);
    if (!server.ok()) return server.status();
    GrpcConnectorPort::Options port_options;
    port_options.argv = spec.connector_argv;
    port_options.broker_address = (*server)->address();
    port_options.listen_address = connector_listen;
    port_options.call_timeout = std::chrono::milliseconds(spec.scenario.runtime().call_timeout_wall_ms());
    port_options.stop = spec.stop;
    port_options.start_timeout = std::chrono::milliseconds(spec.scenario.runtime().start_timeout_wall_ms());
    port_options.wall_bounds = spec.wall_bounds;
    port_options.wrapper_argv = spec.wrapper_argv;
    port_options.echo_output = spec.echo_output;
    ports.push_back(std::make_unique<GrpcConnectorPort>(port_options, **server));
    servers.push_back(std::move(*server));
    port_list.push_back(ports.back().get());
  }
  HoldWatch hold(spec, ports);
  const RunSpec* run_spec = &spec;
  RunSpec with_hold;
  if (spec.hold_before > 0 && spec.on_hold) {
    with_hold = spec;
    with_hold.observers.push_back(&hold);
    run_spec = &with_hold;
  }
  absl::StatusOr<RunOutput> out = RunWithPorts(*run_spec, port_list);
  ports.clear();  // every reader killed and reaped before its server goes
  return out;
}

}  // namespace weir
