// File: grpc_run.h
//
// One run of a real connector process over gRPC: a BrokerServer on loopback
// TCP or a Unix socket in a private directory, a GrpcConnectorPort that
// starts the connector as a child process, and RunWithPort (harness/run/run.h)
// for everything else.
#pragma once

#include "absl/status/statusor.h"
#include "harness/run/run.h"

namespace weir {

// Errors are harness faults (cannot listen, cannot write the trace…), never
// connector misbehaviour: that is in the verdict.
[[nodiscard]] absl::StatusOr<RunOutput> RunOverGrpc(const RunSpec& spec);

}  // namespace weir
