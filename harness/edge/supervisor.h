// File: supervisor.h
//
// The one event loop that watches every connector process weir starts: a
// Boost.Asio io_context run by a single thread, however many processes are
// alive (certify's parallel runs, several readers in one run). On it run
//   - each process's output pipe and handshake pipe, read as stream
//     descriptors as the bytes come (ChildProcess keeps what it needs);
//   - each process's end (WatchExit): a pidfd read as a stream descriptor,
//     or SIGCHLD through a signal_set where the kernel has no pidfd;
//   - a steady timer for every wall-clock bound a caller waits on (Wait);
//   - weir's own SIGINT, SIGTERM and SIGHUP (OnStopSignals).
// Callers block in Wait() on one condition variable, which the loop notifies
// whenever state a waiter may care about changed; nothing sleeps or polls.
//
// Thread safety: every member may be called from any thread except the loop
// thread itself (Wait blocks on the loop's work). Asio objects are touched
// only on the loop thread (Post), or before any handler can see them.
#pragma once

#include <sys/types.h>

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <thread>
#include <vector>

#include <boost/asio/executor_work_guard.hpp>
#include <boost/asio/io_context.hpp>
#include <boost/asio/posix/stream_descriptor.hpp>
#include <boost/asio/signal_set.hpp>

namespace weir {

class Supervisor {
 public:
  // How the loop learns that a process ended.
  //
  // kPidfd (Linux 5.3+): pidfd_open() gives a descriptor that becomes
  // readable when that one process ends; the loop waits on it like on a pipe
  // and reaps that pid alone. Nothing process-wide changes.
  // kSigchld: a signal_set on SIGCHLD; each signal reaps, with WNOHANG, every
  // process being watched. It installs a process-wide SIGCHLD handler
  // without SA_RESTART, so a blocking call in any thread of weir (or of a
  // connector run in-process) may see EINTR when a child ends; it also needs
  // a scan of all watched pids per signal.
  // Both notice an end within tens of microseconds (bench/supervise_cost;
  // docs/performance.md), so the choice is about side effects: kPidfd is
  // used when the kernel offers it, kSigchld for a pid whose pidfd_open
  // fails (an older kernel, no descriptor left).
  enum class ExitWatch { kPidfd, kSigchld };

  // Starts the loop thread. `preferred` kSigchld forces the signal for every
  // process (tests and the benchmark exercise both).
  explicit Supervisor(ExitWatch preferred = ExitWatch::kPidfd);
  // Stops the loop and joins its thread. REQUIRES: nothing is being watched
  // (every ChildProcess using it is gone).
  ~Supervisor();
  Supervisor(const Supervisor&) = delete;
  Supervisor& operator=(const Supervisor&) = delete;

  // The process-wide supervisor every ChildProcess uses unless told
  // otherwise; started on first use, stopped at exit.
  static Supervisor& Shared();

  boost::asio::io_context& context() { return io_; }
  ExitWatch preferred() const { return preferred_; }
  // The loop thread's id (tests check that it is the only one).
  std::thread::id loop_thread_id() const { return loop_.get_id(); }

  // Runs `fn` on the loop thread, in order with every other Post.
  void Post(std::function<void()> fn);

  // The one lock that guards state shared between loop handlers and waiters
  // (ChildProcess's tail, handshake buffer, exit status).
  std::mutex& mu() { return mu_; }
  // Wakes every Wait. Call after changing state under mu(); also whoever
  // sets a stop flag other than through OnStopSignals must call it.
  void WakeAll();

  enum class WaitEnd { kDone, kBound, kStopped };
  // Blocks (holding `lock` on mu() except while asleep) until done() is true,
  // `bound` of wall time has passed (a steady timer on the loop), or *stop is
  // true (may be null), whichever is first; done() is checked first, then
  // stop. A bound <= 0 only checks. done() is called with mu() held.
  WaitEnd Wait(std::unique_lock<std::mutex>& lock, std::chrono::milliseconds bound, const std::atomic<bool>* stop,
               const std::function<bool()>& done);

  // Calls on_exit(wait status) on the loop thread once `pid` (a child of
  // this process that nobody else reaps) has ended, after reaping it.
  // Returns how it is watched.
  ExitWatch WatchExit(pid_t pid, std::function<void(int status)> on_exit);

  // Routes `signals` to the loop: each one calls on_signal(signal number) on
  // the loop thread, then WakeAll(). The handlers are installed before this
  // returns; repeated signals call on_signal again. Once per supervisor.
  void OnStopSignals(const std::vector<int>& signals, std::function<void(int)> on_signal);

 private:
  // Loop thread only.
  void AwaitPidfd(const std::shared_ptr<boost::asio::posix::stream_descriptor>& fd, pid_t pid,
                  std::function<void(int)> on_exit);
  void WatchBySigchld(pid_t pid, std::function<void(int)> on_exit);
  void AwaitSigchld();
  void ReapWatched();
  void AwaitStopSignal();

  const ExitWatch preferred_;
  boost::asio::io_context io_;
  boost::asio::executor_work_guard<boost::asio::io_context::executor_type> work_;
  std::mutex mu_;
  std::condition_variable cv_;
  // Loop thread only.
  std::unique_ptr<boost::asio::signal_set> sigchld_;
  std::map<pid_t, std::function<void(int)>> sigchld_watched_;
  std::unique_ptr<boost::asio::signal_set> stop_signals_;
  std::function<void(int)> on_stop_signal_;
  std::thread loop_;  // last: starts once everything above exists
};

}  // namespace weir
