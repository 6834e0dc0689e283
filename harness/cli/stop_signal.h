// File: stop_signal.h
//
// SIGINT, SIGTERM and SIGHUP ask weir to stop rather than kill it outright:
// they are caught by the supervisor's event loop (harness/edge/supervisor.h),
// which only sets a flag and wakes every wait on a connector process.
// Everything that runs a connector watches the flag (RunSpec::stop,
// CertifyOptions::stop), kills and reaps the connector,
// removes its temporary files and sockets, and the command exits with
// kExitInterrupted (command_flags.h). Repeated signals change nothing; every wait is bounded.
//
// Thread safety: the flag is an atomic; install from any thread (once).
#pragma once

#include <atomic>

namespace weir {

// Installs the handlers (idempotent) and returns the flag they set.
const std::atomic<bool>* InstallStopSignals();

// The signal that set the flag, or 0.
int StopSignal();

}  // namespace weir
