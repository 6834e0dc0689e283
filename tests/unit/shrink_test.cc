// The shrink search (harness/shrink/shrink.h) against hand-made "connectors":
// rerun functions whose failure rule is known, so the minimal plan is known.
#include "harness/shrink/shrink.h"

#include <algorithm>
#include <random>
#include <set>

#include <gtest/gtest.h>

namespace weir {
namespace {

v1::FaultDecision Latency(std::uint64_t pull, std::int64_t ms) {
  v1::FaultDecision d;
  d.set_site(v1::PULL);
  d.set_position(pull);
  d.set_latency_ms(ms);
  return d;
}

v1::FaultDecision Crash(v1::Site site, std::uint64_t position, v1::CrashPoint point, std::uint32_t after = 0) {
  v1::FaultDecision d;
  d.set_site(site);
  d.set_position(position);
  d.mutable_crash()->set_point(point);
  d.mutable_crash()->set_after_calls(after);
  return d;
}

const v1::FaultDecision* Find(const v1::FaultPlan& plan, v1::Site site, std::uint64_t position) {
  for (const auto& d : plan.decisions()) {
    if (d.site() == site && d.position() == position) return &d;
  }
  return nullptr;
}

RerunResult Result(bool fails, std::size_t decisions) {
  RerunResult r;
  if (fails) r.failed.push_back(Invariant::kDuplicateOutput);
  r.digest = fails ? "sha256:fails" : "sha256:holds";
  r.events = 100 + decisions;
  r.steps = 10 + decisions;
  return r;
}

// Checks 1-minimality from outside: every single removal makes `fails` false.
template <typename F>
void ExpectOneMinimal(const v1::FaultPlan& plan, F fails) {
  for (int i = 0; i < plan.decisions_size(); ++i) {
    v1::FaultPlan without = plan;
    without.mutable_decisions()->DeleteSubrange(i, 1);
    EXPECT_FALSE(fails(without)) << "decision " << i << " could be removed";
  }
}

// Fails when PULL 3 has at least 40 ms of latency, PULL 11 has any, and a
// crash hits STEP 5 no later than after its 2nd broker call.
bool ThreeCulprits(const v1::FaultPlan& plan) {
  const auto* a = Find(plan, v1::PULL, 3);
  const auto* b = Find(plan, v1::PULL, 11);
  const auto* c = Find(plan, v1::STEP, 5);
  if (a == nullptr || a->latency_ms() < 40 || b == nullptr || b->latency_ms() < 1 || c == nullptr) {
    return false;
  }
  return c->crash().point() == v1::BEFORE_STEP ||
         (c->crash().point() == v1::IN_STEP_AFTER_BROKER_CALL && c->crash().after_calls() <= 2);
}

v1::FaultPlan TwentyLatenciesAndACrash() {
  v1::FaultPlan plan;
  for (std::uint64_t k = 1; k <= 20; ++k) *plan.add_decisions() = Latency(k, 100);
  *plan.add_decisions() = Crash(v1::STEP, 5, v1::BEFORE_STEP);
  *plan.add_decisions() = Crash(v1::CHECKPOINT, 2, v1::AFTER_COMMIT_BEFORE_NOTICE);
  return plan;
}

TEST(Shrink, RemovesEveryBystanderAndWeakensTheCulprits) {
  std::uint64_t calls = 0;
  Rerun rerun = [&](const v1::FaultPlan& p) -> absl::StatusOr<RerunResult> {
    ++calls;
    return Result(ThreeCulprits(p), static_cast<std::size_t>(p.decisions_size()));
  };
  ShrinkOptions options;
  options.target = Invariant::kDuplicateOutput;
  const v1::FaultPlan plan = TwentyLatenciesAndACrash();
  auto r = ShrinkPlan(plan, "sha256:fails", rerun, options);
  ASSERT_TRUE(r.ok()) << r.status();
  ASSERT_EQ(r->outcome, ShrinkOutcome::kShrunk);
  EXPECT_TRUE(r->one_minimal);
  EXPECT_FALSE(r->budget_reached);
  ASSERT_EQ(r->minimal.decisions_size(), 3) << r->minimal.DebugString();
  EXPECT_EQ(Find(r->minimal, v1::PULL, 3)->latency_ms(), 40);  // shortest that still fails
  EXPECT_EQ(Find(r->minimal, v1::PULL, 11)->latency_ms(), 1);
  const auto* crash = Find(r->minimal, v1::STEP, 5);
  EXPECT_EQ(crash->crash().point(), v1::IN_STEP_AFTER_BROKER_CALL);  // later crash point
  EXPECT_EQ(crash->crash().after_calls(), 2u);
  EXPECT_TRUE(ThreeCulprits(r->minimal));
  ExpectOneMinimal(r->minimal, ThreeCulprits);
  // Every rerun is counted once; plans tried before are answered from memory.
  EXPECT_EQ(r->reruns, calls);
  EXPECT_EQ(r->original_run.events, 122u);
  EXPECT_EQ(r->minimal_run.events, 103u);
  EXPECT_GT(r->removal_steps, 0u);
  EXPECT_GT(r->weakening_steps, 0u);
}

// ddmin finds exactly the culprits when failing means "all culprits present"
// (a monotone rule has one minimal failing subset), for random plan sizes.
TEST(Shrink, FindsExactlyTheCulpritSetOfAMonotoneRule) {
  std::mt19937 rng(20020201);
  for (int trial = 0; trial < 40; ++trial) {
    const std::size_t size = 1 + rng() % 60;
    v1::FaultPlan plan;
    for (std::size_t k = 1; k <= size; ++k) {
      v1::FaultDecision d;
      d.set_site(v1::ACK);
      d.set_position(k);
      d.set_lost_ack(true);
      *plan.add_decisions() = d;
    }
    std::set<std::uint64_t> culprits;
    const std::size_t want = rng() % std::min<std::size_t>(size + 1, 5);
    while (culprits.size() < want) culprits.insert(1 + rng() % size);
    auto fails = [&](const v1::FaultPlan& p) {
      std::size_t hit = 0;
      for (const auto& d : p.decisions()) hit += culprits.count(d.position());
      return hit == culprits.size();
    };
    Rerun rerun = [&](const v1::FaultPlan& p) -> absl::StatusOr<RerunResult> {
      return Result(fails(p), static_cast<std::size_t>(p.decisions_size()));
    };
    ShrinkOptions options;
    options.target = Invariant::kDuplicateOutput;
    auto r = ShrinkPlan(plan, "", rerun, options);
    ASSERT_TRUE(r.ok());
    std::set<std::uint64_t> got;
    for (const auto& d : r->minimal.decisions()) got.insert(d.position());
    EXPECT_EQ(got, culprits) << "trial " << trial << ", " << size << " decisions";
    EXPECT_TRUE(r->one_minimal);
    // Worst case of ddmin, |c|^2 + 3|c| tests (Zeller and Hildebrandt 2002,
    // from memory; docs/references.md), plus the reproduction and the empty plan.
    EXPECT_LE(r->reruns, size * size + 3 * size + 2);
  }
}

// Not monotone: any two of a set of six fail. The result is 1-minimal (two of
// them), though not the only minimal one.
TEST(Shrink, EndsOneMinimalUnderANonMonotoneRule) {
  v1::FaultPlan plan;
  for (std::uint64_t k = 1; k <= 30; ++k) *plan.add_decisions() = Latency(k, 5);
  const std::set<std::uint64_t> risky = {4, 9, 13, 21, 22, 28};
  auto fails = [&](const v1::FaultPlan& p) {
    int hit = 0;
    for (const auto& d : p.decisions()) hit += static_cast<int>(risky.count(d.position()));
    return hit >= 2;
  };
  Rerun rerun = [&](const v1::FaultPlan& p) -> absl::StatusOr<RerunResult> {
    return Result(fails(p), static_cast<std::size_t>(p.decisions_size()));
  };
  ShrinkOptions options;
  options.target = Invariant::kDuplicateOutput;
  auto r = ShrinkPlan(plan, "", rerun, options);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->minimal.decisions_size(), 2);
  EXPECT_TRUE(fails(r->minimal));
  ExpectOneMinimal(r->minimal, fails);
}

TEST(Shrink, NothingNeededGivesTheEmptyPlan) {
  Rerun rerun = [&](const v1::FaultPlan& p) -> absl::StatusOr<RerunResult> {
    return Result(true, static_cast<std::size_t>(p.decisions_size()));
  };
  ShrinkOptions options;
  options.target = Invariant::kDuplicateOutput;
  auto r = ShrinkPlan(TwentyLatenciesAndACrash(), "", rerun, options);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->minimal.decisions_size(), 0);
  EXPECT_TRUE(r->one_minimal);
  EXPECT_EQ(r->reruns, 2u);  // the reproduction, then the empty plan
}

