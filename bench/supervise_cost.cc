// What supervising connector processes costs, and where a restart's wall
// time goes:
//
//   1. exit notice: from SIGKILL to a sleeping child until the supervisor has
//      reaped it, learning of the end by pidfd, by SIGCHLD, and by the
//      waitpid(WNOHANG) poll with 2 ms sleeps that ChildProcess used before
//      the supervisor (reproduced here); interleaved, EXITS of each.
//   2. threads: how many threads N live processes add (each used to have
//      its own output reader thread).
//   3. exec and loading: the connector started without weir's environment
//      complains at its first check in main; from the spawn to the first byte
//      of that complaint (exec, loading, static initialisers).
//   4. restart: Kill + Start + Open of an incarnation of CONNECTOR over TCP,
//      RESTARTS times, split into the phases of GrpcConnectorPort::Start
//      (kill, spawn, handshake, connect) and the Open call. The handshake
//      minus (3) is about the connector's own server start. Then the first
//      Advance, whose Pull is the connector's first broker call.
//
// usage: supervise_cost CONNECTOR [RESTARTS [EXITS [CHILDREN]]]
//   defaults: 30 restarts, 200 exits per way, 32 children.
// Prints one human line per measurement, then `result NAME VALUE` lines.
#include <dirent.h>
#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "absl/synchronization/mutex.h"
#include "bench/echo_baseline.h"
#include "harness/edge/broker_server.h"
#include "harness/edge/child_process.h"
#include "harness/edge/grpc_connector_port.h"
#include "harness/edge/supervisor.h"

namespace weir {
namespace {

using Clock = std::chrono::steady_clock;

double Ms(Clock::duration d) { return std::chrono::duration<double, std::milli>(d).count(); }

using bench::Fail;
using bench::Median;
using bench::Percentile;

int ThreadCount() {
  int n = 0;
  DIR* dir = ::opendir("/proc/self/task");
  if (dir == nullptr) Fail("cannot read /proc/self/task");
  while (const dirent* e = ::readdir(dir)) {
    if (e->d_name[0] != '.') ++n;
  }
  ::closedir(dir);
  return n;
}

// A child that only waits to be killed (async-signal-safe after fork).
pid_t ForkSleeper() {
  const pid_t pid = ::fork();
  if (pid < 0) Fail("fork failed");
  if (pid == 0) {
    for (;;) ::pause();
  }
  return pid;
}

// --- 1. exit notice -----------------------------------------------------------

double NoticeBySupervisor(Supervisor& supervisor) {
  const pid_t pid = ForkSleeper();
  bool ended = false;  // guarded by supervisor.mu()
  Clock::time_point noticed;
  supervisor.WatchExit(pid, [&](int) {
    {
      std::lock_guard<std::mutex> lock(supervisor.mu());
      noticed = Clock::now();
      ended = true;
    }
    supervisor.WakeAll();
  });
  // Let the watch be set up on the loop before the kill.
  std::this_thread::sleep_for(std::chrono::milliseconds(1));  // bench-only: outside the measured span
  const auto t0 = Clock::now();
  ::kill(pid, SIGKILL);
  std::unique_lock<std::mutex> lock(supervisor.mu());
  if (supervisor.Wait(lock, std::chrono::seconds(30), nullptr, [&] { return ended; }) != Supervisor::WaitEnd::kDone) {
    Fail("an exit was not noticed within 30 s");
  }
  return Ms(noticed - t0);
}

double NoticeByPolling() {
  const pid_t pid = ForkSleeper();
  const auto t0 = Clock::now();
  ::kill(pid, SIGKILL);
  for (;;) {
    int status = 0;
    if (::waitpid(pid, &status, WNOHANG) == pid) return Ms(Clock::now() - t0);
    std::this_thread::sleep_for(std::chrono::milliseconds(2));  // the old ChildProcess::TryReap
  }
}

// --- 3. exec and loading ---------------------------------------------------------

extern "C" char** environ;

double ExecAndLoad(const std::string& connector) {
  int out[2];
  if (::pipe2(out, O_CLOEXEC) != 0) Fail("pipe failed");
  posix_spawn_file_actions_t actions;
  posix_spawn_file_actions_init(&actions);
  posix_spawn_file_actions_adddup2(&actions, out[1], 1);
  posix_spawn_file_actions_adddup2(&actions, out[1], 2);
  std::vector<char*> argv = {const_cast<char*>(connector.c_str()), nullptr};
  pid_t pid = -1;
  const auto t0 = Clock::now();
  const int rc = ::posix_spawn(&pid, connector.c_str(), &actions, nullptr, argv.data(), environ);
  posix_spawn_file_actions_destroy(&actions);
  ::close(out[1]);
  if (rc != 0) Fail("cannot start " + connector);
  char byte;
  const ssize_t n = ::read(out[0], &byte, 1);
  const double ms = Ms(Clock::now() - t0);
  ::close(out[0]);
  ::kill(pid, SIGKILL);
  int status = 0;
  ::waitpid(pid, &status, 0);
  if (n != 1) Fail("the connector wrote nothing when started without weir's environment");
  return ms;
}

// --- 4. restart -----------------------------------------------------------------

using bench::NoBroker;

}  // namespace
}  // namespace weir

