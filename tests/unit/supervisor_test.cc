// Supervisor and ChildProcess on its loop: many processes are watched by the
// loop's one thread; a process that closes its output but lives on, or that
// exits before its handshake, is told apart; a bound fires at its time; a
// stop flag or signal ends a wait at once. Every case runs with both ways of
// learning of an exit (pidfd and SIGCHLD). These start real processes: label
// e2e. Waits that are not what a test is about get a minute, so a loaded
// machine cannot fail them.
#include "harness/edge/supervisor.h"

#include <dirent.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <fstream>
#include <string>
#include <thread>
#include <vector>

#include <gtest/gtest.h>

#include "harness/edge/child_process.h"

namespace weir {
namespace {

using std::chrono::milliseconds;
using Clock = std::chrono::steady_clock;
constexpr milliseconds kGenerous(60000);

int ThreadCount() {
  int n = 0;
  DIR* dir = ::opendir("/proc/self/task");
  if (dir == nullptr) return -1;
  while (const dirent* e = ::readdir(dir)) {
    if (e->d_name[0] != '.') ++n;
  }
  ::closedir(dir);
  return n;
}

bool Alive(pid_t pid) { return ::kill(pid, 0) == 0; }

// Not running: no such process, or a zombie its parent has not reaped yet.
bool Gone(pid_t pid) {
  if (!Alive(pid)) return true;
  std::ifstream stat("/proc/" + std::to_string(pid) + "/stat");
  std::string line;
  std::getline(stat, line);
  const auto paren = line.rfind(')');
  return paren != std::string::npos && line.size() > paren + 2 && line[paren + 2] == 'Z';
}

class SupervisorTest : public ::testing::TestWithParam<Supervisor::ExitWatch> {
 protected:
  std::unique_ptr<ChildProcess> Spawn(const std::string& script, bool ready_pipe = true) {
    ChildProcess::Options options;
    // Test-only: the script is a literal of this file, never user input.
    options.argv = {"/bin/sh", "-c", script};
    options.ready_pipe = ready_pipe;
    options.supervisor = &supervisor_;
    auto child = ChildProcess::Spawn(options);
    EXPECT_TRUE(child.ok()) << child.status();
    return child.ok() ? std::move(*child) : nullptr;
  }

