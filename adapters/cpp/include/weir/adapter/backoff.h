// File: backoff.h
//
// Retrying broker calls in virtual time without storms: capped exponential
// backoff with seeded jitter, and a per-method gate that also honours the
// broker's throttling hint.
//
// Determinism: the jitter comes from SplitMix64 seeded by the caller (derive the
// seed from the incarnation, never from a wall clock or random_device), so a
// replayed run retries at the same virtual times.
//
// Example (one gate per broker method; a throttled Pull does not hold back Ack):
//   RetryGate pull_gate(MixSeed(info.incarnation, 1));
//   if (pull_gate.open(ctx.now())) {
//     BrokerStatus s = ctx.broker().Pull(64, &got);
//     if (s.ok()) pull_gate.OnSuccess(); else pull_gate.OnFailure(s, ctx.now());
//   }
//   ctx.ResumeAt(std::max(ctx.now() + idle, pull_gate.not_before()));
//
// Thread safety: plain values; use each from one thread.
#pragma once

#include <cstdint>
#include <limits>

#include "weir/adapter/source.h"

namespace weir::adapter {

struct BackoffPolicy {
  std::int64_t initial_ns = 1'000'000'000;  // delay after the first failure
  double multiplier = 1.6;                  // growth per further consecutive failure
  std::int64_t max_ns = 120'000'000'000;    // cap on the un-jittered delay
  double jitter = 0.2;                      // each delay is scaled by U[1 - jitter, 1 + jitter)
};

// Mixes two integers into a well-spread seed (SplitMix64 finalizer), e.g.
// MixSeed(incarnation, stream) for one stream of jitter per broker method.
std::uint64_t MixSeed(std::uint64_t a, std::uint64_t b);

// Delays for a run of consecutive failures: the n-th delay (n from 0) is
// min(initial * multiplier^n, max) scaled by a jitter factor, as in gRPC's
// connection backoff. With the default policy the shortest possible delay is
// 800 ms and the longest 144 s.
class Backoff {
 public:
  explicit Backoff(std::uint64_t seed, BackoffPolicy policy = {});

  // The delay before the next attempt, counting one more consecutive failure.
  std::int64_t NextDelay();
  // Forgets the failures (after a success).
  void Reset();
  std::uint32_t failures() const { return failures_; }

 private:
  double NextUnit();  // uniform in [0, 1)

  BackoffPolicy policy_;
  std::uint64_t state_;
  std::uint32_t failures_ = 0;
  double base_ns_;
};

// Whether one broker method may be called now. Closed after a failure until
// the virtual time the broker's retry-after hint names (throttled with a hint)
// or the backoff picks (any other failure, or throttled without a hint).
class RetryGate {
 public:
  explicit RetryGate(std::uint64_t seed, BackoffPolicy policy = {});

  bool open(std::int64_t now_ns) const { return now_ns >= not_before_ns_; }
  // The earliest virtual time the method may be called again.
  std::int64_t not_before() const { return not_before_ns_; }

  void OnSuccess();
  // REQUIRES: !status.ok(); now_ns is the virtual now after the failed call.
  void OnFailure(const BrokerStatus& status, std::int64_t now_ns);

 private:
  Backoff backoff_;
  std::int64_t not_before_ns_ = std::numeric_limits<std::int64_t>::min();
};

}  // namespace weir::adapter
