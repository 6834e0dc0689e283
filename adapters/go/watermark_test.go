package adapter

import (
	"math"
	"math/rand"
	"testing"
)

// Facts checked (docs/references.md, "Facts of the trade"): a watermark never
// moves backwards (Akidau et al., "The Dataflow Model", PVLDB 8(12), 2015,
// section 1.3); one that follows the largest event time seen never decreases
// even when events arrive out of order (common practice); a source with no
// new input must still move its watermark forward (common practice).

func value(t *testing.T, w Watermark) int64 {
	t.Helper()
	v, ok := w.Value()
	if !ok {
		t.Fatal("watermark unset")
	}
	return v
}

func TestWatermarkStartsUnsetOrRestored(t *testing.T) {
	if _, ok := (Watermark{}).Value(); ok {
		t.Error("the zero Watermark is set")
	}
	if v := value(t, RestoredWatermark(42)); v != 42 {
		t.Errorf("restored = %d", v)
	}
}

func TestWatermarkFollowsTheLargestEventTimeEvenOutOfOrder(t *testing.T) {
	var w Watermark
	for _, c := range [][2]int64{{5, 5}, {9, 9}, {7, 9}, {-3, 9}, {9, 9}, {12, 12}} {
		w.Observe(c[0])
		if v := value(t, w); v != c[1] {
			t.Errorf("after observing %d: %d, want %d", c[0], v, c[1])
		}
	}
}

func TestWatermarkIsTheRunningMaximum(t *testing.T) {
	// Model check against the maximum over random out-of-order event times.
	rng := rand.New(rand.NewSource(7))
	var w Watermark
	max := int64(math.MinInt64)
	for i := 0; i < 2000; i++ {
		e := rng.Int63n(2_000_000_000_000) - 1_000_000_000_000
		if e > max {
			max = e
		}
		w.Observe(e)
		if v := value(t, w); v != max {
			t.Fatalf("step %d: %d, want %d", i, v, max)
		}
	}
}

func TestRestoredWatermarkIsNotLoweredByOlderEvents(t *testing.T) {
	w := RestoredWatermark(100)
	w.Observe(50)
	w.AdvanceTo(60)
	if v := value(t, w); v != 100 {
		t.Errorf("%d, want 100", v)
	}
	w.AdvanceTo(150)
	if v := value(t, w); v != 150 {
		t.Errorf("%d, want 150", v)
	}
}

func TestWatermarkReportSetsTheStepOnlyWhenSet(t *testing.T) {
	var s Step
	(Watermark{}).Report(&s)
	if s.watermark != nil {
		t.Error("an unset watermark was reported")
	}
	RestoredWatermark(8).Report(&s)
	if s.watermark == nil || *s.watermark != 8 {
		t.Error("a set watermark was not reported")
	}
}

func newRule(t *testing.T, timeout, lag, now int64) IdleRule {
	t.Helper()
	r, err := NewIdleRule(timeout, lag, now)
	if err != nil {
		t.Fatal(err)
	}
	return r
}

func TestIdleRuleNotIdleBeforeTheTimeout(t *testing.T) {
	r, w := newRule(t, 10*second, 5*second, 0), RestoredWatermark(1)
	if r.Step(10*second-1, false, &w) || value(t, w) != 1 {
		t.Error("advanced before the timeout")
	}
}

func TestIdleAtTheTimeoutMovesTheWatermarkToNowMinusLag(t *testing.T) {
	r, w := newRule(t, 10*second, 5*second, 0), RestoredWatermark(1)
	if !r.Step(10*second, false, &w) || value(t, w) != 5*second {
		t.Errorf("at the timeout: %d, want 5 s", value(t, w))
	}
	r.Step(17*second, false, &w)
	if value(t, w) != 12*second {
		t.Errorf("later idle step: %d, want 12 s", value(t, w))
	}
}

func TestIdleGivesAnUnsetWatermarkAValue(t *testing.T) {
	r, w := newRule(t, second, 0, 3*second), Watermark{}
	r.Step(4*second, false, &w)
	if value(t, w) != 4*second {
		t.Errorf("%d, want 4 s", value(t, w))
	}
}

func TestInputRestartsTheIdleClock(t *testing.T) {
	r, w := newRule(t, 10*second, second, 0), RestoredWatermark(0)
	if r.Step(30*second, true, &w) || value(t, w) != 0 {
		t.Error("a step with input advanced the watermark")
	}
	if r.Idle(39*second) || r.Step(39*second, false, &w) {
		t.Error("idle before the timeout since the last input")
	}
	if !r.Step(40*second, false, &w) || value(t, w) != 39*second {
		t.Errorf("%d, want 39 s", value(t, w))
	}
}

func TestIdleNeverLowersAWatermarkAheadOfNowMinusLag(t *testing.T) {
	r, w := newRule(t, second, 5*second, 0), RestoredWatermark(100*second)
	r.Step(20*second, false, &w)
	if value(t, w) != 100*second {
		t.Errorf("%d, want 100 s", value(t, w))
	}
}

func TestIdleStartResetsTheClock(t *testing.T) {
	r, w := newRule(t, 10*second, 0, 0), Watermark{}
	r.Start(100 * second)
	if r.Step(105*second, false, &w) {
		t.Error("idle 5 s after Start with a 10 s timeout")
	}
}

func TestIdleLagPastTheRangeSaturates(t *testing.T) {
	r, w := newRule(t, 0, math.MaxInt64, -(1<<62)), Watermark{}
	r.Step(-(1 << 62), false, &w)
	if value(t, w) != math.MinInt64 {
		t.Errorf("%d, want MinInt64", value(t, w))
	}
}

func TestNegativeIdleSettingsAreAnError(t *testing.T) {
	if _, err := NewIdleRule(-1, 0, 0); err == nil {
		t.Error("a negative timeout was accepted")
	}
}
