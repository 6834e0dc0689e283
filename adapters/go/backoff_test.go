package adapter

import (
	"fmt"
	"math"
	"reflect"
	"testing"

	"google.golang.org/grpc/codes"
)

// Source of the policy constants: gRPC, doc/connection-backoff.md, "Proposed
// Backoff Algorithm" (docs/references.md): INITIAL_BACKOFF 1 s, MULTIPLIER
// 1.6, JITTER 0.2, MAX_BACKOFF 120 s. As in the C++ and Python adapters the
// first delay is jittered too, so it is checked as 1 s +/- 20 %.
const (
	second           = int64(1_000_000_000)
	initialBackoffNs = 1.0 * float64(second)
	multiplier       = 1.6
	jitter           = 0.2
	maxBackoffNs     = 120.0 * float64(second)
)

func unjittered(n int) []float64 {
	out, cur := make([]float64, 0, n), initialBackoffNs
	for i := 0; i < n; i++ {
		out = append(out, cur)
		cur = math.Min(cur*multiplier, maxBackoffNs)
	}
	return out
}

func delays(seed uint64, n int) []int64 {
	b := NewBackoff(seed, DefaultBackoffPolicy())
	out := make([]int64, n)
	for i := range out {
		out[i] = b.NextDelay()
	}
	return out
}

func withinJitter(t *testing.T, got int64, want float64, what string) {
	t.Helper()
	// +/- JITTER of the un-jittered value, 1 ns of slack for rounding to ns.
	if float64(got) < want*(1-jitter)-1 || float64(got) > want*(1+jitter)+1 {
		t.Errorf("%s: delay %d ns is not within 20 %% of %.0f ns", what, got, want)
	}
}

func TestDefaultPolicyIsGRPCConnectionBackoff(t *testing.T) {
	// gRPC doc/connection-backoff.md, "Proposed Backoff Algorithm".
	want := BackoffPolicy{InitialNs: 1 * second, Multiplier: 1.6, MaxNs: 120 * second, Jitter: 0.2}
	if got := DefaultBackoffPolicy(); got != want {
		t.Fatalf("DefaultBackoffPolicy() = %+v, want %+v", got, want)
	}
}

func TestEachDelayIsWithinJitterOfTheCappedExponentialSequence(t *testing.T) {
	// 20 failures reach the cap (1.6^11 s > 120 s).
	want := unjittered(20)
	for _, seed := range []uint64{0, 1, 7, 0xDEADBEEF, math.MaxUint64} {
		for i, d := range delays(seed, 20) {
			withinJitter(t, d, want[i], fmt.Sprintf("seed %d, failure %d", seed, i))
		}
	}
}

func TestDelaysStayCappedAfterManyFailures(t *testing.T) {
	// MAX_BACKOFF caps the un-jittered value; the jitter still applies, so
	// every delay past the cap lies in [96 s, 144 s].
	b := NewBackoff(99, DefaultBackoffPolicy())
	lo, hi := int64(math.MaxInt64), int64(0)
	for i := 0; i < 1000; i++ {
		d := b.NextDelay()
		if i < 11 {
			continue
		}
		if d < lo {
			lo = d
		}
		if d > hi {
			hi = d
		}
	}
	if b.Failures() != 1000 {
		t.Errorf("Failures() = %d, want 1000", b.Failures())
	}
	if lo < 96*second-1 || hi > 144*second+1 {
		t.Errorf("capped delays span [%d, %d], want within [96 s, 144 s]", lo, hi)
	}
	// Spread over the range: 989 uniform draws reach within 2 % of both ends.
	if float64(lo) >= 98.4*float64(second) || float64(hi) <= 141.6*float64(second) {
		t.Errorf("capped delays span [%d, %d]: not spread over the jitter range", lo, hi)
	}
}

func TestResetStartsAgainFromTheInitialBackoff(t *testing.T) {
	b := NewBackoff(3, DefaultBackoffPolicy())
	for i := 0; i < 15; i++ {
		b.NextDelay()
	}
	b.Reset()
	if b.Failures() != 0 {
		t.Fatalf("Failures() after Reset = %d", b.Failures())
	}
	withinJitter(t, b.NextDelay(), initialBackoffNs, "first after reset")
	withinJitter(t, b.NextDelay(), initialBackoffNs*multiplier, "second after reset")
}

func TestJitterSourceIsSplitMix64(t *testing.T) {
	// SplitMix64 from seed 0, computed from the published reference
	// implementation (splitmix64.c, S. Vigna; docs/references.md). The C++
	// and Python adapters check the same four values.
	want := []uint64{0xE220A8397B1DCDAF, 0x6E789E6AA1B965F4, 0x06C45D188009454F, 0xF88BB8A8724C81EC}
	var state uint64
	for i, w := range want {
		state += goldenGamma
		if got := mix64(state); got != w {
			t.Errorf("output %d = %#x, want %#x", i, got, w)
		}
	}
	// Backoff draws its unit from the top 53 bits of that stream.
	factor := 1.0 + jitter*(2.0*(float64(want[0]>>11)/(1<<53))-1.0)
	b := NewBackoff(0, DefaultBackoffPolicy())
	if got := b.NextDelay(); got != int64(math.Round(initialBackoffNs*factor)) {
		t.Errorf("first delay from seed 0 = %d, want %d", got, int64(math.Round(initialBackoffNs*factor)))
	}
}

