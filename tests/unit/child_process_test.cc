// ChildProcess: what a connector writes just before it exits is in the
// captured tail once the process has been reaped (the loop may see the exit
// before the pipe's last bytes), the tail stays bounded, and Kill() takes
// the whole group. These start real processes: label e2e.
#include <signal.h>

#include <chrono>
#include <string>

#include <gtest/gtest.h>

#include "harness/edge/child_process.h"

namespace weir {
namespace {

using std::chrono::milliseconds;

std::unique_ptr<ChildProcess> SpawnShell(const std::string& script, std::size_t tail = 8192) {
  ChildProcess::Options options;
  // Test-only: the script is a literal of this file, never user input.
  options.argv = {"/bin/sh", "-c", script};
  options.ready_pipe = false;
  options.tail_bytes = tail;
  auto child = ChildProcess::Spawn(options);
  EXPECT_TRUE(child.ok()) << child.status();
  return child.ok() ? std::move(*child) : nullptr;
}

TEST(ChildProcessTest, LastWordsBeforeExitAreInTheTailAfterReap) {
  // Repeated: the race between the exit and the pipe's end is timing
  // dependent; before the end of output was awaited this lost the text in
  // some of the runs on a loaded machine.
  for (int i = 0; i < 100; ++i) {
    auto child = SpawnShell("printf '<script>last words %s</script>' 42 >&2; exit 3");
    ASSERT_NE(child, nullptr);
    const auto how = child->TryReap(milliseconds(5000));
    ASSERT_TRUE(how.has_value()) << "iteration " << i;
    EXPECT_EQ(*how, "exit code 3");
    EXPECT_EQ(child->OutputTail(), "<script>last words 42</script>") << "iteration " << i;
  }
}

TEST(ChildProcessTest, TailKeepsTheEndAndIsBounded) {
  auto child = SpawnShell("i=0; while [ $i -lt 2000 ]; do echo line$i; i=$((i+1)); done; echo END",
                          /*tail=*/64);
  ASSERT_NE(child, nullptr);
  ASSERT_TRUE(child->TryReap(milliseconds(5000)).has_value());
  const std::string tail = child->OutputTail();
  EXPECT_LE(tail.size(), 64u);
  EXPECT_EQ(tail.substr(tail.size() - 4), "END\n");
  EXPECT_NE(tail.find("line1999\n"), std::string::npos);
}

TEST(ChildProcessTest, KillReapsAndDescribesTheSignal) {
  auto child = SpawnShell("sleep 30");
  ASSERT_NE(child, nullptr);
  const pid_t pid = child->pid();
  child->Kill();
  EXPECT_EQ(child->TryReap(milliseconds(0)).value_or(""), "signal 9 (SIGKILL)");
  // Reaped: the pid no longer names a process of ours.
  EXPECT_EQ(::kill(pid, 0), -1);
  // The tail of a killed process with no output is empty and returns at once.
  EXPECT_EQ(child->OutputTail(), "");
}

}  // namespace
}  // namespace weir
