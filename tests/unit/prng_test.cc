#include "harness/core/prng.h"

#include <random>
#include <set>

#include <gtest/gtest.h>

namespace weir {
namespace {

// Source: values computed from the published reference implementation
// splitmix64.c (S. Vigna), seed 0; docs/references.md. No published vector.
TEST(SplitMix64, MatchesReferenceImplementationFromSeedZero) {
  SplitMix64 gen(0);
  EXPECT_EQ(gen.Next(), 0xE220A8397B1DCDAFULL);
  EXPECT_EQ(gen.Next(), 0x6E789E6AA1B965F4ULL);
  EXPECT_EQ(gen.Next(), 0x06C45D188009454FULL);
  EXPECT_EQ(gen.Next(), 0xF88BB8A8724C81ECULL);
}

// Source: FNV-1a 64-bit offset basis and the value for "a", from memory of the
// FNV reference (Fowler/Noll/Vo, draft-eastlake-fnv); docs/references.md.
TEST(Fnv1a64, MatchesKnownValues) {
  EXPECT_EQ(Fnv1a64(""), 0xCBF29CE484222325ULL);
  EXPECT_EQ(Fnv1a64("a"), 0xAF63DC4C8601EC8CULL);
}

// Tests outside the simulation seed the standard engines (shrink_test,
// run_log_test, trace_encoding_test) and expect the same numbers on every
// machine; the standard fixes them. Source: the C++ standard, [rand.predef],
// the 10000th output of a default-constructed engine; docs/references.md.
TEST(StandardEngines, GiveTheTenThousandthOutputTheStandardRequires) {
  std::mt19937 mt;
  mt.discard(9999);
  EXPECT_EQ(mt(), 4123659995u);
  std::mt19937_64 mt64;
  mt64.discard(9999);
  EXPECT_EQ(mt64(), 9981545732273789042ull);
  std::minstd_rand minstd;
  minstd.discard(9999);
  EXPECT_EQ(minstd(), 399268537u);
}

TEST(PrngStream, SameSeedAndNameGiveTheSameNumbers) {
  PrngStream a = PrngStream::Derive(42, "broker.latency");
  PrngStream b = PrngStream::Derive(42, "broker.latency");
  for (int i = 0; i < 100; ++i) EXPECT_EQ(a.NextU64(), b.NextU64());
}

TEST(PrngStream, StreamsWithDifferentNamesOrSeedsDiffer) {
  PrngStream a = PrngStream::Derive(42, "broker.latency");
  PrngStream b = PrngStream::Derive(42, "broker.duplicates");
  PrngStream c = PrngStream::Derive(43, "broker.latency");
  const std::uint64_t x = a.NextU64();
  EXPECT_NE(x, b.NextU64());
  EXPECT_NE(x, c.NextU64());
}

TEST(PrngStream, DerivationIsTheDocumentedMixingFunction) {
  PrngStream s = PrngStream::Derive(7, "workload.arrivals");
  SplitMix64 expected(Mix64(7 ^ Mix64(Fnv1a64("workload.arrivals"))));
  EXPECT_EQ(s.NextU64(), expected.Next());
}

TEST(PrngStream, UniformIntStaysInRangeAndCoversIt) {
  PrngStream s = PrngStream::Derive(1, "test");
  std::set<std::int64_t> seen;
  for (int i = 0; i < 2000; ++i) {
    const std::int64_t v = s.UniformInt(-3, 3);
    ASSERT_GE(v, -3);
    ASSERT_LE(v, 3);
    seen.insert(v);
  }
  EXPECT_EQ(seen.size(), 7u);
}

TEST(PrngStream, ExponentialHasRoughlyTheRequestedMean) {
  PrngStream s = PrngStream::Derive(1, "test");
  double sum = 0;
  const int n = 20000;
  for (int i = 0; i < n; ++i) sum += static_cast<double>(s.Exponential(1000.0));
  EXPECT_NEAR(sum / n, 1000.0, 50.0);  // standard error ~7
}

TEST(PrngStream, BernoulliExtremesDoNotDraw) {
  PrngStream a = PrngStream::Derive(9, "x");
  PrngStream b = PrngStream::Derive(9, "x");
  EXPECT_FALSE(a.Bernoulli(0.0));
  EXPECT_TRUE(a.Bernoulli(1.0));
  EXPECT_EQ(a.NextU64(), b.NextU64());
}

}  // namespace
}  // namespace weir
