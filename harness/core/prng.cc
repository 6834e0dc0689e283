#include "harness/core/prng.h"

#include <cmath>

namespace weir {

std::uint64_t Mix64(std::uint64_t z) {
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
  return z ^ (z >> 31);
}

std::uint64_t Fnv1a64(std::string_view bytes) {
  std::uint64_t h = 0xCBF29CE484222325ULL;
  for (unsigned char c : bytes) {
    h ^= c;
    h *= 0x100000001B3ULL;
  }
  return h;
}

std::uint64_t SplitMix64::Next() {
  state_ += 0x9E3779B97F4A7C15ULL;
  return Mix64(state_);
}

PrngStream PrngStream::Derive(std::uint64_t seed, std::string_view name) {
  return PrngStream(Mix64(seed ^ Mix64(Fnv1a64(name))));
}

std::int64_t PrngStream::UniformInt(std::int64_t lo, std::int64_t hi) {
  const std::uint64_t span = static_cast<std::uint64_t>(hi) - static_cast<std::uint64_t>(lo);
  if (span == UINT64_MAX) return static_cast<std::int64_t>(NextU64());
  const std::uint64_t n = span + 1;
  // Lemire-style rejection keeps the result unbiased.
  const std::uint64_t limit = UINT64_MAX - (UINT64_MAX % n);
  std::uint64_t x;
  do {
    x = NextU64();
  } while (x >= limit);
  return static_cast<std::int64_t>(static_cast<std::uint64_t>(lo) + x % n);
}

double PrngStream::UniformUnit() { return static_cast<double>(NextU64() >> 11) * (1.0 / 9007199254740992.0); }

bool PrngStream::Bernoulli(double p) {
  if (p <= 0) return false;
  if (p >= 1) return true;
  return UniformUnit() < p;
}

std::int64_t PrngStream::Exponential(double mean) {
  if (mean <= 0) return 0;
  const double u = UniformUnit();
  const double x = -std::log1p(-u) * mean;
  if (x >= 9.0e18) return static_cast<std::int64_t>(9.0e18);
  return static_cast<std::int64_t>(std::llround(x));
}

}  // namespace weir
