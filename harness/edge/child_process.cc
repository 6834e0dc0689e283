#include "harness/edge/child_process.h"

#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#include <array>
#include <cerrno>

#include <boost/asio/buffer.hpp>
#include <boost/asio/posix/stream_descriptor.hpp>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"

extern char** environ;

namespace weir {

// What the loop knows about one process. The descriptors and buffers are the
// loop thread's alone; the rest is guarded by the supervisor's lock.
struct ChildProcess::State {
  explicit State(boost::asio::io_context& io) : output(io), ready(io) {}

  // Loop thread only.
  boost::asio::posix::stream_descriptor output;
  boost::asio::posix::stream_descriptor ready;
  std::array<char, 4096> output_chunk;
  std::array<char, 512> ready_chunk;
  bool ready_reading = false;
  int echo_fd = -1;
  std::size_t tail_bytes = 8192;

  // Guarded by Supervisor::mu().
  std::string tail;
  bool output_eof = false;  // the output pipe ended (or failed)
  std::string ready_buffer;
  bool ready_closed = false;  // the handshake pipe ended before a newline
  std::string ready_error;
  bool reaped = false;
  std::string exit_description;
  bool closed = false;  // Kill() closed the pipes
};

namespace {

// The handshake reader stops once the line is there (or too long); a
// consumed line lets it go on.
bool ReadyLineComplete(const std::string& buffer) {
  return buffer.find('\n') != std::string::npos || buffer.size() > 4096;
}

void AppendTail(ChildProcess::State& st, const char* data, std::size_t n) {
  st.tail.append(data, n);
  if (st.tail.size() > 2 * st.tail_bytes) st.tail.erase(0, st.tail.size() - st.tail_bytes);
}

void Echo(int fd, const char* data, std::size_t n) {
  // Best effort: a closed or full echo never stops the reading.
  for (std::size_t done = 0; done < n;) {
    const ssize_t w = ::write(fd, data + done, n - done);
    if (w <= 0) break;
    done += static_cast<std::size_t>(w);
  }
}

void ReadOutput(Supervisor& sup, const std::shared_ptr<ChildProcess::State>& st) {
  st->output.async_read_some(boost::asio::buffer(st->output_chunk),
                             [&sup, st](const boost::system::error_code& ec, std::size_t n) {
                               if (ec == boost::asio::error::operation_aborted) return;  // Kill() closed it
                               if (n > 0 && st->echo_fd >= 0) Echo(st->echo_fd, st->output_chunk.data(), n);
                               {
                                 std::lock_guard<std::mutex> lock(sup.mu());
                                 if (n > 0) AppendTail(*st, st->output_chunk.data(), n);
                                 if (ec) st->output_eof = true;  // the end of the pipe, or an error that ends it
                               }
                               if (ec) {
                                 sup.WakeAll();
                                 return;
                               }
                               ReadOutput(sup, st);
                             });
}

void ReadReady(Supervisor& sup, const std::shared_ptr<ChildProcess::State>& st) {
  st->ready_reading = true;
  st->ready.async_read_some(boost::asio::buffer(st->ready_chunk),
                            [&sup, st](const boost::system::error_code& ec, std::size_t n) {
                              st->ready_reading = false;
                              if (ec == boost::asio::error::operation_aborted) return;
                              bool more = false;
                              {
                                std::lock_guard<std::mutex> lock(sup.mu());
                                if (n > 0) st->ready_buffer.append(st->ready_chunk.data(), n);
                                if (ec == boost::asio::error::eof) {
                                  st->ready_closed = true;
                                } else if (ec) {
                                  st->ready_error = ec.message();
                                } else {
                                  more = !ReadyLineComplete(st->ready_buffer);
                                }
                              }
                              if (more) {
                                ReadReady(sup, st);
                              } else {
                                sup.WakeAll();
                              }
                            });
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
  Supervisor& sup = options.supervisor != nullptr ? *options.supervisor : Supervisor::Shared();
  child->supervisor_ = &sup;
  child->pid_ = pid;
  child->has_ready_pipe_ = options.ready_pipe;
  auto st = std::make_shared<State>(sup.context());
  st->echo_fd = options.echo_fd;
  st->tail_bytes = options.tail_bytes;
  child->state_ = st;
  const int output_fd = out_pipe[0];
  const int ready_fd = options.ready_pipe ? ready_pipe[0] : -1;
  // The descriptors go to the loop before the exit watch: a Kill() right
  // after Spawn finds them in place (Post keeps the order).
  sup.Post([&sup, st, output_fd, ready_fd] {
    st->output.assign(output_fd);
    ReadOutput(sup, st);
    if (ready_fd >= 0) {
      st->ready.assign(ready_fd);
      ReadReady(sup, st);
    }
  });
  sup.WatchExit(pid, [&sup, st](int status) {
    {
      std::lock_guard<std::mutex> lock(sup.mu());
      st->reaped = true;
      st->exit_description = DescribeWaitStatus(status);
    }
    sup.WakeAll();
  });
  return child;
}

ChildProcess::~ChildProcess() { Kill(); }

std::string ChildProcess::OutputTail(std::chrono::milliseconds eof_wait) {
  if (state_ == nullptr) return "";
  State& st = *state_;
  std::unique_lock<std::mutex> lock(supervisor_->mu());
  // A reaped process's group was killed, so the pipe reaches its end
  // promptly unless a descendant escaped the group; the wait is bounded
  // either way.
  if (st.reaped) supervisor_->Wait(lock, eof_wait, nullptr, [&st] { return st.output_eof || st.closed; });
  if (st.tail.size() <= st.tail_bytes) return st.tail;
  return st.tail.substr(st.tail.size() - st.tail_bytes);
}

absl::StatusOr<std::string> ChildProcess::ReadReadyLine(std::chrono::milliseconds timeout,
                                                        const std::atomic<bool>* stop) {
  if (!has_ready_pipe_ || closed_) return absl::FailedPreconditionError("no ready pipe");
  State& st = *state_;
  std::unique_lock<std::mutex> lock(supervisor_->mu());
  const Supervisor::WaitEnd end = supervisor_->Wait(lock, timeout, stop, [&st] {
    return ReadyLineComplete(st.ready_buffer) || st.ready_closed || !st.ready_error.empty();
  });
  const auto nl = st.ready_buffer.find('\n');
  if (nl != std::string::npos) {
    std::string line = st.ready_buffer.substr(0, nl);
    st.ready_buffer.erase(0, nl + 1);
    lock.unlock();
    std::shared_ptr<State> shared = state_;
    Supervisor& sup = *supervisor_;
    sup.Post([&sup, shared] {  // read on for a next line, if anyone asks
      if (!shared->ready_reading && shared->ready.is_open()) ReadReady(sup, shared);
    });
    return line;
  }
  if (st.ready_buffer.size() > 4096) {
    return absl::InvalidArgumentError("handshake line longer than 4096 bytes");
  }
  if (end == Supervisor::WaitEnd::kStopped) return absl::CancelledError("interrupted");
  if (st.ready_closed) return absl::UnavailableError("closed WEIR_READY_FD without writing its address");
  if (!st.ready_error.empty()) return absl::InternalError(absl::StrCat("read failed: ", st.ready_error));
  return absl::DeadlineExceededError(absl::StrCat("no address on WEIR_READY_FD within ", timeout.count(), " ms"));
}

std::optional<std::string> ChildProcess::TryReap(std::chrono::milliseconds wait) {
  if (state_ == nullptr || pid_ <= 0) return std::nullopt;
  State& st = *state_;
  std::unique_lock<std::mutex> lock(supervisor_->mu());
  supervisor_->Wait(lock, wait, nullptr, [&st] { return st.reaped; });
  if (!st.reaped) return std::nullopt;
  if (!group_killed_) {
    // Whatever it left behind in its group goes too.
    group_killed_ = true;
    ::kill(-pid_, SIGKILL);
  }
  return st.exit_description;
}

void ChildProcess::Kill() {
  if (state_ == nullptr || closed_) return;
  closed_ = true;
  State& st = *state_;
  Supervisor& sup = *supervisor_;
  if (pid_ > 0) ::kill(-pid_, SIGKILL);
  std::shared_ptr<State> shared = state_;
  sup.Post([&sup, shared] {
    // Keep what is already in the pipe (bounded, in case an escaped
    // grandchild keeps writing), then close both pipes.
    boost::system::error_code ec;
    std::size_t after_stop = 0;
    if (shared->output.is_open()) shared->output.non_blocking(true, ec);
    while (!ec && shared->output.is_open() && after_stop <= (1u << 20)) {
      const std::size_t n = shared->output.read_some(boost::asio::buffer(shared->output_chunk), ec);
      if (n == 0) break;
      if (shared->echo_fd >= 0) Echo(shared->echo_fd, shared->output_chunk.data(), n);
      std::lock_guard<std::mutex> lock(sup.mu());
      AppendTail(*shared, shared->output_chunk.data(), n);
      after_stop += n;
    }
    boost::system::error_code ignored;
    shared->output.close(ignored);
    shared->ready.close(ignored);
    {
      std::lock_guard<std::mutex> lock(sup.mu());
      shared->closed = true;
    }
    sup.WakeAll();
  });
  // SIGKILL cannot be caught or ignored: the process ends and the loop reaps
  // it; no bound is needed for either, and none may cut it short (a process
  // left unreaped is the one thing this must not do).
  std::unique_lock<std::mutex> lock(sup.mu());
  sup.Wait(lock, std::chrono::hours(24 * 365), nullptr, [&st] { return st.reaped && st.closed; });
}

}  // namespace weir
