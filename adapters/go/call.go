package adapter

import (
	"context"
	"fmt"
	"math"
	"sync"

	"google.golang.org/grpc/codes"

	weirv1 "weir/v1"
)

// DefaultResumeDelayNs: a step that calls neither ResumeAt nor Finish is
// called again this long (virtual) after its now.
const DefaultResumeDelayNs int64 = 100_000_000

// CallKind says which connector call a context belongs to.
type CallKind int

// The connector calls.
const (
	CallOpen CallKind = iota
	CallAdvance
	CallCheckpoint
	CallCommitted
	CallAssign
	CallRevoke
	CallCut
)

func (k CallKind) String() string {
	switch k {
	case CallOpen:
		return "Open"
	case CallAdvance:
		return "Advance"
	case CallCheckpoint:
		return "Checkpoint"
	case CallCommitted:
		return "Committed"
	case CallAssign:
		return "Assign"
	case CallRevoke:
		return "Revoke"
	case CallCut:
		return "Cut"
	}
	return fmt.Sprintf("CallKind(%d)", int(k))
}

// call is the state of one connector call: its virtual clock and whether it
// is still running. The clock never decreases.
type call struct {
	kind   CallKind
	broker callBroker
	mu     sync.Mutex // a source may hand the context to its own goroutines
	now    int64
	ended  bool
}

type callKey struct{}

func newCall(parent context.Context, kind CallKind, nowNs int64, stub weirv1.BrokerClient) (context.Context, *call) {
	c := &call{kind: kind, now: nowNs}
	c.broker = callBroker{stub: stub, c: c}
	return context.WithValue(parent, callKey{}, c), c
}

func (c *call) observe(nowNs int64) {
	c.mu.Lock()
	if nowNs > c.now {
		c.now = nowNs
	}
	c.mu.Unlock()
}

func (c *call) clock() int64 {
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.now
}

func (c *call) end() {
	c.mu.Lock()
	c.ended = true
	c.mu.Unlock()
}

func (c *call) usable(method string) error {
	c.mu.Lock()
	defer c.mu.Unlock()
	if c.ended {
		return &BrokerError{Method: method, Code: codes.FailedPrecondition,
			Message: fmt.Sprintf("called after the %s call it belongs to returned; a context is valid only during its call", c.kind)}
	}
	return nil
}

func callOf(ctx context.Context, what string) *call {
	c, _ := ctx.Value(callKey{}).(*call)
	if c == nil {
		panic("adapter." + what + ": the context carries no weir call; pass on the context the adapter gave the source")
	}
	return c
}

// Now returns the virtual now in ns of the call ctx belongs to. It moves
// forward as broker answers arrive. It panics when ctx does not come from
// the adapter (the adapter turns the panic into a failed call).
func Now(ctx context.Context) int64 { return callOf(ctx, "Now").clock() }

// Broker returns weir's Broker service for the call ctx belongs to. It
// panics when ctx does not come from the adapter.
func Broker(ctx context.Context) BrokerClient { return &callOf(ctx, "Broker").broker }

// Kind returns which connector call ctx belongs to. It panics when ctx does
// not come from the adapter.
func Kind(ctx context.Context) CallKind { return callOf(ctx, "Kind").kind }

// Step collects what one Advance produces. Valid only during that Advance.
type Step struct {
	records   []*weirv1.Record
	gaps      []*weirv1.Gap
	watermark *int64
	resumeAt  *int64
	finished  bool
}

// Emit adds a record produced from message messageID (queue shape).
func (s *Step) Emit(messageID uint64, eventTimeNs int64, value []byte) {
	s.records = append(s.records, &weirv1.Record{MessageId: messageID, EventTimeNs: eventTimeNs, Value: value})
}

// EmitLogRecord adds a record produced from the log record at (partition,
// offset) (log shape).
func (s *Step) EmitLogRecord(partition uint32, offset uint64, eventTimeNs int64, value []byte) {
	off := offset
	s.records = append(s.records, &weirv1.Record{Partition: partition, Offset: &off, EventTimeNs: eventTimeNs, Value: value})
}

// ReportGap says offsets [fromOffset, toOffset) of partition will never be
// emitted: retention deleted them before they could be read (log shape).
// Skipping offsets without saying so is a violation.
func (s *Step) ReportGap(partition uint32, fromOffset, toOffset uint64) {
	s.gaps = append(s.gaps, &weirv1.Gap{Partition: partition, FromOffset: fromOffset, ToOffset: toOffset})
}

// SetWatermark sets the watermark after this step's records; the last call
// wins. Without it the step reports no watermark.
func (s *Step) SetWatermark(watermarkNs int64) { w := watermarkNs; s.watermark = &w }

// ResumeAt asks for the next Advance at this virtual time (a time already
// past means now). The last of ResumeAt and Finish wins; with neither the
// next Advance comes DefaultResumeDelayNs after now.
func (s *Step) ResumeAt(atNs int64) { at := atNs; s.resumeAt = &at; s.finished = false }

// Finish says no more work will ever come from this source.
func (s *Step) Finish() { s.finished = true; s.resumeAt = nil }

// write fills response with the step; nowNs is the call's now at its end.
func (s *Step) write(nowNs int64, response *weirv1.AdvanceResponse) {
	response.Records = s.records
	response.Gaps = s.gaps
	response.WatermarkNs = s.watermark
	if s.finished {
		response.Next = &weirv1.AdvanceResponse_Finished{Finished: true}
		return
	}
	var at int64
	switch {
	case s.resumeAt != nil:
		at = *s.resumeAt
		if at < nowNs {
			at = nowNs
		}
	case nowNs > math.MaxInt64-DefaultResumeDelayNs:
		at = math.MaxInt64
	default:
		at = nowNs + DefaultResumeDelayNs
	}
	response.Next = &weirv1.AdvanceResponse_ResumeAtNs{ResumeAtNs: at}
}
