#include "harness/edge/child_process.h"

#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <spawn.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"

extern char** environ;

namespace weir {
namespace {

void CloseFd(int& fd) {
  if (fd >= 0) ::close(fd);
  fd = -1;
}

}  // namespace

std::string DescribeWaitStatus(int status) {
  if (WIFEXITED(status)) return absl::StrCat("exit code ", WEXITSTATUS(status));
  if (WIFSIGNALED(status)) {
    const int sig = WTERMSIG(status);
    const char* abbrev = sigabbrev_np(sig);
    return absl::StrCat("signal ", sig, abbrev != nullptr ? absl::StrCat(" (SIG", abbrev, ")") : "");
  }
  return absl::StrCat("wait status ", status);
}

absl::StatusOr<std::unique_ptr<ChildProcess>> ChildProcess::Spawn(const Options& options) {
  if (options.argv.empty() || options.argv[0].empty()) {
    return absl::InvalidArgumentError("empty connector command");
  }
  std::unique_ptr<ChildProcess> child(new ChildProcess());
  child->tail_bytes_ = options.tail_bytes;
  child->echo_fd_ = options.echo_fd;

  int out_pipe[2] = {-1, -1};
  int ready_pipe[2] = {-1, -1};
  if (::pipe2(out_pipe, O_CLOEXEC) != 0) return absl::InternalError("pipe failed");
  if (options.ready_pipe && ::pipe2(ready_pipe, O_CLOEXEC) != 0) {
    ::close(out_pipe[0]);
    ::close(out_pipe[1]);
    return absl::InternalError("pipe failed");
  }

  // Environment: parent's, with options.env replacing or adding.
  std::vector<std::string> env_strings;
  for (char** e = environ; *e != nullptr; ++e) {
    std::string entry(*e);
    const std::string key = entry.substr(0, entry.find('='));
    if (options.env.count(key) == 0) env_strings.push_back(std::move(entry));
  }
  for (const auto& [k, v] : options.env) env_strings.push_back(k + "=" + v);
  std::vector<char*> envp;
  for (auto& s : env_strings) envp.push_back(s.data());
  envp.push_back(nullptr);
  std::vector<std::string> argv_copy = options.argv;
  std::vector<char*> argv;
  for (auto& s : argv_copy) argv.push_back(s.data());
  argv.push_back(nullptr);

  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_addopen(&actions, 0, "/dev/null", O_RDONLY, 0);
  posix_spawn_file_actions_adddup2(&actions, out_pipe[1], 1);
  posix_spawn_file_actions_adddup2(&actions, out_pipe[1], 2);
  if (options.ready_pipe) posix_spawn_file_actions_adddup2(&actions, ready_pipe[1], 3);

  posix_spawnattr_t attr;
  posix_spawnattr_init(&attr);
  sigset_t empty, defaults;
  sigemptyset(&empty);
  sigemptyset(&defaults);
  sigaddset(&defaults, SIGPIPE);
  sigaddset(&defaults, SIGINT);
  sigaddset(&defaults, SIGTERM);
  posix_spawnattr_setsigmask(&attr, &empty);
  posix_spawnattr_setsigdefault(&attr, &defaults);
  posix_spawnattr_setpgroup(&attr, 0);
  posix_spawnattr_setflags(&attr, POSIX_SPAWN_SETPGROUP | POSIX_SPAWN_SETSIGMASK | POSIX_SPAWN_SETSIGDEF);

  pid_t pid = -1;
  const int rc = ::posix_spawnp(&pid, argv[0], &actions, &attr, argv.data(), envp.data());
  posix_spawn_file_actions_destroy(&actions);
  posix_spawnattr_destroy(&attr);
  ::close(out_pipe[1]);
  if (options.ready_pipe) ::close(ready_pipe[1]);
  if (rc != 0) {
    ::close(out_pipe[0]);
    if (options.ready_pipe) ::close(ready_pipe[0]);
    return absl::NotFoundError(absl::StrCat("cannot start '", options.argv[0], "': ", ::strerror(rc)));
  }
  child->pid_ = pid;
  child->output_fd_ = out_pipe[0];
  child->ready_fd_ = options.ready_pipe ? ready_pipe[0] : -1;
  ChildProcess* raw = child.get();
  child->reader_ = std::thread([raw] { raw->ReadOutput(); });
  return child;
}

ChildProcess::~ChildProcess() {
  Kill();
  CloseFd(ready_fd_);
}

void ChildProcess::ReadOutput() {
  char buf[4096];
  // After Kill() asks us to stop, read what is already buffered (bounded, in
  // case an escaped grandchild keeps writing) and leave.
  std::size_t after_stop = 0;
  for (;;) {
    const bool stopping = stop_reader_.load();
    pollfd p{output_fd_, POLLIN, 0};
    const int r = ::poll(&p, 1, stopping ? 0 : 50);
    if (r < 0 && errno != EINTR) break;
    if (r > 0) {
      const ssize_t n = ::read(output_fd_, buf, sizeof buf);
      if (n > 0) {
        if (echo_fd_ >= 0) {  // best effort: a closed or full echo never stops the reader
          for (ssize_t done = 0; done < n;) {
            const ssize_t w = ::write(echo_fd_, buf + done, static_cast<std::size_t>(n - done));
            if (w <= 0) break;
            done += w;
          }
        }
        std::lock_guard<std::mutex> lock(tail_mu_);
        tail_.append(buf, static_cast<std::size_t>(n));
        if (tail_.size() > 2 * tail_bytes_) tail_.erase(0, tail_.size() - tail_bytes_);
        if (stopping && (after_stop += static_cast<std::size_t>(n)) > (1u << 20)) break;
        continue;
      }
      if (n == 0 || (n < 0 && errno != EINTR && errno != EAGAIN)) break;  // EOF
    }
    if (stopping) break;
  }
  {
    std::lock_guard<std::mutex> lock(tail_mu_);
    output_eof_ = true;
  }
  output_ended_.notify_all();
}

std::string ChildProcess::OutputTail(std::chrono::milliseconds eof_wait) {
  std::unique_lock<std::mutex> lock(tail_mu_);
  // A reaped process's group was killed, so the pipe reaches EOF promptly
  // unless a descendant escaped the group; the wait is bounded either way.
  if (reaped_) {
    output_ended_.wait_for(lock, eof_wait, [this] { return output_eof_; });
  }
  if (tail_.size() <= tail_bytes_) return tail_;
  return tail_.substr(tail_.size() - tail_bytes_);
}

absl::StatusOr<std::string> ChildProcess::ReadReadyLine(std::chrono::milliseconds timeout,
                                                        const std::atomic<bool>* stop) {
  if (ready_fd_ < 0) return absl::FailedPreconditionError("no ready pipe");
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  for (;;) {
    const auto nl = ready_buffer_.find('\n');
    if (nl != std::string::npos) {
      std::string line = ready_buffer_.substr(0, nl);
      ready_buffer_.erase(0, nl + 1);
      return line;
    }
    if (ready_buffer_.size() > 4096) {
      return absl::InvalidArgumentError("handshake line longer than 4096 bytes");
    }
    if (stop != nullptr && stop->load()) return absl::CancelledError("interrupted");
    const auto left =
        std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now());
    if (left.count() <= 0) {
      return absl::DeadlineExceededError(absl::StrCat("no address on WEIR_READY_FD within ", timeout.count(), " ms"));
    }
    pollfd p{ready_fd_, POLLIN, 0};
    const int r = ::poll(&p, 1, static_cast<int>(std::min<long long>(left.count(), 100)));
    if (r < 0 && errno != EINTR) return absl::InternalError("poll failed");
    if (r <= 0) continue;
    char buf[512];
    const ssize_t n = ::read(ready_fd_, buf, sizeof buf);
    if (n > 0) {
      ready_buffer_.append(buf, static_cast<std::size_t>(n));
    } else if (n == 0) {
      return absl::UnavailableError("closed WEIR_READY_FD without writing its address");
    } else if (errno != EINTR && errno != EAGAIN) {
      return absl::InternalError("read failed");
    }
  }
}

std::optional<std::string> ChildProcess::TryReap(std::chrono::milliseconds wait) {
  if (reaped_) return exit_description_;
  if (pid_ <= 0) return std::nullopt;
  const auto deadline = std::chrono::steady_clock::now() + wait;
  for (;;) {
    int status = 0;
    const pid_t r = ::waitpid(pid_, &status, WNOHANG);
    if (r == pid_) {
      reaped_ = true;
      exit_description_ = DescribeWaitStatus(status);
      // Whatever it left behind in its group goes too.
      ::kill(-pid_, SIGKILL);
      return exit_description_;
    }
    if (std::chrono::steady_clock::now() >= deadline) return std::nullopt;
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
  }
}

void ChildProcess::Kill() {
  if (pid_ > 0) {
    ::kill(-pid_, SIGKILL);
    if (!reaped_) {
      int status = 0;
      while (::waitpid(pid_, &status, 0) < 0 && errno == EINTR) {
      }
      reaped_ = true;
      exit_description_ = DescribeWaitStatus(status);
    }
  }
  if (reader_.joinable()) {
    stop_reader_.store(true);
    reader_.join();
  }
  CloseFd(output_fd_);
  CloseFd(ready_fd_);
}

}  // namespace weir