  Supervisor supervisor_{GetParam()};
};

TEST_P(SupervisorTest, ManyProcessesOneThread) {
  const int threads = ThreadCount();
  ASSERT_GT(threads, 0);
  std::vector<std::unique_ptr<ChildProcess>> children;
  for (int i = 0; i < 24; ++i) {
    children.push_back(Spawn("echo hello" + std::to_string(i) + "; echo 127.0.0.1:1 >&3; exec sleep 60"));
    ASSERT_NE(children.back(), nullptr);
  }
  for (auto& child : children) {
    auto line = child->ReadReadyLine(kGenerous);
    ASSERT_TRUE(line.ok()) << line.status();
    EXPECT_EQ(*line, "127.0.0.1:1");
  }
  // 24 processes, each with two pipes and an exit watch: still the loop's
  // one thread (before the supervisor, one reader thread each).
  EXPECT_EQ(ThreadCount(), threads);
  std::vector<pid_t> pids;
  for (auto& child : children) {
    pids.push_back(child->pid());
    EXPECT_TRUE(Alive(child->pid()));
    EXPECT_EQ(child->TryReap(milliseconds(0)), std::nullopt);
  }
  for (std::size_t i = 0; i < children.size(); ++i) {
    children[i]->Kill();
    EXPECT_EQ(children[i]->TryReap(milliseconds(0)).value_or(""), "signal 9 (SIGKILL)");
    // Written before the handshake, so in the pipe when Kill() read it.
    EXPECT_EQ(children[i]->OutputTail(), "hello" + std::to_string(i) + "\n");
    EXPECT_FALSE(Alive(pids[i])) << "reaped: the pid names no process of ours";
  }
}

TEST_P(SupervisorTest, ClosedOutputIsNotAnExit) {
  auto child = Spawn("echo bye; exec >&- 2>&-; echo 127.0.0.1:1 >&3; exec sleep 60");
  ASSERT_NE(child, nullptr);
  ASSERT_TRUE(child->ReadReadyLine(kGenerous).ok());
  // Its output has ended; it has not: not reaped, and the tail of a live
  // process is returned without waiting for anything.
  EXPECT_EQ(child->TryReap(milliseconds(0)), std::nullopt);
  EXPECT_TRUE(Alive(child->pid()));
  const auto t0 = Clock::now();
  EXPECT_EQ(child->OutputTail(), "bye\n");
  EXPECT_LT(Clock::now() - t0, milliseconds(1000));
  child->Kill();
  EXPECT_EQ(child->TryReap(milliseconds(0)).value_or(""), "signal 9 (SIGKILL)");
}

TEST_P(SupervisorTest, ExitBeforeTheHandshakeClosesIt) {
  auto child = Spawn("echo 'no address for you' >&2; exit 5");
  ASSERT_NE(child, nullptr);
  auto line = child->ReadReadyLine(kGenerous);
  EXPECT_TRUE(absl::IsUnavailable(line.status())) << line.status();
  EXPECT_EQ(child->TryReap(kGenerous).value_or(""), "exit code 5");
  EXPECT_EQ(child->OutputTail(), "no address for you\n");
}

TEST_P(SupervisorTest, LastWordsBeforeExitAreInTheTail) {
  // Repeated: the loop may see the exit before the pipe's last bytes.
  for (int i = 0; i < 50; ++i) {
    auto child = Spawn("printf 'last words %s' 42 >&2; exit 3", /*ready_pipe=*/false);
    ASSERT_NE(child, nullptr);
    ASSERT_EQ(child->TryReap(kGenerous).value_or(""), "exit code 3") << "iteration " << i;
    EXPECT_EQ(child->OutputTail(), "last words 42") << "iteration " << i;
  }
}

TEST_P(SupervisorTest, HandshakeBoundFires) {
  auto child = Spawn("exec sleep 60");  // holds fd 3 open, writes nothing
  ASSERT_NE(child, nullptr);
  const auto t0 = Clock::now();
  auto line = child->ReadReadyLine(milliseconds(300));
  const auto took = Clock::now() - t0;
  EXPECT_TRUE(absl::IsDeadlineExceeded(line.status())) << line.status();
  EXPECT_GE(took, milliseconds(300));
  EXPECT_LT(took, kGenerous);
  // And the reap bound: a live process is still not reaped after it.
  const auto t1 = Clock::now();
  EXPECT_EQ(child->TryReap(milliseconds(200)), std::nullopt);
  EXPECT_GE(Clock::now() - t1, milliseconds(200));
}

TEST_P(SupervisorTest, StopFlagEndsTheHandshakeWait) {
  auto child = Spawn("exec sleep 60");
  ASSERT_NE(child, nullptr);
  std::atomic<bool> stop{false};
  std::thread stopper([&] {
    std::this_thread::sleep_for(milliseconds(100));  // test-only: the wait must be under way
    stop.store(true);
    supervisor_.WakeAll();
  });
  const auto t0 = Clock::now();
  auto line = child->ReadReadyLine(kGenerous, &stop);
  stopper.join();
  EXPECT_TRUE(absl::IsCancelled(line.status())) << line.status();
  EXPECT_LT(Clock::now() - t0, kGenerous / 2);
}

TEST_P(SupervisorTest, OrphansInTheGroupDieWithIt) {
  // The shell leaves a background sleeper in its group (holding the output
  // pipe) and exits; reaping kills the group, so the pipe ends and the
  // tail wait returns long before its bound.
  auto child = Spawn("sleep 60 & echo $! >&3; echo started; exit 0");
  ASSERT_NE(child, nullptr);
  auto orphan = child->ReadReadyLine(kGenerous);
  ASSERT_TRUE(orphan.ok()) << orphan.status();
  const pid_t orphan_pid = std::stoi(*orphan);
  EXPECT_EQ(child->TryReap(kGenerous).value_or(""), "exit code 0");
  EXPECT_EQ(child->OutputTail(kGenerous), "started\n");
  // The orphan is not our child: SIGKILL ends it, another parent reaps it.
  const auto t0 = Clock::now();
  while (!Gone(orphan_pid) && Clock::now() - t0 < kGenerous) {
    std::this_thread::sleep_for(milliseconds(10));  // test-only: the kernel's delivery
  }
  EXPECT_TRUE(Gone(orphan_pid));
}

INSTANTIATE_TEST_SUITE_P(ExitWatch, SupervisorTest,
                         ::testing::Values(Supervisor::ExitWatch::kPidfd, Supervisor::ExitWatch::kSigchld),
                         [](const auto& watch) {
                           return watch.param == Supervisor::ExitWatch::kPidfd ? "Pidfd" : "Sigchld";
                         });

TEST(SupervisorSignals, StopSignalWakesAWaitOnAProcess) {
  Supervisor supervisor;
  std::atomic<bool> stop{false};
  std::atomic<int> seen{0};
  supervisor.OnStopSignals({SIGHUP}, [&](int sig) {
    seen.store(sig);
    stop.store(true);
  });
  ChildProcess::Options options;
  options.argv = {"/bin/sh", "-c", "exec sleep 60"};
  options.supervisor = &supervisor;
  auto child = ChildProcess::Spawn(options);
  ASSERT_TRUE(child.ok()) << child.status();
  std::thread signaller([] {
    std::this_thread::sleep_for(milliseconds(100));  // test-only: the wait must be under way
    ::kill(::getpid(), SIGHUP);
  });
  const auto t0 = Clock::now();
  auto line = (*child)->ReadReadyLine(kGenerous, &stop);
  signaller.join();
  EXPECT_TRUE(absl::IsCancelled(line.status())) << line.status();
  EXPECT_EQ(seen.load(), SIGHUP);
  EXPECT_LT(Clock::now() - t0, kGenerous / 2);
  // The process is alive until killed, and the signal did not reach it (its
  // own group; weir's handler is not inherited).
  EXPECT_EQ((*child)->TryReap(milliseconds(0)), std::nullopt);
  (*child)->Kill();
  EXPECT_EQ((*child)->TryReap(milliseconds(0)).value_or(""), "signal 9 (SIGKILL)");
}

TEST(SupervisorExitWatch, SaysHowAndReportsTheStatus) {
  for (Supervisor::ExitWatch how : {Supervisor::ExitWatch::kPidfd, Supervisor::ExitWatch::kSigchld}) {
    Supervisor supervisor(how);
    const pid_t pid = ::fork();
    if (pid == 0) ::_exit(7);
    ASSERT_GT(pid, 0);
    bool ended = false;  // guarded by supervisor.mu()
    int status = 0;
    EXPECT_EQ(supervisor.WatchExit(pid,
                                   [&](int s) {
                                     {
                                       std::lock_guard<std::mutex> lock(supervisor.mu());
                                       ended = true;
                                       status = s;
                                     }
                                     supervisor.WakeAll();
                                   }),
              how);
    std::unique_lock<std::mutex> lock(supervisor.mu());
    EXPECT_EQ(supervisor.Wait(lock, kGenerous, nullptr, [&] { return ended; }), Supervisor::WaitEnd::kDone);
    EXPECT_EQ(DescribeWaitStatus(status), "exit code 7");
  }
}

}  // namespace
}  // namespace weir
