package adapter

import "fmt"

// Event-time watermark helpers, written once so connectors do not get them
// wrong. The same semantics as the C++ reference's --idle-timeout-ms and
// --idle-lag-ms (fixtures/connectors/reference_source.h) and the Python
// adapter's Watermark and IdleRule.

// Watermark follows the largest event time observed and never decreases,
// even when events arrive out of order (a watermark that followed the latest
// event time would move back on the first out-of-order event). The zero
// value is unset. Restore it from the checkpoint (RestoredWatermark): a
// restored incarnation must not report less than the watermark committed
// with its checkpoint.
type Watermark struct {
	value int64
	set   bool
}

// RestoredWatermark returns a watermark at ns.
func RestoredWatermark(ns int64) Watermark { return Watermark{value: ns, set: true} }

// Observe takes one event time into account; lower values change nothing.
func (w *Watermark) Observe(eventTimeNs int64) {
	if !w.set || eventTimeNs > w.value {
		w.value, w.set = eventTimeNs, true
	}
}

// AdvanceTo raises the watermark to ns if that is higher (idle advance).
func (w *Watermark) AdvanceTo(ns int64) { w.Observe(ns) }

// Value returns the watermark and whether it is set (false before the first
// event time).
func (w Watermark) Value() (int64, bool) { return w.value, w.set }

// Report sets the step's watermark when there is one.
func (w Watermark) Report(step *Step) {
	if w.set {
		step.SetWatermark(w.value)
	}
}

// Default idle rule of the C++ reference connector: 10 s without input counts
// as idle; while idle the watermark follows now - 5 s.
const (
	DefaultIdleTimeoutNs int64 = 10_000_000_000
	DefaultIdleLagNs     int64 = 5_000_000_000
)

// IdleRule moves the watermark while no input arrives: a source with no new
// input must still move its watermark forward, or windows downstream never
// close. After TimeoutNs of virtual time without input it raises the
// watermark to now - LagNs (never lowers it). LagNs must cover the source's
// largest event-time skew, or records arriving after the gap are late; to
// satisfy a profile's stall rule, pick TimeoutNs <= the profile's
// idle_timeout_ms and LagNs <= its idle_max_lag_ms, and poll at least that
// often while idle.
type IdleRule struct {
	timeoutNs   int64
	lagNs       int64
	lastInputNs int64
}

// NewIdleRule returns a rule whose idle clock starts at nowNs. Negative
// settings are an error.
func NewIdleRule(timeoutNs, lagNs, nowNs int64) (IdleRule, error) {
	if timeoutNs < 0 || lagNs < 0 {
		return IdleRule{}, fmt.Errorf("adapter.NewIdleRule: timeoutNs (%d) and lagNs (%d) must be >= 0", timeoutNs, lagNs)
	}
	return IdleRule{timeoutNs: timeoutNs, lagNs: lagNs, lastInputNs: nowNs}, nil
}

// Start restarts the idle clock, e.g. in Open: no input yet as of nowNs.
func (r *IdleRule) Start(nowNs int64) { r.lastInputNs = nowNs }

// Idle reports whether TimeoutNs has passed since the last input.
func (r *IdleRule) Idle(nowNs int64) bool { return nowNs-r.lastInputNs >= r.timeoutNs }

// Step is called once per step after handling its input. A step with input
// restarts the idle clock; a step without input, once idle, raises w to now -
// LagNs. It reports whether it advanced (or tried to advance) the watermark.
func (r *IdleRule) Step(nowNs int64, hadInput bool, w *Watermark) bool {
	if hadInput {
		r.lastInputNs = nowNs
		return false
	}
	if !r.Idle(nowNs) {
		return false
	}
	w.AdvanceTo(SaturatingAdd(nowNs, -r.lagNs))
	return true
}
