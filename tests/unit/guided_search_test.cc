// Guided search (harness/search/guided_search.h) against a fake connector
// whose bug needs two faults in one run that blind draws never combine.
#include "harness/search/guided_search.h"

#include <gtest/gtest.h>

#include "absl/strings/str_cat.h"

namespace weir {
namespace {

v1::FaultDecision Crash(std::uint64_t position) {
  v1::FaultDecision d;
  d.set_site(v1::STEP);
  d.set_position(position);
  d.mutable_crash()->set_point(v1::BEFORE_STEP);
  return d;
}

v1::FaultDecision Throttle(std::uint64_t position) {
  v1::FaultDecision d;
  d.set_site(v1::PULL);
  d.set_position(position);
  d.set_throttle_retry_after_ms(100);
  return d;
}

// A fake run: drawn plans hold a crash (odd seeds) or a throttle (even seeds),
// never both; the "connector" fails only when one run has both — a deep bug.
struct DeepBug {
  int runs = 0;
  absl::StatusOr<SearchFeedback> operator()(const SearchCandidate& c) {
    ++runs;
    SearchFeedback fb;
    if (c.plan.has_value()) {
      fb.plan = *c.plan;
    } else if (c.seed % 2 == 1) {
      *fb.plan.add_decisions() = Crash(1 + c.seed % 5);
    } else {
      *fb.plan.add_decisions() = Throttle(1 + c.seed % 3);
    }
    bool crash = false, throttle = false;
    for (const auto& d : fb.plan.decisions()) {
      crash |= d.has_crash();
      throttle |= d.has_throttle_retry_after_ms();
      fb.features.push_back(absl::StrCat("fault ", d.fault_case(), " at ", d.site(), " ", d.position()));
    }
    if (crash && throttle) fb.failed.push_back(Invariant::kDuplicateOutput);
    return fb;
  }
};

SearchOptions Options(bool blind) {
  SearchOptions o;
  o.scenarios = {SearchScenario{{"crash_rate", "latency"}}};
  o.budget = 200;
  o.blind = blind;
  return o;
}

TEST(GuidedSearch, FindsABugThatNeedsTwoFaultsWhereBlindSeedsNeverDo) {
  DeepBug blind_bug;
  auto blind = GuidedSearch(Options(true), [&](const SearchCandidate& c) { return blind_bug(c); });
  ASSERT_TRUE(blind.ok()) << blind.status();
  EXPECT_TRUE(blind->findings.empty());
  EXPECT_EQ(blind->runs, 200u);

  DeepBug guided_bug;
  auto guided = GuidedSearch(Options(false), [&](const SearchCandidate& c) { return guided_bug(c); });
  ASSERT_TRUE(guided.ok()) << guided.status();
  ASSERT_EQ(guided->findings.size(), 1u);
  const SearchFinding& f = guided->findings[0];
  EXPECT_LT(f.run, 200u);
  EXPECT_EQ(f.failed, std::vector<Invariant>{Invariant::kDuplicateOutput});
  ASSERT_TRUE(f.candidate.plan.has_value());  // the failing plan, to replay
  bool crash = false, throttle = false;
  for (const auto& d : f.candidate.plan->decisions()) {
    crash |= d.has_crash();
    throttle |= d.has_throttle_retry_after_ms();
  }
  EXPECT_TRUE(crash && throttle);
  EXPECT_EQ(guided->runs, f.run);  // it stops at the first failure
}

TEST(GuidedSearch, TheSameSeedMakesTheSameChoices) {
  std::vector<std::string> first, second;
  for (auto* log : {&first, &second}) {
    DeepBug bug;
    auto r = GuidedSearch(Options(false), [&](const SearchCandidate& c) {
      std::string plan;
      if (c.plan.has_value()) plan = c.plan->ShortDebugString();
      log->push_back(absl::StrCat(c.scenario, "/", c.seed, "/", c.switched_off.size(), "/", plan));
      return bug(c);
    });
    ASSERT_TRUE(r.ok());
  }
  EXPECT_EQ(first, second);
  EXPECT_GT(first.size(), 2u);
}

TEST(GuidedSearch, RespectsTheBudgetAndTheStopPredicate) {
  SearchOptions o = Options(false);
  o.budget = 7;
  int calls = 0;
  auto never_fails = [&](const SearchCandidate& c) -> absl::StatusOr<SearchFeedback> {
    ++calls;
    SearchFeedback fb;
    fb.features = {absl::StrCat("seed ", c.seed)};
    return fb;
  };
  auto r = GuidedSearch(o, never_fails);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->runs, 7u);
  EXPECT_EQ(calls, 7);
  EXPECT_EQ(r->features_after_run.size(), 7u);

