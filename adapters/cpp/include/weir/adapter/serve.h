// File: serve.h
//
// Runs a Source as a connector process: serves weir's Connector gRPC service for
// it and gives it a broker client for weir's Broker service, following the
// start-up handshake in proto/weir/v1/connector.proto.
//
// Example:
//   int main() {
//     ScanSource source;
//     return weir::adapter::Serve(source);
//   }
#pragma once

#include "weir/adapter/source.h"

namespace weir::adapter {

// Serves `source` until the process is killed. Reads the environment:
//   WEIR_BROKER_ADDRESS  gRPC target of the Broker service;
//   WEIR_LISTEN_ADDRESS  where to listen: "host:port" (port 0: the OS picks) or
//                        "unix:/path";
//   WEIR_READY_FD        descriptor on which the address actually listened on
//                        ("127.0.0.1:41235", or the unix address as given) is
//                        written with a trailing newline, then closed.
// Connector calls reach the source strictly one at a time.
// Every broker call is bounded by kBrokerCallWallTimeoutSeconds of wall time (the only
// use of the wall clock: gRPC deadlines, never virtual time).
// Returns a process exit code: 2 (after a one-line message on stderr) when the
// environment is missing or bad, or the address cannot be listened on.
// REQUIRES: source outlives the call.
[[nodiscard]] int Serve(Source& source);

inline constexpr int kBrokerCallWallTimeoutSeconds = 30;

}  // namespace weir::adapter
