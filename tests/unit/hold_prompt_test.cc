// weir replay --stop-before's hold (harness/cli/hold_prompt.h): what it
// prints and what ends its wait.
#include "harness/cli/hold_prompt.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <string>
#include <thread>

namespace weir {
namespace {

struct Pipe {
  int fds[2] = {-1, -1};
  Pipe() { EXPECT_EQ(::pipe(fds), 0); }
  ~Pipe() {
    for (int fd : fds) {
      if (fd >= 0) ::close(fd);
    }
  }
  void CloseWrite() {
    ::close(fds[1]);
    fds[1] = -1;
  }
};

TEST(WaitForEnter, EndsAtANewline) {
  Pipe p;
  ASSERT_EQ(::write(p.fds[1], "go on\n", 6), 6);
  EXPECT_EQ(WaitForEnter(p.fds[0], nullptr), HoldEnd::kLine);
}

TEST(WaitForEnter, EndsAtTheEndOfInput) {
  Pipe p;
  ASSERT_EQ(::write(p.fds[1], "no newline", 10), 10);
  p.CloseWrite();
  EXPECT_EQ(WaitForEnter(p.fds[0], nullptr), HoldEnd::kEndOfInput);
}

TEST(WaitForEnter, AnUnreadableInputIsItsEnd) { EXPECT_EQ(WaitForEnter(-1, nullptr), HoldEnd::kEndOfInput); }

TEST(WaitForEnter, WaitsUntilTheStopFlag) {
  Pipe p;  // open and silent: only the flag ends the wait
  std::atomic<bool> stop{false};
  const auto t0 = std::chrono::steady_clock::now();
  std::thread t([&] {
    std::this_thread::sleep_for(std::chrono::milliseconds(300));
    stop.store(true);
  });
  EXPECT_EQ(WaitForEnter(p.fds[0], &stop), HoldEnd::kStopped);
  t.join();
  EXPECT_GE(std::chrono::steady_clock::now() - t0, std::chrono::milliseconds(300));
}

std::string Printed(const HoldPoint& at) {
  char* buf = nullptr;
  std::size_t size = 0;
  std::FILE* out = ::open_memstream(&buf, &size);
  PrintHold(out, at, "a delivery", "{\"event\":{}}");
  std::fclose(out);
  std::string s(buf, size);
  std::free(buf);
  return s;
}

TEST(PrintHold, NamesEachProcessItsLivenessAndTheNextEvent) {
  HoldPoint at;
  at.next_seq = 42;
  at.processes.push_back(HeldProcess{0, ::getpid(), "127.0.0.1:4000", "127.0.0.1:5000"});
  const std::string s = Printed(at);
  EXPECT_NE(s.find("holding before event #42 (events #0 to #41 happened)"), std::string::npos) << s;
  EXPECT_NE(s.find("reader 0: pid " + std::to_string(::getpid()) +
                   " (alive), listening on 127.0.0.1:4000, broker calls to 127.0.0.1:5000"),
            std::string::npos)
      << s;
  EXPECT_NE(s.find("next: #42 a delivery"), std::string::npos) << s;
}

TEST(PrintHold, SaysWhenNoConnectorIsAlive) {
  HoldPoint at;
  at.next_seq = 7;
  EXPECT_NE(Printed(at).find("no connector process is alive here"), std::string::npos);
}

}  // namespace
}  // namespace weir