  calls = 0;
  o.budget = 100;
  o.stop = [&] { return calls >= 3; };
  r = GuidedSearch(o, never_fails);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r->runs, 3u);
}

TEST(GuidedSearch, AHarnessFaultEndsTheSearch) {
  auto r = GuidedSearch(Options(false), [](const SearchCandidate&) -> absl::StatusOr<SearchFeedback> {
    return absl::InternalError("cannot bind");
  });
  EXPECT_FALSE(r.ok());
}

TEST(GuidedSearch, RatesOnAndSwitchOff) {
  v1::FaultConfig c;
  c.set_crash_rate(0.1);
  c.set_reorder_rate(0);
  c.mutable_latency()->set_rate(0.5);
  c.add_throttle_windows()->set_end_ms(10);
  *c.add_scripted() = Crash(3);
  const std::vector<std::string> on = RatesOn(c);
  EXPECT_EQ(on, (std::vector<std::string>{"latency", "throttle_windows", "crash_rate"}));
  SwitchOff({"crash_rate", "latency", "scripted"}, &c);
  EXPECT_EQ(c.crash_rate(), 0);
  EXPECT_FALSE(c.has_latency());
  EXPECT_EQ(c.throttle_windows_size(), 1);
  EXPECT_EQ(c.scripted_size(), 1);  // scripted decisions are never switched off
}

TEST(GuidedSearch, FeaturesNameChancesByMagnitudeFaultsAndPairs) {
  Verdict v;
  v.at(Invariant::kThrottleViolation).chances = 42;
  v.at(Invariant::kRetryStorm).checked = false;
  v.at(Invariant::kRetryStorm).chances = 5;  // not judged: no feature
  v.faults_applied = {{"crash at BEFORE_STEP", 2}, {"latency_ms at PULL", 9}};
  const auto f = FeaturesOf(v);
  EXPECT_NE(std::find(f.begin(), f.end(), "chance throttle-violation >=1e1"), f.end());
  EXPECT_EQ(std::find(f.begin(), f.end(), "chance retry-storm >=1e0"), f.end());
  EXPECT_NE(std::find(f.begin(), f.end(), "pair crash at BEFORE_STEP + latency_ms at PULL"), f.end());
}

TEST(GuidedSearch, ChanceMagnitudesChangeExactlyAtPowersOfTen) {
  const auto feature = [](std::uint64_t chances) {
    Verdict v;
    v.at(Invariant::kStepTimeout).chances = chances;
    for (const std::string& f : FeaturesOf(v)) {
      if (f.rfind("chance step-timeout ", 0) == 0) return f;
    }
    return std::string("none");
  };
  EXPECT_EQ(feature(0), "none");
  EXPECT_EQ(feature(1), "chance step-timeout >=1e0");
  EXPECT_EQ(feature(9), "chance step-timeout >=1e0");
  EXPECT_EQ(feature(10), "chance step-timeout >=1e1");
  EXPECT_EQ(feature(999), "chance step-timeout >=1e2");
  EXPECT_EQ(feature(1000), "chance step-timeout >=1e3");
  EXPECT_EQ(feature(~std::uint64_t{0}), "chance step-timeout >=1e19");  // 18446744073709551615
}

}  // namespace
}  // namespace weir
