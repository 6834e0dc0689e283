// File: child_process.h
//
// A connector process launched from an argv (never through a shell), in its
// own process group, with its stdout and stderr captured into a bounded tail
// and an extra pipe for the start-up handshake. Kill() sends SIGKILL to the
// whole group (children that outlive the connector die too) and reaps it; the
// destructor kills as well, so no exit path leaves a process behind.
//
// Thread safety: one owner thread; the stderr reader thread is internal.
#pragma once

#include <sys/types.h>

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <map>
#include <mutex>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "absl/status/statusor.h"

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
  // CANCELLED when `stop` (if given) becomes true first.
  [[nodiscard]] absl::StatusOr<std::string> ReadReadyLine(std::chrono::milliseconds timeout,
                                                          const std::atomic<bool>* stop = nullptr);

  // If the process has ended, reaps it and returns how ("exit code 3",
  // "signal 9 (SIGKILL)"); waits at most `wait` for it to end.
  std::optional<std::string> TryReap(std::chrono::milliseconds wait);

  // SIGKILL to the process group, then reaps. Idempotent.
  void Kill();

  // The last bytes the process wrote to stdout/stderr. Once the process has
  // been reaped, first waits (at most `eof_wait` of wall time, 2 s by
  // default so that load does not change it) until the reader has seen the
  // end of the pipe, so text written just before exiting is not missed: the
  // tail goes into the trace.
  std::string OutputTail(std::chrono::milliseconds eof_wait = std::chrono::milliseconds(2000));

 private:
  ChildProcess() = default;
  void ReadOutput();

  pid_t pid_ = -1;
  bool reaped_ = false;
  std::string exit_description_;
  int ready_fd_ = -1;
  std::string ready_buffer_;
  int output_fd_ = -1;
  std::thread reader_;
  std::atomic<bool> stop_reader_{false};
  std::mutex tail_mu_;
  std::condition_variable output_ended_;
  bool output_eof_ = false;  // guarded by tail_mu_; reader finished
  std::string tail_;
  std::size_t tail_bytes_ = 8192;
  int echo_fd_ = -1;
};

// "exit code 3" / "signal 11 (SIGSEGV)" for a waitpid status.
std::string DescribeWaitStatus(int status);

}  // namespace weir
