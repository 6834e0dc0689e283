// File: run.h
//
// One run, whatever the transport: wires the scenario's broker model (queue or
// log), the broker session, the runtime model, the oracle and the trace to a
// ConnectorPort, runs to the end, and returns the verdict. The gRPC edge
// (harness/edge/grpc_run.h) and the in-process host (harness/inprocess) are
// two callers. The trace file, when asked for, is written to
// "<path>.partial" and renamed at the end, so no half-written trace is ever
// left under the requested name.
#pragma once

#include <atomic>
#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "harness/oracle/verdict.h"
#include "harness/runtime/connector_port.h"
#include "harness/runtime/runtime_model.h"
#include "harness/trace/trace_log.h"
#include "weir/v1/faults.pb.h"
#include "weir/v1/scenario.pb.h"
#include "weir/v1/trace.pb.h"

namespace weir {

enum class Transport { kTcp, kUnix };

// A connector process as the edge sees it at a hold (RunSpec::on_hold).
struct HeldProcess {
  std::uint32_t reader = 0;
  std::int64_t pid = 0;           // the process started (the wrapper's, when wrapped)
  std::string connector_address;  // where it listens (its handshake line)
  std::string broker_address;     // where its broker calls go
};

// Where a run holds: after event #(next_seq - 1) was recorded, before event
// #next_seq. `processes` lists the live connector processes (none between a
// crash and the next start).
struct HoldPoint {
  std::uint64_t next_seq = 0;
  std::vector<HeldProcess> processes;
};

struct RunSpec {
  v1::Scenario scenario;  // validated, defaults filled
  std::string scenario_path;
  std::uint64_t seed = 0;
  std::vector<std::string> connector_argv;
  // What connector_argv meant where it was given (connector_identity.h);
  // written into the trace header when set.
  std::optional<v1::ConnectorIdentity> connector_identity;
  Transport transport = Transport::kTcp;
  std::string trace_path;  // empty: no trace file
  // Given: apply exactly this plan instead of drawing from the scenario's rates.
  std::optional<v1::FaultPlan> plan;
  // Also shown every event, after the trace file and the oracle (benchmarks,
  // live comparisons). Not owned; REQUIRES: they outlive the run.
  std::vector<TraceObserver*> observers;
  // When it becomes true (a signal), the run is abandoned within ~100 ms: its
  // connector is killed and reaped, no trace file is left, and the run
  // returns CANCELLED.
  const std::atomic<bool>* stop = nullptr;

  // Debugging a connector (weir replay --no-wall-bounds, --wrap, --stop-before).
  // None of these changes virtual time or the trace.
  //
  // false: no wall-clock bound on the connector (start-up, per-call deadline,
  // the same-time livelock bound in wall time), so a debugger may hold it at a
  // breakpoint. Only `stop` then ends a wait on a connector that never answers.
  bool wall_bounds = true;
  // Started in front of connector_argv (a debugger or checker: `gdb -batch
  // -ex run --args`, `valgrind`); the trace header still names the connector.
  std::vector<std::string> wrapper_argv;
  // Copy everything the connector (and its wrapper) writes to weir's stderr
  // as it comes, besides keeping its tail.
  bool echo_output = false;
  // When hold_before > 0 and on_hold is set: called once, on the simulation
  // thread, right after event #(hold_before - 1) was recorded (the edge fills
  // in its processes). The run waits while it runs; it may do I/O (the core
  // does none). REQUIRES: outlives the run.
  std::uint64_t hold_before = 0;
  std::function<void(const HoldPoint&)> on_hold;
};

struct RunOutput {
  Verdict verdict;
  RunSummary summary;
  std::string digest;  // "sha256:…" over the event lines
  std::uint64_t events = 0;
  // The faults the run applied: drawn from the scenario's rates, or the given plan.
  v1::FaultPlan plan;
};

// One run against any ConnectorPort (the gRPC edge, or an in-process host):
// the same broker, runtime, oracle and trace. Kills the port's incarnation at
// the end. Errors are harness faults (cannot write the trace…), or CANCELLED
// when spec.stop became true.
[[nodiscard]] absl::StatusOr<RunOutput> RunWithPort(const RunSpec& spec, ConnectorPort& port);
// Many readers: one port per reader slot (ReaderCount(spec.scenario) of them).
[[nodiscard]] absl::StatusOr<RunOutput> RunWithPorts(const RunSpec& spec, const std::vector<ConnectorPort*>& ports);
// The scenario's reader slots: readers.count, or 1.
std::uint32_t ReaderCount(const v1::Scenario& scenario);

// The version string written into traces and reports.
const char* WeirVersion();

}  // namespace weir
