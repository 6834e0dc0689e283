// File: prng.h
//
// Named PRNG streams. All randomness in a run comes from streams derived from
// (seed, stream name), so adding a new stream (a new fault kind, say) never
// shifts the numbers any other stream produces.
//
// Mixing function (documented, stable across versions; changing it changes
// every trace):
//   name_hash   = FNV-1a-64(name bytes)
//   stream_seed = Mix64(seed ^ Mix64(name_hash))
//   the stream is SplitMix64 started from state stream_seed
// where Mix64 is the SplitMix64 finalizer (Stafford's variant 13) and SplitMix64
// is S. Vigna's reference generator: state += 0x9E3779B97F4A7C15; return
// Mix64(state).
//
// Example:
//   PrngStream latency = PrngStream::Derive(seed, "broker.latency");
//   VirtualDuration d = latency.UniformInt(Millis(1), Millis(5));
//
// Thread safety: a stream is a plain value; use one per thread.
#pragma once

#include <cstdint>
#include <string_view>

namespace weir {

std::uint64_t Mix64(std::uint64_t z);
std::uint64_t Fnv1a64(std::string_view bytes);

class SplitMix64 {
 public:
  explicit SplitMix64(std::uint64_t state) : state_(state) {}
  std::uint64_t Next();

 private:
  std::uint64_t state_;
};

class PrngStream {
 public:
  static PrngStream Derive(std::uint64_t seed, std::string_view name);

  std::uint64_t NextU64() { return gen_.Next(); }
  // Uniform in [lo, hi]. REQUIRES: lo <= hi.
  std::int64_t UniformInt(std::int64_t lo, std::int64_t hi);
  // Uniform in [0, 1), 53 bits.
  double UniformUnit();
  // True with probability p (p <= 0: never; p >= 1: always, no draw skipped).
  bool Bernoulli(double p);
  // Exponentially distributed with this mean, rounded to an integer >= 0.
  std::int64_t Exponential(double mean);

 private:
  explicit PrngStream(std::uint64_t stream_seed) : gen_(stream_seed) {}
  SplitMix64 gen_;
};

}  // namespace weir
