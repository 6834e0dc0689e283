#include "weir/adapter/backoff.h"

#include <algorithm>
#include <cmath>

namespace weir::adapter {
namespace {

std::uint64_t Mix64(std::uint64_t z) {
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
  return z ^ (z >> 31);
}

std::int64_t SaturatingAdd(std::int64_t a, std::int64_t b) {
  std::int64_t sum;
  if (__builtin_add_overflow(a, b, &sum)) {
    return b > 0 ? std::numeric_limits<std::int64_t>::max() : std::numeric_limits<std::int64_t>::min();
  }
  return sum;
}

}  // namespace

std::uint64_t MixSeed(std::uint64_t a, std::uint64_t b) { return Mix64(a ^ Mix64(b + 0x9E3779B97F4A7C15ULL)); }

Backoff::Backoff(std::uint64_t seed, BackoffPolicy policy)
    : policy_(policy), state_(seed), base_ns_(static_cast<double>(policy.initial_ns)) {}

double Backoff::NextUnit() {
  state_ += 0x9E3779B97F4A7C15ULL;
  return static_cast<double>(Mix64(state_) >> 11) * 0x1.0p-53;
}

std::int64_t Backoff::NextDelay() {
  if (failures_ > 0) {
    base_ns_ = std::min(base_ns_ * policy_.multiplier, static_cast<double>(policy_.max_ns));
  }
  ++failures_;
  const double factor = 1.0 + policy_.jitter * (2.0 * NextUnit() - 1.0);
  return std::max<std::int64_t>(0, std::llround(base_ns_ * factor));
}

void Backoff::Reset() {
  failures_ = 0;
  base_ns_ = static_cast<double>(policy_.initial_ns);
}

RetryGate::RetryGate(std::uint64_t seed, BackoffPolicy policy) : backoff_(seed, policy) {}

void RetryGate::OnSuccess() { backoff_.Reset(); }

void RetryGate::OnFailure(const BrokerStatus& status, std::int64_t now_ns) {
  if (status.throttled() && status.retry_after_ns.has_value()) {
    not_before_ns_ = SaturatingAdd(now_ns, std::max<std::int64_t>(0, *status.retry_after_ns));
    return;
  }
  not_before_ns_ = SaturatingAdd(now_ns, backoff_.NextDelay());
}

}  // namespace weir::adapter
