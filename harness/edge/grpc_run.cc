#include "harness/edge/grpc_run.h"

#include <memory>

#include "harness/edge/broker_server.h"
#include "harness/edge/grpc_connector_port.h"
#include "harness/edge/private_dir.h"

namespace weir {

absl::StatusOr<RunOutput> RunOverGrpc(const RunSpec& spec) {
  std::unique_ptr<PrivateDir> dir;
  std::string broker_listen = "127.0.0.1:0";
  std::string connector_listen = "127.0.0.1:0";
  if (spec.transport == Transport::kUnix) {
    auto d = PrivateDir::Create();
    if (!d.ok()) return d.status();
    dir = std::move(*d);
    broker_listen = "unix:" + dir->path() + "/broker.sock";
    connector_listen = "unix:" + dir->path() + "/connector.sock";
  }
  const auto call_timeout = std::chrono::milliseconds(spec.scenario.runtime().call_timeout_wall_ms());
  auto server = BrokerServer::Start(broker_listen);
  if (!server.ok()) return server.status();
  GrpcConnectorPort::Options port_options;
  port_options.argv = spec.connector_argv;
  port_options.broker_address = (*server)->address();
  port_options.listen_address = connector_listen;
  port_options.call_timeout = call_timeout;
  port_options.stop = spec.stop;
  port_options.start_timeout =
      std::chrono::milliseconds(spec.scenario.runtime().start_timeout_wall_ms());
  GrpcConnectorPort port(port_options, **server);
  return RunWithPort(spec, port);
}

}  // namespace weir
