package adapter

import "math"

// Retrying broker calls in virtual time without storms: capped exponential
// backoff with seeded jitter, and a per-method gate that also honours the
// broker's throttling hint. Number for number the C++ adapter's
// (adapters/cpp/include/weir/adapter/backoff.h) and the Python one's: the
// same seed gives the same delays in all three.
//
// Determinism: the jitter comes from SplitMix64 seeded by the caller (derive
// the seed from the incarnation with MixSeed, never from the wall clock or
// math/rand's default source), so a replayed run retries at the same
// virtual times.

const goldenGamma = 0x9E3779B97F4A7C15

func mix64(z uint64) uint64 {
	z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9
	z = (z ^ (z >> 27)) * 0x94D049BB133111EB
	return z ^ (z >> 31)
}

// MixSeed mixes two integers into a well-spread seed (SplitMix64
// finalizer), e.g. MixSeed(incarnation, stream) for one stream of jitter per
// broker method.
func MixSeed(a, b uint64) uint64 { return mix64(a ^ mix64(b+goldenGamma)) }

// SaturatingAdd returns a + b clamped to the int64 range.
func SaturatingAdd(a, b int64) int64 {
	sum := a + b
	if b > 0 && sum < a {
		return math.MaxInt64
	}
	if b < 0 && sum > a {
		return math.MinInt64
	}
	return sum
}

// BackoffPolicy holds the backoff's parameters. DefaultBackoffPolicy gives
// gRPC's connection-backoff values.
type BackoffPolicy struct {
	InitialNs  int64   // delay after the first failure
	Multiplier float64 // growth per further consecutive failure
	MaxNs      int64   // cap on the un-jittered delay
	Jitter     float64 // each delay is scaled by U[1 - Jitter, 1 + Jitter)
}

// DefaultBackoffPolicy: 1 s initial, x1.6 per failure, capped at 120 s
// before jitter, +/-20 % jitter.
func DefaultBackoffPolicy() BackoffPolicy {
	return BackoffPolicy{InitialNs: 1_000_000_000, Multiplier: 1.6, MaxNs: 120_000_000_000, Jitter: 0.2}
}

// Backoff gives the delays for a run of consecutive failures: the n-th delay
// (n from 0) is min(initial * multiplier^n, max) scaled by a jitter factor,
// as in gRPC's connection backoff. With the default policy the shortest
// possible delay is 800 ms and the longest 144 s.
type Backoff struct {
	policy   BackoffPolicy
	state    uint64
	failures uint32
	baseNs   float64
}

// NewBackoff returns a backoff whose jitter is drawn from SplitMix64 seeded
// with seed.
func NewBackoff(seed uint64, policy BackoffPolicy) Backoff {
	return Backoff{policy: policy, state: seed, baseNs: float64(policy.InitialNs)}
}

// nextUnit is uniform in [0, 1): the top 53 bits of the next SplitMix64 output.
func (b *Backoff) nextUnit() float64 {
	b.state += goldenGamma
	return float64(mix64(b.state)>>11) * (1.0 / (1 << 53))
}

// NextDelay returns the delay in ns before the next attempt, counting one
// more consecutive failure.
func (b *Backoff) NextDelay() int64 {
	if b.failures > 0 {
		b.baseNs = math.Min(float64(b.baseNs*b.policy.Multiplier), float64(b.policy.MaxNs))
	}
	b.failures++
	// The explicit conversions keep the compiler from fusing multiply and
	// add, so the delays are the C++ and Python adapters' to the last bit.
	factor := 1.0 + float64(b.policy.Jitter*float64(2.0*b.nextUnit()-1.0))
	d := math.Round(float64(b.baseNs * factor)) // half away from zero, as C's llround
	if d <= 0 {
		return 0
	}
	if d >= math.MaxInt64 {
		return math.MaxInt64
	}
	return int64(d)
}

// Reset forgets the failures (after a success).
func (b *Backoff) Reset() {
	b.failures = 0
	b.baseNs = float64(b.policy.InitialNs)
}

// Failures returns the count of consecutive failures so far.
func (b *Backoff) Failures() uint32 { return b.failures }

// RetryGate says whether one broker method may be called now. It is closed
// after a failure until the virtual time the broker's retry-after hint names
// (throttled with a hint) or the backoff picks (any other failure, or
// throttled without a hint).
//
// Example (one gate per broker method; a throttled Pull does not hold back Ack):
//
//	pull := adapter.NewRetryGate(adapter.MixSeed(info.Incarnation, 1))
//	...
//	if pull.Open(adapter.Now(ctx)) {
//		got, err := adapter.Broker(ctx).Pull(ctx, 64)
//		if err != nil {
//			pull.OnFailure(err, adapter.Now(ctx))
//		} else {
//			pull.OnSuccess()
//		}
//	}
//	next := adapter.Now(ctx) + idle
//	if pull.NotBefore() > next {
//		next = pull.NotBefore()
//	}
//	step.ResumeAt(next)
type RetryGate struct {
	backoff     Backoff
	notBeforeNs int64
}

// NewRetryGate returns an open gate with the default backoff policy.
func NewRetryGate(seed uint64) RetryGate { return NewRetryGateWith(seed, DefaultBackoffPolicy()) }

// NewRetryGateWith returns an open gate with the given backoff policy.
func NewRetryGateWith(seed uint64, policy BackoffPolicy) RetryGate {
	return RetryGate{backoff: NewBackoff(seed, policy), notBeforeNs: math.MinInt64}
}

// Open reports whether the method may be called at nowNs.
func (g *RetryGate) Open(nowNs int64) bool { return nowNs >= g.notBeforeNs }

// NotBefore returns the earliest virtual time the method may be called again.
func (g *RetryGate) NotBefore() int64 { return g.notBeforeNs }

// OnSuccess resets the backoff.
func (g *RetryGate) OnSuccess() { g.backoff.Reset() }

// OnFailure closes the gate after the failed call err (a *BrokerError, or
// any other error, which counts as transient); nowNs is the virtual now
// after the failed call.
func (g *RetryGate) OnFailure(err error, nowNs int64) {
	if be := AsBrokerError(err); be != nil && be.Throttled() && be.HasRetryAfter {
		wait := be.RetryAfterNs
		if wait < 0 {
			wait = 0
		}
		g.notBeforeNs = SaturatingAdd(nowNs, wait)
		return
	}
	g.notBeforeNs = SaturatingAdd(nowNs, g.backoff.NextDelay())
}
