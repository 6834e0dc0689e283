// File: stop_signal.h
//
// SIGINT, SIGTERM and SIGHUP ask weir to stop rather than kill it outright:
// the handler only sets a flag. Everything that runs a connector watches the
// flag (RunSpec::stop, CertifyOptions::stop), kills and reaps the connector,
// removes its temporary files and sockets, and the command exits with
// kExitInterrupted (command_flags.h). Repeated signals change nothing; every wait is bounded.
//
// Thread safety: the flag is an atomic; install once, from main.
#pragma once

#include <atomic>

namespace weir {

// Installs the handlers (idempotent) and returns the flag they set.
const std::atomic<bool>* InstallStopSignals();

// The signal that set the flag, or 0.
int StopSignal();

}  // namespace weir
