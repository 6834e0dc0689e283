#include "harness/edge/supervisor.h"

#include <pthread.h>
#include <signal.h>
#include <sys/syscall.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>

#include <boost/asio/post.hpp>
#include <boost/asio/posix/stream_descriptor.hpp>
#include <boost/asio/steady_timer.hpp>

namespace weir {
namespace {

// waitpid(pid, WNOHANG) past EINTR: pid when it was reaped (status set), 0
// while it runs, -1 when it is not (or no longer) ours to reap.
pid_t ReapNow(pid_t pid, int* status) {
  for (;;) {
    const pid_t r = ::waitpid(pid, status, WNOHANG);
    if (r >= 0 || errno != EINTR) return r;
  }
}

}  // namespace

Supervisor::Supervisor(ExitWatch preferred)
    : preferred_(preferred), work_(boost::asio::make_work_guard(io_)), loop_([this] {
        ::pthread_setname_np(::pthread_self(), "weir-supervise");
        io_.run();
      }) {}

Supervisor::~Supervisor() {
  Post([this] {
    boost::system::error_code ignored;
    if (sigchld_ != nullptr) sigchld_->cancel(ignored);
    if (stop_signals_ != nullptr) stop_signals_->cancel(ignored);
    work_.reset();
    io_.stop();  // handlers still pending are dropped with the context
  });
  loop_.join();
}

Supervisor& Supervisor::Shared() {
  // Never destroyed: a connector killed from a static destructor elsewhere
  // still finds its loop running. The thread ends with the process.
  static Supervisor* const shared = new Supervisor();
  return *shared;
}

void Supervisor::Post(std::function<void()> fn) { boost::asio::post(io_, std::move(fn)); }

void Supervisor::WakeAll() {
  // Taking the lock orders this wake after any waiter's check of its
  // condition, so a stop flag set just before cannot be missed.
  { std::lock_guard<std::mutex> lock(mu_); }
  cv_.notify_all();
}

Supervisor::WaitEnd Supervisor::Wait(std::unique_lock<std::mutex>& lock, std::chrono::milliseconds bound,
                                     const std::atomic<bool>* stop, const std::function<bool()>& done) {
  const auto stopped = [stop] { return stop != nullptr && stop->load(); };
  if (done()) return WaitEnd::kDone;
  if (stopped()) return WaitEnd::kStopped;
  if (bound.count() <= 0) return WaitEnd::kBound;
  auto expired = std::make_shared<bool>(false);  // guarded by mu_
  auto timer = std::make_shared<boost::asio::steady_timer>(io_);
  const auto at = std::chrono::steady_clock::now() + bound;
  Post([this, timer, at, expired] {
    timer->expires_at(at);
    timer->async_wait([this, timer, expired](const boost::system::error_code& ec) {
      if (ec) return;  // cancelled: the wait ended first
      {
        std::lock_guard<std::mutex> guard(mu_);
        *expired = true;
      }
      cv_.notify_all();
    });
  });
  cv_.wait(lock, [&] { return done() || stopped() || *expired; });
  Post([timer] { timer->cancel(); });
  if (done()) return WaitEnd::kDone;
  if (stopped()) return WaitEnd::kStopped;
  return WaitEnd::kBound;
}

Supervisor::ExitWatch Supervisor::WatchExit(pid_t pid, std::function<void(int)> on_exit) {
  // Opened here, before this returns: the pid cannot be reused until it is
  // reaped, and only the loop reaps it.
  // The system call itself: glibc's wrapper (2.36) is declared without C
  // linkage, and a kernel without it answers ENOSYS, which falls back.
  const int pidfd = preferred_ == ExitWatch::kPidfd ? static_cast<int>(::syscall(SYS_pidfd_open, pid, 0)) : -1;
  Post([this, pid, pidfd, on_exit = std::move(on_exit)]() mutable {
    if (pidfd >= 0) {
      AwaitPidfd(std::make_shared<boost::asio::posix::stream_descriptor>(io_, pidfd), pid, std::move(on_exit));
    } else {
      WatchBySigchld(pid, std::move(on_exit));
    }
  });
  return pidfd >= 0 ? ExitWatch::kPidfd : ExitWatch::kSigchld;
}

void Supervisor::AwaitPidfd(const std::shared_ptr<boost::asio::posix::stream_descriptor>& fd, pid_t pid,
                            std::function<void(int)> on_exit) {
  fd->async_wait(boost::asio::posix::stream_descriptor::wait_read,
                 [this, fd, pid, on_exit = std::move(on_exit)](const boost::system::error_code& ec) mutable {
                   if (ec == boost::asio::error::operation_aborted) return;  // the loop is shutting down
                   int status = 0;
                   const pid_t r = ReapNow(pid, &status);
                   if (r == 0 && !ec) {
                     AwaitPidfd(fd, pid, std::move(on_exit));  // readable but not ended: wait on
                     return;
                   }
                   boost::system::error_code ignored;
                   fd->close(ignored);
                   if (r == 0) {
                     WatchBySigchld(pid, std::move(on_exit));  // the descriptor failed: the signal takes over
                     return;
                   }
                   // r < 0: someone else reaped it; it has ended all the same.
                   on_exit(r == pid ? status : -1);
                 });
}

void Supervisor::WatchBySigchld(pid_t pid, std::function<void(int)> on_exit) {
  if (sigchld_ == nullptr) {
    sigchld_ = std::make_unique<boost::asio::signal_set>(io_, SIGCHLD);
    AwaitSigchld();
  }
  sigchld_watched_[pid] = std::move(on_exit);
  ReapWatched();  // it may have ended before its signal could be caught
}

void Supervisor::AwaitSigchld() {
  sigchld_->async_wait([this](const boost::system::error_code& ec, int) {
    if (ec) return;
    ReapWatched();
    AwaitSigchld();
  });
}

void Supervisor::ReapWatched() {
  for (auto it = sigchld_watched_.begin(); it != sigchld_watched_.end();) {
    int status = 0;
    const pid_t r = ReapNow(it->first, &status);
    if (r == 0) {
      ++it;
      continue;
    }
    auto on_exit = std::move(it->second);
    const pid_t pid = it->first;
    it = sigchld_watched_.erase(it);
    on_exit(r == pid ? status : -1);
  }
}

void Supervisor::OnStopSignals(const std::vector<int>& signals, std::function<void(int)> on_signal) {
  // add() installs the handlers now, on this thread, before any handler of
  // the loop can touch the set; a signal that comes before the first
  // async_wait is kept by Asio and delivered to it.
  auto set = std::make_unique<boost::asio::signal_set>(io_);
  for (int sig : signals) set->add(sig);
  on_stop_signal_ = std::move(on_signal);
  stop_signals_ = std::move(set);
  Post([this] { AwaitStopSignal(); });
}

void Supervisor::AwaitStopSignal() {
  stop_signals_->async_wait([this](const boost::system::error_code& ec, int sig) {
    if (ec) return;
    on_stop_signal_(sig);
    WakeAll();
    AwaitStopSignal();
  });
}

}  // namespace weir
