// Tests for the adapter's retry backoff (adapters/cpp/include/weir/adapter/backoff.h)
// against gRPC's connection-backoff parameters.
//
// Source of every constant below: grpc doc/connection-backoff.md, "Proposed
// Backoff Algorithm" (docs/references.md): INITIAL_BACKOFF 1 s, MULTIPLIER
// 1.6, JITTER 0.2, MAX_BACKOFF 120 s; next = min(cur × 1.6, 120 s), and the
// deadline is now + next ± 0.2 × next. MIN_CONNECT_TIMEOUT (20 s) bounds a
// connection attempt, not the wait between broker calls, so it has no
// counterpart here.
//
// One deliberate difference from the doc's pseudocode: the doc waits exactly
// INITIAL_BACKOFF before the first retry, while Backoff jitters that first delay
// too (as grpc core's BackOff does, from memory of src/core/lib/backoff). Jitter
// on the first retry is what keeps many connectors restarted together from
// retrying in lockstep, so the tests accept 1 s ± 20 % for it.
#include "weir/adapter/backoff.h"

#include <algorithm>
#include <cstdint>
#include <vector>

#include <gtest/gtest.h>

namespace weir::adapter {
namespace {

constexpr std::int64_t kSecond = 1'000'000'000;
// grpc doc/connection-backoff.md, "Proposed Backoff Algorithm".
constexpr double kInitialBackoffNs = 1.0 * kSecond;
constexpr double kMultiplier = 1.6;
constexpr double kJitter = 0.2;
constexpr double kMaxBackoffNs = 120.0 * kSecond;

// The un-jittered delays of the doc: 1 s, then min(cur × 1.6, 120 s).
std::vector<double> UnjitteredDelays(int n) {
  std::vector<double> out;
  double cur = kInitialBackoffNs;
  for (int i = 0; i < n; ++i) {
    out.push_back(cur);
    cur = std::min(cur * kMultiplier, kMaxBackoffNs);
  }
  return out;
}

std::vector<std::int64_t> Delays(std::uint64_t seed, int n) {
  Backoff b(seed);
  std::vector<std::int64_t> out;
  for (int i = 0; i < n; ++i) out.push_back(b.NextDelay());
  return out;
}

// Within ±JITTER of the un-jittered value (1 ns of slack for rounding to ns).
void ExpectWithinJitter(std::int64_t delay, double unjittered, int i) {
  EXPECT_GE(static_cast<double>(delay), unjittered * (1 - kJitter) - 1) << "failure #" << i;
  EXPECT_LE(static_cast<double>(delay), unjittered * (1 + kJitter) + 1) << "failure #" << i;
}

TEST(BackoffPolicy, DefaultsAreGrpcConnectionBackoffParameters) {
  // grpc doc/connection-backoff.md, "Proposed Backoff Algorithm".
  const BackoffPolicy p;
  EXPECT_EQ(p.initial_ns, 1 * kSecond);  // INITIAL_BACKOFF = 1 second
  EXPECT_DOUBLE_EQ(p.multiplier, 1.6);   // MULTIPLIER = 1.6
  EXPECT_DOUBLE_EQ(p.jitter, 0.2);       // JITTER = 0.2
  EXPECT_EQ(p.max_ns, 120 * kSecond);    // MAX_BACKOFF = 120 seconds
}

TEST(Backoff, EachDelayIsWithinTwentyPercentOfTheCappedExponentialSequence) {
  // next = min(cur × 1.6, 120 s), jittered by ± 0.2 × next (grpc
  // doc/connection-backoff.md). 20 failures reach the cap (1.6^11 s > 120 s).
  const std::vector<double> expected = UnjitteredDelays(20);
  for (std::uint64_t seed : {0ULL, 1ULL, 7ULL, 0xDEADBEEFULL, ~0ULL}) {
    const std::vector<std::int64_t> got = Delays(seed, 20);
    for (int i = 0; i < 20; ++i) ExpectWithinJitter(got[i], expected[i], i);
  }
}

TEST(Backoff, SpotValuesOfTheUnjitteredSequence) {
  // 1 s, 1.6 s, 2.56 s, 4.096 s; 1.6^10 s = 109.95 s is the last below the cap.
  const std::vector<double> e = UnjitteredDelays(12);
  EXPECT_DOUBLE_EQ(e[0], 1.0e9);
  EXPECT_DOUBLE_EQ(e[1], 1.6e9);
  EXPECT_NEAR(e[2], 2.56e9, 1);
  EXPECT_NEAR(e[3], 4.096e9, 1);
  EXPECT_NEAR(e[10], 109.9511627776e9, 1e3);
  EXPECT_DOUBLE_EQ(e[11], 120e9);
}

TEST(Backoff, DelaysStayCappedAtMaxBackoffPlusJitterAfterManyFailures) {
  // MAX_BACKOFF caps the un-jittered value; the jitter still applies, so every
  // delay past the cap lies in [96 s, 144 s] (grpc doc/connection-backoff.md).
  Backoff b(99);
  std::int64_t lo = INT64_MAX, hi = 0;
  for (int i = 0; i < 1000; ++i) {
    const std::int64_t d = b.NextDelay();
    if (i >= 11) {
      lo = std::min(lo, d);
      hi = std::max(hi, d);
    }
  }
  EXPECT_EQ(b.failures(), 1000u);
  EXPECT_GE(lo, 96 * kSecond - 1);
  EXPECT_LE(hi, 144 * kSecond + 1);
  // The jitter is spread over the range, not stuck at one end: 989 draws
  // uniform over ±20 % reach within 2 % of both ends (a miss has odds ~0.9^989).
  EXPECT_LT(lo, static_cast<std::int64_t>(98.4 * kSecond));
  EXPECT_GT(hi, static_cast<std::int64_t>(141.6 * kSecond));
}

TEST(Backoff, ResetStartsAgainFromTheInitialBackoff) {
  Backoff b(3);
  for (int i = 0; i < 15; ++i) b.NextDelay();
  ASSERT_GT(b.NextDelay(), 90 * kSecond);
  b.Reset();
  EXPECT_EQ(b.failures(), 0u);
  ExpectWithinJitter(b.NextDelay(), kInitialBackoffNs, 0);
  ExpectWithinJitter(b.NextDelay(), kInitialBackoffNs * kMultiplier, 1);
  EXPECT_EQ(b.failures(), 2u);
}

TEST(Backoff, SameSeedGivesTheSameDelaysAndAnotherSeedOthers) {
  // Determinism: a replayed run must retry at the same virtual times.
  EXPECT_EQ(Delays(42, 50), Delays(42, 50));
  EXPECT_NE(Delays(42, 50), Delays(43, 50));
  EXPECT_NE(Delays(MixSeed(1, 1), 50), Delays(MixSeed(1, 2), 50));
  EXPECT_EQ(MixSeed(5, 9), MixSeed(5, 9));
}

TEST(RetryGate, TransientFailureClosesTheGateForOneJitteredInitialBackoff) {
  RetryGate g(11);
  EXPECT_TRUE(g.open(0));
  BrokerStatus unavailable;
  unavailable.code = grpc::StatusCode::UNAVAILABLE;
  const std::int64_t now = 500 * kSecond;
  g.OnFailure(unavailable, now);
  ExpectWithinJitter(g.not_before() - now, kInitialBackoffNs, 0);
  EXPECT_FALSE(g.open(now));
  EXPECT_FALSE(g.open(g.not_before() - 1));
  EXPECT_TRUE(g.open(g.not_before()));
  // A second consecutive failure waits about 1.6 s; a success starts over.
  g.OnFailure(unavailable, g.not_before());
  const std::int64_t t = g.not_before();
  BrokerStatus deadline;
  deadline.code = grpc::StatusCode::DEADLINE_EXCEEDED;
  g.OnFailure(deadline, t);
  ExpectWithinJitter(g.not_before() - t, kInitialBackoffNs * kMultiplier * kMultiplier, 2);
  g.OnSuccess();
  g.OnFailure(unavailable, t);
  ExpectWithinJitter(g.not_before() - t, kInitialBackoffNs, 0);
}

TEST(RetryGate, ThrottledWithHintWaitsExactlyTheRetryAfter) {
  // RFC 9110 §10.2.3 Retry-After: wait at least the server's hint.
  RetryGate g(12);
  BrokerStatus throttled;
  throttled.code = grpc::StatusCode::RESOURCE_EXHAUSTED;
  throttled.retry_after_ns = 7 * kSecond + 3;
  g.OnFailure(throttled, 100 * kSecond);
  EXPECT_EQ(g.not_before(), 107 * kSecond + 3);
  EXPECT_FALSE(g.open(107 * kSecond + 2));
  EXPECT_TRUE(g.open(107 * kSecond + 3));
}

TEST(RetryGate, ThrottledWithoutHintFallsBackToTheBackoff) {
  RetryGate g(13);
  BrokerStatus throttled;
  throttled.code = grpc::StatusCode::RESOURCE_EXHAUSTED;
  g.OnFailure(throttled, 0);
  ExpectWithinJitter(g.not_before(), kInitialBackoffNs, 0);
}

}  // namespace
}  // namespace weir::adapter