TEST(Shrink, ADifferentDigestForTheSamePlanIsNondeterminismAndNothingIsShrunk) {
  std::uint64_t calls = 0;
  Rerun rerun = [&](const v1::FaultPlan& p) -> absl::StatusOr<RerunResult> {
    ++calls;
    RerunResult r = Result(ThreeCulprits(p), 0);
    r.digest = "sha256:another";
    return r;
  };
  ShrinkOptions options;
  options.target = Invariant::kDuplicateOutput;
  const v1::FaultPlan plan = TwentyLatenciesAndACrash();
  auto r = ShrinkPlan(plan, "sha256:fails", rerun, options);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, ShrinkOutcome::kNondeterministic);
  EXPECT_NE(r->nondeterminism.find("sha256:another"), std::string::npos) << r->nondeterminism;
  EXPECT_EQ(calls, 1u);
  EXPECT_EQ(r->minimal.decisions_size(), plan.decisions_size());
}

TEST(Shrink, APlanThatNoLongerFailsIsNondeterminism) {
  Rerun rerun = [&](const v1::FaultPlan&) -> absl::StatusOr<RerunResult> { return Result(false, 0); };
  ShrinkOptions options;
  options.target = Invariant::kDuplicateOutput;
  auto r = ShrinkPlan(TwentyLatenciesAndACrash(), "", rerun, options);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->outcome, ShrinkOutcome::kNondeterministic);
  EXPECT_EQ(r->nondeterminism, "the unchanged fault plan no longer fails duplicate-output (every invariant held)");
}