func TestSameDelaysAsTheCppAndPythonAdapters(t *testing.T) {
	// Computed with the C++ adapter (adapters/cpp/src/backoff.cc) and the
	// Python one (adapters/python/weir/adapter/backoff.py), which agree: the
	// jitter of the reference connector's Pull gate in incarnation 1, and
	// of a gate seeded 0. Equal delays are what make the three references'
	// traces identical.
	if got := MixSeed(1, 1); got != 0x5c52bd4054e958c9 {
		t.Errorf("MixSeed(1, 1) = %#x, want 0x5c52bd4054e958c9", got)
	}
	want := []int64{852572282, 1844086154, 2688025684, 3292599596, 7663514220, 11606986657, 19024582466,
		23785578883, 42411166393, 78487758041, 94475095049, 129503110738, 137002289782, 138971326418}
	if got := delays(MixSeed(1, 1), len(want)); !reflect.DeepEqual(got, want) {
		t.Errorf("delays(MixSeed(1, 1)) = %v\nwant %v", got, want)
	}
	if got := delays(0, 3); !reflect.DeepEqual(got, []int64{1153324323, 1556177918, 2075068182}) {
		t.Errorf("delays(0) = %v", got)
	}
}

func TestSameSeedSameDelaysOtherSeedOthers(t *testing.T) {
	if !reflect.DeepEqual(delays(42, 50), delays(42, 50)) {
		t.Error("the same seed gave different delays")
	}
	if reflect.DeepEqual(delays(42, 50), delays(43, 50)) || reflect.DeepEqual(delays(MixSeed(1, 1), 50), delays(MixSeed(1, 2), 50)) {
		t.Error("different seeds gave the same delays")
	}
}

func TestCustomPolicyIsHonoured(t *testing.T) {
	b := NewBackoff(5, BackoffPolicy{InitialNs: 100, Multiplier: 2, MaxNs: 400, Jitter: 0})
	got := []int64{b.NextDelay(), b.NextDelay(), b.NextDelay(), b.NextDelay(), b.NextDelay()}
	if !reflect.DeepEqual(got, []int64{100, 200, 400, 400, 400}) {
		t.Errorf("delays = %v, want [100 200 400 400 400]", got)
	}
}

func TestTransientFailureClosesTheGateForOneJitteredInitialBackoff(t *testing.T) {
	g := NewRetryGate(11)
	if !g.Open(0) {
		t.Fatal("a new gate is closed")
	}
	unavailable := &BrokerError{Code: codes.Unavailable}
	now := 500 * second
	g.OnFailure(unavailable, now)
	withinJitter(t, g.NotBefore()-now, initialBackoffNs, "first failure")
	if g.Open(g.NotBefore()-1) || !g.Open(g.NotBefore()) {
		t.Errorf("the gate is not open exactly from NotBefore() = %d", g.NotBefore())
	}
	g.OnFailure(unavailable, g.NotBefore())
	t2 := g.NotBefore()
	g.OnFailure(&BrokerError{Code: codes.DeadlineExceeded}, t2)
	withinJitter(t, g.NotBefore()-t2, initialBackoffNs*multiplier*multiplier, "third failure")
	g.OnSuccess()
	g.OnFailure(unavailable, t2)
	withinJitter(t, g.NotBefore()-t2, initialBackoffNs, "after a success")
}

func TestThrottledWithHintWaitsExactlyTheRetryAfter(t *testing.T) {
	// RFC 9110, section 10.2.3 Retry-After: wait at least the server's hint.
	g := NewRetryGate(12)
	g.OnFailure(&BrokerError{Code: codes.ResourceExhausted, RetryAfterNs: 7*second + 3, HasRetryAfter: true}, 100*second)
	if g.NotBefore() != 107*second+3 {
		t.Errorf("NotBefore() = %d, want %d", g.NotBefore(), 107*second+3)
	}
}

func TestThrottledWithoutHintFallsBackToTheBackoff(t *testing.T) {
	g := NewRetryGate(13)
	g.OnFailure(&BrokerError{Code: codes.ResourceExhausted}, 0)
	withinJitter(t, g.NotBefore(), initialBackoffNs, "throttled without hint")
}

func TestHugeRetryAfterSaturates(t *testing.T) {
	g := NewRetryGate(14)
	g.OnFailure(&BrokerError{Code: codes.ResourceExhausted, RetryAfterNs: math.MaxInt64, HasRetryAfter: true}, 1<<62)
	if g.NotBefore() != math.MaxInt64 {
		t.Errorf("NotBefore() = %d, want MaxInt64", g.NotBefore())
	}
	if SaturatingAdd(math.MinInt64+1, -5) != math.MinInt64 || SaturatingAdd(3, -5) != -2 {
		t.Error("SaturatingAdd does not clamp at the bottom")
	}
}
