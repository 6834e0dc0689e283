// File: child_process.h
//
// A connector process launched from an argv (never through a shell), in its
// own process group, with its stdout and stderr captured into a bounded tail
// and an extra pipe for the start-up handshake. Kill() sends SIGKILL to the
// whole group (children that outlive the connector die too) and reaps it; the
// destructor kills as well, so no exit path leaves a process behind.
//
// The pipes and the process's end are watched by a Supervisor's event loop
// (supervisor.h), shared by every process weir starts: no thread per
// process, no polling; each wait here is a bounded wait on that loop.
//
// Thread safety: one owner thread; the loop's handlers share the state
// under the supervisor's lock.
#pragma once

#include <sys/types.h>

#include <atomic>
#include <chrono>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "harness/edge/supervisor.h"

namespace weir {

class ChildProcess {
 public:
  struct Options {
    std::vector<std::string> argv;
    // Added to (or replacing in) the parent's environment.
    std::map<std::string, std::string> env;
    // When true, a pipe is created and its write end passed as fd 3.
    bool ready_pipe = true;
    // How many bytes of the end of the output to keep.
    std::size_t tail_bytes = 8192;
    // When >= 0, everything the process writes is also copied to this file
    // descriptor as it comes (weir's stderr, for a connector under a
    // debugger). Not owned; it must stay open while the process runs.
    int echo_fd = -1;
    // Whose loop watches the process; null: Supervisor::Shared(). Must
    // outlive the ChildProcess.
    Supervisor* supervisor = nullptr;
  };

  // Starts the process. Error: exec or pipe setup failed (argv[0] not found…).
  [[nodiscard]] static absl::StatusOr<std::unique_ptr<ChildProcess>> Spawn(const Options& options);

  ~ChildProcess();
  ChildProcess(const ChildProcess&) = delete;
  ChildProcess& operator=(const ChildProcess&) = delete;

  pid_t pid() const { return pid_; }

  // Reads one line from the ready pipe, waiting at most `timeout` (wall).
  // Errors: DEADLINE_EXCEEDED on timeout, UNAVAILABLE when the pipe closed
  // (the child exited or closed it) before a newline.
  // CANCELLED when `stop` (if given) becomes true first (a stop signal wakes
  // the wait at once: Supervisor::OnStopSignals).
  [[nodiscard]] absl::StatusOr<std::string> ReadReadyLine(std::chrono::milliseconds timeout,
                                                          const std::atomic<bool>* stop = nullptr);

  // If the process has ended, reaps it and returns how ("exit code 3",
  // "signal 9 (SIGKILL)"); waits at most `wait` for it to end. The first
  // time it reports the end it kills what is left of the process group.
  std::optional<std::string> TryReap(std::chrono::milliseconds wait);

  // SIGKILL to the process group, waits until it is reaped, reads what is
  // already in the output pipe and closes the pipes. Idempotent.
  void Kill();

  // The last bytes the process wrote to stdout/stderr. Once the process has
  // been reaped, first waits (at most `eof_wait` of wall time, 2 s by
  // default so that load does not change it) until the loop has seen the
  // end of the pipe, so text written just before exiting is not missed: the
  // tail goes into the trace.
  std::string OutputTail(std::chrono::milliseconds eof_wait = std::chrono::milliseconds(2000));

  // What the supervisor's loop knows of the process (child_process.cc).
  struct State;

 private:
  ChildProcess() = default;

  Supervisor* supervisor_ = nullptr;
  std::shared_ptr<State> state_;
  pid_t pid_ = -1;
  bool group_killed_ = false;  // TryReap killed what was left of the group
  bool has_ready_pipe_ = false;
  bool closed_ = false;  // Kill() ran
};

// "exit code 3" / "signal 11 (SIGSEGV)" for a waitpid status.
std::string DescribeWaitStatus(int status);

}  // namespace weir