int main(int argc, char** argv) {
  using namespace weir;
  absl::SetMutexDeadlockDetectionMode(absl::OnDeadlockCycle::kIgnore);
  if (argc < 2) {
    std::fprintf(stderr, "usage: %s CONNECTOR [RESTARTS [EXITS [CHILDREN]]]\n", argv[0]);
    return 2;
  }
  const std::string connector = argv[1];
  const int restarts = argc > 2 ? std::max(1, std::atoi(argv[2])) : 30;
  const int exits = argc > 3 ? std::max(1, std::atoi(argv[3])) : 200;
  const int children = argc > 4 ? std::max(1, std::atoi(argv[4])) : 32;

  // 1.
  {
    Supervisor by_pidfd(Supervisor::ExitWatch::kPidfd);
    Supervisor by_sigchld(Supervisor::ExitWatch::kSigchld);
    std::vector<double> pidfd, sigchld, poll;
    for (int i = 0; i < exits; ++i) {
      pidfd.push_back(NoticeBySupervisor(by_pidfd));
      sigchld.push_back(NoticeBySupervisor(by_sigchld));
      poll.push_back(NoticeByPolling());
    }
    std::printf(
        "exit notice, SIGKILL to reaped, median (p90) of %d: pidfd %.3f ms (%.3f), SIGCHLD %.3f ms (%.3f), "
        "2 ms waitpid poll %.3f ms (%.3f)\n",
        exits, Median(pidfd), Percentile(pidfd, 0.9), Median(sigchld), Percentile(sigchld, 0.9), Median(poll),
        Percentile(poll, 0.9));
    std::printf("result exit_notice_pidfd_ms %.3f\n", Median(pidfd));
    std::printf("result exit_notice_sigchld_ms %.3f\n", Median(sigchld));
    std::printf("result exit_notice_poll_ms %.3f\n", Median(poll));
  }

  // 2. (the shared supervisor's thread is started before the count)
  {
    Supervisor::Shared();
    const int before = ThreadCount();
    std::vector<std::unique_ptr<ChildProcess>> alive;
    for (int i = 0; i < children; ++i) {
      ChildProcess::Options options;
      options.argv = {"sleep", "60"};
      options.ready_pipe = true;
      auto child = ChildProcess::Spawn(options);
      if (!child.ok()) Fail(std::string(child.status().message()));
      alive.push_back(std::move(*child));
    }
    const int during = ThreadCount();
    for (auto& child : alive) child->Kill();
    std::printf("threads: %d before, %d with %d connector processes watched (one reader thread each before)\n", before,
                during, children);
    std::printf("result supervise_threads_added %d\n", during - before);
  }

  // 3.
  std::vector<double> exec_ms;
  for (int i = 0; i < restarts; ++i) exec_ms.push_back(ExecAndLoad(connector));

  // 4.
  bench::ConnectorOnTcp run(connector);
  GrpcConnectorPort& port = *run.port;
  NoBroker broker;
  std::vector<double> total, kill, spawn, handshake, connect, open, advance;
  for (int i = 0; i <= restarts; ++i) {
    const auto t0 = Clock::now();
    if (ConnectorFailure f = port.Start(static_cast<std::uint64_t>(i + 1)); !f.ok()) Fail("start: " + f.detail);
    const auto t1 = Clock::now();
    v1::OpenRequest request;
    request.set_incarnation(static_cast<std::uint64_t>(i + 1));
    v1::OpenResponse response;
    if (ConnectorFailure f = port.Open(request, &response, broker); !f.ok()) Fail("open: " + f.detail);
    const auto t2 = Clock::now();
    // The first step: its Pull is the connector's first broker call.
    v1::AdvanceRequest step;
    step.set_step(1);
    v1::AdvanceResponse stepped;
    if (ConnectorFailure f = port.Advance(step, &stepped, broker); !f.ok()) Fail("advance: " + f.detail);
    const auto t3 = Clock::now();
    if (i == 0) continue;  // the first start has nothing to kill
    const GrpcConnectorPort::StartPhases& p = port.last_start_phases();
    total.push_back(Ms(t2 - t0));
    kill.push_back(Ms(p.kill));
    spawn.push_back(Ms(p.spawn));
    handshake.push_back(Ms(p.handshake));
    connect.push_back(Ms(p.connect));
    open.push_back(Ms(t2 - t1));
    advance.push_back(Ms(t3 - t2));
  }
  port.Kill();
  std::printf(
      "restart, median of %d: %.2f ms = kill %.2f + spawn %.2f + handshake %.2f + connect %.2f + Open %.2f "
      "(medians of each; min total %.2f, max %.2f)\n",
      restarts, Median(total), Median(kill), Median(spawn), Median(handshake), Median(connect), Median(open),
      *std::min_element(total.begin(), total.end()), *std::max_element(total.begin(), total.end()));
  std::printf(
      "exec and loading (spawn to the first byte the connector writes without weir's environment): median %.2f ms; so "
      "its server start is about %.2f ms\n",
      Median(exec_ms), Median(handshake) - Median(exec_ms));
  std::printf("result supervise_restart_ms %.2f\n", Median(total));
  std::printf("result supervise_kill_ms %.2f\n", Median(kill));
  std::printf("result supervise_spawn_ms %.2f\n", Median(spawn));
  std::printf("result supervise_handshake_ms %.2f\n", Median(handshake));
  std::printf("result supervise_connect_ms %.2f\n", Median(connect));
  std::printf("result supervise_open_ms %.2f\n", Median(open));
  std::printf("result supervise_exec_load_ms %.2f\n", Median(exec_ms));
  std::printf("first Advance after the restart (its Pull is the connector's first broker call): median %.2f ms\n",
              Median(advance));
  std::printf("result supervise_first_advance_ms %.2f\n", Median(advance));
  return 0;
}
