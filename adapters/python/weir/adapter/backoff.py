"""Retrying broker calls in virtual time without storms: capped exponential
backoff with seeded jitter, and a per-method gate that also honours the
broker's throttling hint. Mirrors adapters/cpp/include/weir/adapter/backoff.h
number for number: the same seed gives the same delays in both languages.

Determinism: the jitter comes from SplitMix64 seeded by the caller (derive the
seed from the incarnation with mix_seed, never from the wall clock, the random
module's default seeding or os.urandom), so a replayed run retries at the same
virtual times.

Example (one gate per broker method; a throttled pull does not hold back ack):
    pull_gate = RetryGate(mix_seed(info.incarnation, 1))
    if pull_gate.is_open(ctx.now):
        status, got = ctx.broker.pull(64)
        if status.ok:
            pull_gate.on_success()
        else:
            pull_gate.on_failure(status, ctx.now)
    ctx.resume_at(max(ctx.now + idle, pull_gate.not_before))
"""

from .source import INT64_MIN, clamp_int64

_MASK64 = (1 << 64) - 1
_GOLDEN_GAMMA = 0x9E3779B97F4A7C15


def _mix64(z):
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & _MASK64
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & _MASK64
    return z ^ (z >> 31)


def mix_seed(a, b):
    """Mixes two integers into a well-spread 64-bit seed (SplitMix64 finalizer),
    e.g. mix_seed(incarnation, stream) for one stream of jitter per method."""
    return _mix64((a & _MASK64) ^ _mix64((b + _GOLDEN_GAMMA) & _MASK64))


def _round_half_away(x):
    """C's llround for x >= 0 (Python's round() rounds half to even)."""
    whole = int(x)
    return whole + 1 if x - whole >= 0.5 else whole


class BackoffPolicy:
    """gRPC connection-backoff parameters by default: 1 s initial, x1.6 per
    failure, capped at 120 s before jitter, each delay scaled by
    U[1 - jitter, 1 + jitter) with jitter 0.2."""

    __slots__ = ("initial_ns", "multiplier", "max_ns", "jitter")

    def __init__(self, initial_ns=1_000_000_000, multiplier=1.6, max_ns=120_000_000_000,
                 jitter=0.2):
        self.initial_ns = initial_ns
        self.multiplier = multiplier
        self.max_ns = max_ns
        self.jitter = jitter


class Backoff:
    """Delays for a run of consecutive failures: the n-th delay (n from 0) is
    min(initial * multiplier^n, max) scaled by a jitter factor. With the default
    policy the shortest possible delay is 800 ms and the longest 144 s."""

    __slots__ = ("_policy", "_state", "failures", "_base_ns")

    def __init__(self, seed, policy=None):
        self._policy = policy or BackoffPolicy()
        self._state = seed & _MASK64
        self.failures = 0
        self._base_ns = float(self._policy.initial_ns)

    def _next_unit(self):
        """Uniform in [0, 1): the top 53 bits of the next SplitMix64 output."""
        self._state = (self._state + _GOLDEN_GAMMA) & _MASK64
        return (_mix64(self._state) >> 11) * (1.0 / (1 << 53))

    def next_delay(self):
        """The delay in ns before the next attempt, counting one more failure."""
        p = self._policy
        if self.failures > 0:
            self._base_ns = min(self._base_ns * p.multiplier, float(p.max_ns))
        self.failures += 1
        factor = 1.0 + p.jitter * (2.0 * self._next_unit() - 1.0)
        return max(0, _round_half_away(self._base_ns * factor))

    def reset(self):
        """Forgets the failures (after a success)."""
        self.failures = 0
        self._base_ns = float(self._policy.initial_ns)


class RetryGate:
    """Whether one broker method may be called now. Closed after a failure until
    the virtual time the broker's retry-after hint names (throttled with a hint)
    or the backoff picks (any other failure, or throttled without a hint)."""

    __slots__ = ("_backoff", "not_before")

    def __init__(self, seed, policy=None):
        self._backoff = Backoff(seed, policy)
        self.not_before = INT64_MIN  # the earliest virtual time of the next call

    def is_open(self, now_ns):
        return now_ns >= self.not_before

    def on_success(self):
        self._backoff.reset()

    def on_failure(self, status, now_ns):
        """REQUIRES: not status.ok; now_ns is the virtual now after the failed call."""
        if status.throttled and status.retry_after_ns is not None:
            self.not_before = clamp_int64(now_ns + max(0, status.retry_after_ns))
            return
        self.not_before = clamp_int64(now_ns + self._backoff.next_delay())