TEST(Shrink, RerunBudgetStopsWithAPlanThatStillFails) {
  std::uint64_t calls = 0;
  Rerun rerun = [&](const v1::FaultPlan& p) -> absl::StatusOr<RerunResult> {
    ++calls;
    return Result(ThreeCulprits(p), 0);
  };
  ShrinkOptions options;
  options.target = Invariant::kDuplicateOutput;
  options.max_reruns = 6;
  int progress_calls = 0;
  options.progress = [&](const ShrinkProgress& p) {
    ++progress_calls;
    EXPECT_EQ(p.reruns, static_cast<std::uint64_t>(progress_calls));
    EXPECT_EQ(p.original_decisions, 22u);
  };
  auto r = ShrinkPlan(TwentyLatenciesAndACrash(), "", rerun, options);
  ASSERT_TRUE(r.ok());
  EXPECT_TRUE(r->budget_reached);
  EXPECT_FALSE(r->one_minimal);
  EXPECT_EQ(calls, 6u);
  EXPECT_EQ(progress_calls, 6);
  EXPECT_TRUE(ThreeCulprits(r->minimal));
  EXPECT_LE(r->minimal.decisions_size(), 22);
}

TEST(Shrink, StopPredicateIsPolledBeforeEveryRerun) {
  std::uint64_t calls = 0;
  Rerun rerun = [&](const v1::FaultPlan& p) -> absl::StatusOr<RerunResult> {
    ++calls;
    return Result(ThreeCulprits(p), 0);
  };
  ShrinkOptions options;
  options.target = Invariant::kDuplicateOutput;
  options.stop = [&] { return calls >= 3; };
  auto r = ShrinkPlan(TwentyLatenciesAndACrash(), "", rerun, options);
  ASSERT_TRUE(r.ok());
  EXPECT_TRUE(r->budget_reached);
  EXPECT_EQ(calls, 3u);
  EXPECT_TRUE(ThreeCulprits(r->minimal));
}

TEST(Shrink, AHarnessFaultEndsTheSearchWithItsError) {
  int calls = 0;
  Rerun rerun = [&](const v1::FaultPlan& p) -> absl::StatusOr<RerunResult> {
    if (++calls == 4) return absl::InternalError("cannot listen");
    return Result(ThreeCulprits(p), 0);
  };
  ShrinkOptions options;
  options.target = Invariant::kDuplicateOutput;
  auto r = ShrinkPlan(TwentyLatenciesAndACrash(), "", rerun, options);
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.status().message(), "cannot listen");
}

}  // namespace
}  // namespace weir
