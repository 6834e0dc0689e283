// The workload search of harness/shrink/workload_shrink.h against fake
// predicates whose smallest failing workload is known.
#include "harness/shrink/workload_shrink.h"

#include <gtest/gtest.h>

#include <set>

namespace weir {
namespace {

v1::Scenario QueueScenario(std::uint64_t messages, int sources) {
  v1::Scenario s;
  s.mutable_workload()->set_messages(messages);
  for (int i = 0; i < sources; ++i) s.mutable_workload()->add_sources("scanner-" + std::to_string(i));
  s.mutable_broker()->set_max_pull(32);
  return s;
}

WorkloadRun FakeRun(bool fails, std::uint64_t events) {
  return WorkloadRun{fails, events, "fake:" + std::to_string(events)};
}

// Events of a fake run: grows with the workload, like a real one.
std::uint64_t FakeEvents(const v1::Scenario& s) {
  return 10 * s.workload().messages() + static_cast<std::uint64_t>(s.workload().sources_size()) +
         (s.has_log() ? s.log().partitions() + s.log().keys() : 0);
}

TEST(ShrinkWorkload, FindsTheThresholdOfAMonotonicFailure) {
  // Fails from 37 messages and 3 sources on: the least failing workload.
  int runs = 0;
  auto r =
      ShrinkWorkload(QueueScenario(1000, 8),
                     [&](const v1::Scenario& s) -> absl::StatusOr<WorkloadRun> {
                       ++runs;
                       return FakeRun(s.workload().messages() >= 37 && s.workload().sources_size() >= 3, FakeEvents(s));
                     },
                     {});
  ASSERT_TRUE(r.ok()) << r.status();
  EXPECT_EQ(r->scenario.workload().messages(), 37u);
  EXPECT_EQ(r->scenario.workload().sources_size(), 3);
  EXPECT_EQ(r->scenario.workload().sources(2), "scanner-2");  // a prefix is kept
  EXPECT_EQ(r->events, 10u * 37 + 3);
  EXPECT_EQ(r->digest, "fake:373");  // the accepted run's
  ASSERT_EQ(r->changes.size(), 2u);
  EXPECT_EQ(r->changes[0].knob, WorkloadKnob::kMessages);
  EXPECT_EQ(r->changes[0].before, 1000u);
  EXPECT_EQ(r->changes[0].after, 37u);
  EXPECT_EQ(r->changes[1].after, 3u);
  // Halving: about log2(1000) + log2(8) reruns per pass, a final pass that
  // changes nothing answered from memory; far fewer than trying every value.
  EXPECT_LE(r->reruns, 2u * (11 + 4));
  EXPECT_EQ(static_cast<std::uint64_t>(runs), r->reruns);
  EXPECT_FALSE(r->budget_reached);
}

TEST(ShrinkWorkload, TakesTheLeastValueInOneRerunWhenItFails) {
  auto r = ShrinkWorkload(
      QueueScenario(5000, 1),
      [](const v1::Scenario& s) -> absl::StatusOr<WorkloadRun> { return FakeRun(true, FakeEvents(s)); }, {});
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->scenario.workload().messages(), 1u);
  EXPECT_EQ(r->reruns, 1u);  // one source: no sources knob
}

TEST(ShrinkWorkload, NeverAcceptsAWorkloadThatWasNotSeenToFail) {
  // Not monotonic: fails only at exactly 1000 and 600 messages (and 1000 was
  // the caller's run). Whatever it returns must be one of those.
  std::set<std::uint64_t> tried;
  auto r = ShrinkWorkload(QueueScenario(1000, 1),
                          [&](const v1::Scenario& s) -> absl::StatusOr<WorkloadRun> {
                            tried.insert(s.workload().messages());
                            const auto m = s.workload().messages();
                            return FakeRun(m == 1000 || m == 600, m);
                          },
                          {});
  ASSERT_TRUE(r.ok());
  const auto m = r->scenario.workload().messages();
  EXPECT_TRUE(m == 1000 || m == 600) << m;
  if (m == 1000) {
    EXPECT_TRUE(r->changes.empty());
  }
}

TEST(ShrinkWorkload, StopsAtTheRerunBudgetWithAFailingWorkload) {
  WorkloadShrinkOptions o;
  o.max_reruns = 3;
  auto r = ShrinkWorkload(
      QueueScenario(1 << 20, 1),
      [](const v1::Scenario& s) -> absl::StatusOr<WorkloadRun> {
        return FakeRun(s.workload().messages() >= 12345, FakeEvents(s));
      },
      o);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->reruns, 3u);
  EXPECT_TRUE(r->budget_reached);
  EXPECT_GE(r->scenario.workload().messages(), 12345u);    // still fails
  EXPECT_LT(r->scenario.workload().messages(), 1u << 20);  // and did shrink: 1, then 2^19 … both tried
}

TEST(ShrinkWorkload, ACancelledRerunStopsTheSearch) {
  int runs = 0;
  auto r = ShrinkWorkload(QueueScenario(100, 1),
                          [&](const v1::Scenario&) -> absl::StatusOr<WorkloadRun> {
                            ++runs;
                            return absl::CancelledError("signal");
                          },
                          {});
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(runs, 1);
  EXPECT_TRUE(r->budget_reached);
  EXPECT_TRUE(r->changes.empty());
  EXPECT_EQ(r->scenario.workload().messages(), 100u);
}

TEST(ShrinkWorkload, AHarnessFaultIsAnError) {
  auto r = ShrinkWorkload(
      QueueScenario(100, 1),
      [](const v1::Scenario&) -> absl::StatusOr<WorkloadRun> { return absl::UnavailableError("no socket"); }, {});
  EXPECT_EQ(r.status().code(), absl::StatusCode::kUnavailable);
}

TEST(ShrinkWorkload, LogKnobsKeepIdlePartitionsValid) {
  v1::Scenario s;
  s.mutable_workload()->set_messages(50);
  s.mutable_log()->set_partitions(12);
  s.mutable_log()->add_idle_partitions(4);
  // keys unset: the default 64
  auto knobs = WorkloadKnobs(s);
  ASSERT_EQ(knobs.size(), 3u);
  EXPECT_EQ(knobs[1].knob, WorkloadKnob::kPartitions);
  EXPECT_EQ(knobs[1].least, 6u);  // partition 4 stays idle and one above it receives records
  EXPECT_EQ(knobs[2].knob, WorkloadKnob::kKeys);
  EXPECT_EQ(knobs[2].value, 64u);
  auto r = ShrinkWorkload(s,
                          [](const v1::Scenario& c) -> absl::StatusOr<WorkloadRun> {
                            return FakeRun(c.log().keys() >= 5 || c.log().keys() == 0, FakeEvents(c));
                          },
                          {});
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->scenario.workload().messages(), 1u);
  EXPECT_EQ(r->scenario.log().partitions(), 6u);
  EXPECT_EQ(r->scenario.log().keys(), 5u);
}

}  // namespace
}  // namespace weir
