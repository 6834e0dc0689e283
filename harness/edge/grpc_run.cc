#include "harness/edge/grpc_run.h"

#include <memory>

#include "harness/edge/broker_server.h"
#include "harness/edge/grpc_connector_port.h"
#include "harness/edge/private_dir.h"

namespace weir {

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
    port_options.start_timeout =
        std::chrono::milliseconds(spec.scenario.runtime().start_timeout_wall_ms());
    ports.push_back(std::make_unique<GrpcConnectorPort>(port_options, **server));
    servers.push_back(std::move(*server));
    port_list.push_back(ports.back().get());
  }
  absl::StatusOr<RunOutput> out = RunWithPorts(spec, port_list);
  ports.clear();  // every reader killed and reaped before its server goes
  return out;
}

}  // namespace weir
