// Certify's spill: the run log keeps runs on disk, unchanged and in order,
// and leaves nothing behind; the reorder buffer turns runs that finish out of
// order back into pair order with memory bounded by the out-of-order window.
#include "harness/suite/run_log.h"

#include <fcntl.h>
#include <stdlib.h>
#include <unistd.h>

#include <gtest/gtest.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <vector>

#include <google/protobuf/util/message_differencer.h>

#include "absl/strings/str_cat.h"
#include "harness/suite/reorder_buffer.h"

namespace weir {
namespace {

v1::RunRecord RunNumber(std::uint64_t i) {
  v1::RunRecord run;
  run.set_scenario(i % 2 == 0 ? "steady_parcel_scanners.scenario" : "crash <storm> buoys.scenario");
  run.set_seed(1000 + i);
  run.set_pair_index(i);
  run.set_passed(i % 3 != 0);
  if (!run.passed()) {
    run.add_failed_invariants("lost-message");
    run.set_first_violation(absl::StrCat("lost-message: message m-", i, " has no committed record"));
  }
  if (i % 17 == 0) run.set_harness_error(std::string(3000, 'x'));  // longer than one varint byte
  run.set_wall_seconds(0.001 * static_cast<double>(i) + 1e-9);
  run.set_replay(absl::StrCat("weir run --scenario s.scenario --seed ", 1000 + i));
  return run;
}

std::vector<v1::RunRecord> ReadAll(RunReader& reader) {
  std::vector<v1::RunRecord> runs;
  v1::RunRecord run;
  for (;;) {
    absl::StatusOr<bool> more = reader.Next(&run);
    EXPECT_TRUE(more.ok()) << more.status();
    if (!more.ok() || !*more) return runs;
    runs.push_back(run);
  }
}

TEST(RunLog, RunsReadBackUnchangedAndInTheOrderAppended) {
  auto log = RunLog::Create();
  ASSERT_TRUE(log.ok()) << log.status();
  constexpr std::uint64_t kRuns = 2000;  // several of the writer's and reader's buffers
  for (std::uint64_t i = 0; i < kRuns; ++i) ASSERT_TRUE((*log)->Append(RunNumber(i)).ok());
  ASSERT_TRUE((*log)->Finish().ok());
  EXPECT_EQ((*log)->size(), kRuns);
  EXPECT_GT((*log)->bytes(), kRuns * 50);

  // Two readers at once, each with its own position.
  auto first = (*log)->Read();
  auto second = (*log)->Read();
  v1::RunRecord a, b;
  ASSERT_TRUE(*first->Next(&a));
  ASSERT_TRUE(*first->Next(&a));
  ASSERT_TRUE(*second->Next(&b));
  EXPECT_EQ(a.pair_index(), 1u);
  EXPECT_EQ(b.pair_index(), 0u);
  const std::vector<v1::RunRecord> runs = ReadAll(*second);
  ASSERT_EQ(runs.size(), kRuns - 1);
  for (std::uint64_t i = 1; i < kRuns; ++i) {
    ASSERT_TRUE(google::protobuf::util::MessageDifferencer::Equals(runs[i - 1], RunNumber(i)))
        << "run " << i << ":\n"
        << runs[i - 1].DebugString();
  }
  // A run with fewer fields set than the one before it reads back without
  // the previous run's fields (reading replaces, it does not merge).
  EXPECT_EQ(runs[16].harness_error().size(), 3000u);
  EXPECT_TRUE(runs[17].harness_error().empty());
  EXPECT_EQ(ReadAll(*(*log)->Read()).size(), kRuns);
}

TEST(RunLog, EmptyLogReadsNothing) {
  auto log = RunLog::Create();
  ASSERT_TRUE(log.ok()) << log.status();
  ASSERT_TRUE((*log)->Finish().ok());
  v1::RunRecord run;
  auto more = (*log)->Read()->Next(&run);
  ASSERT_TRUE(more.ok()) << more.status();
  EXPECT_FALSE(*more);
  EXPECT_EQ((*log)->bytes(), 0u);
}

// Nothing of the log is visible on disk even while it is in use, so no exit
// path (a crash, SIGKILL) can leave it behind; and a connector process started
// meanwhile does not inherit its descriptor.
TEST(RunLog, LeavesNothingOnDiskAndIsNotInherited) {
  const std::string tmp =
      (std::filesystem::temp_directory_path() / ("weir-run-log-test-" + std::to_string(::getpid()))).string();
  std::filesystem::create_directories(tmp);
  const char* old = std::getenv("TMPDIR");
  const std::string saved = old != nullptr ? old : "";
  ::setenv("TMPDIR", tmp.c_str(), 1);
  auto log = RunLog::Create();
  if (old != nullptr) {
    ::setenv("TMPDIR", saved.c_str(), 1);
  } else {
    ::unsetenv("TMPDIR");
  }
  ASSERT_TRUE(log.ok()) << log.status();
  ASSERT_TRUE((*log)->Append(RunNumber(1)).ok());
  ASSERT_TRUE((*log)->Finish().ok());
  EXPECT_TRUE(std::filesystem::is_empty(tmp)) << "something of the run log is visible in " << tmp;

  int found = 0;
  for (const auto& entry : std::filesystem::directory_iterator("/proc/self/fd")) {
    std::error_code ec;
    const std::string target = std::filesystem::read_symlink(entry.path(), ec).string();
    if (ec || target.rfind(tmp + "/", 0) != 0) continue;
    ++found;
    EXPECT_NE(target.find("(deleted)"), std::string::npos) << target;
    const int fd = std::stoi(entry.path().filename().string());
    EXPECT_NE(::fcntl(fd, F_GETFD) & FD_CLOEXEC, 0) << target << " would be inherited by a child process";
  }
  EXPECT_EQ(found, 1);
  EXPECT_EQ(ReadAll(*(*log)->Read()).size(), 1u);
  log->reset();
  std::filesystem::remove_all(tmp);
}

// The model: every present item once, in position order.
TEST(ReorderBuffer, EmitsEveryItemOnceInPositionOrderWhateverOrderTheyArrive) {
  std::mt19937_64 rng(6);
  for (int round = 0; round < 200; ++round) {
    const std::uint64_t n = rng() % 60;
    std::vector<std::uint64_t> arrival(n);
    for (std::uint64_t i = 0; i < n; ++i) arrival[i] = i;
    std::shuffle(arrival.begin(), arrival.end(), rng);
    std::vector<bool> present(n);
    for (std::uint64_t i = 0; i < n; ++i) present[i] = rng() % 5 != 0;  // some abandoned

    ReorderBuffer<std::string> order;
    std::vector<std::string> emitted;
    for (std::uint64_t p : arrival) {
      order.Put(p, present[p] ? std::optional<std::string>(absl::StrCat("run ", p)) : std::nullopt,
                [&](std::string item) { emitted.push_back(std::move(item)); });
    }
    std::vector<std::string> want;
    for (std::uint64_t i = 0; i < n; ++i) {
      if (present[i]) want.push_back(absl::StrCat("run ", i));
    }
    EXPECT_EQ(emitted, want) << "round " << round;
    EXPECT_EQ(order.waiting(), 0u);
    EXPECT_EQ(order.next(), n);
  }
}

// Memory: with N workers taking positions in order, what waits is bounded by
// the window of runs that finished while the oldest unfinished one was still
// going, not by the number of runs.
TEST(ReorderBuffer, WhatWaitsIsBoundedByTheOutOfOrderWindow) {
  std::mt19937_64 rng(9);
  constexpr std::uint64_t kRuns = 100000, kWorkers = 4;
  // Simulated workers: each takes the next position and finishes it after a
  // random duration; the next to finish is the one with the earliest end.
  std::vector<std::pair<std::uint64_t, std::uint64_t>> busy;  // (end time, position)
  std::uint64_t next = 0, now = 0;
  ReorderBuffer<std::uint64_t> order;
  std::uint64_t expect = 0;
  std::size_t most_waiting = 0;
  while (next < kWorkers) busy.emplace_back(now + 1 + rng() % 10, next++);
  while (!busy.empty()) {
    auto it = std::min_element(busy.begin(), busy.end());
    now = it->first;
    const std::uint64_t done = it->second;
    busy.erase(it);
    order.Put(done, done, [&](std::uint64_t p) { EXPECT_EQ(p, expect++); });
    most_waiting = std::max(most_waiting, order.waiting());
    if (next < kRuns) busy.emplace_back(now + 1 + rng() % 10, next++);
  }
  EXPECT_EQ(expect, kRuns);
  // Runs take 1..10 time units: at most ~10 runs per worker can finish
  // while one run is in work.
  EXPECT_LE(most_waiting, 10 * kWorkers);
  EXPECT_GT(most_waiting, 0u);  // the runs did finish out of order
}

}  // namespace
}  // namespace weir
