package adapter_test

import (
	"context"
	"fmt"

	"google.golang.org/grpc"

	"weir/adapter"
	weirv1 "weir/v1"
)

// Scans is a complete queue source for a fleet of parcel scanners, small
// enough to read in one go: it emits each message once, acks an epoch's
// receipts only on its commit notice, keeps its watermark from going back
// and moving while idle, and waits out throttles and transient errors. (It
// keeps its dedup memory forever; fixtures/connectors/go/reference forgets
// ids after the redelivery horizon.)
type Scans struct {
	emitted   map[uint64]bool
	epoch     []uint64            // receipts of the open epoch
	closed    map[uint64][]uint64 // checkpoint id -> receipts
	toAck     []uint64
	watermark adapter.Watermark
	idle      adapter.IdleRule
	pull, ack adapter.RetryGate
}

func (s *Scans) Open(ctx context.Context, info adapter.OpenInfo) error {
	*s = Scans{emitted: map[uint64]bool{}, closed: map[uint64][]uint64{},
		pull: adapter.NewRetryGate(adapter.MixSeed(info.Incarnation, 1)),
		ack:  adapter.NewRetryGate(adapter.MixSeed(info.Incarnation, 2))}
	var err error
	s.idle, err = adapter.NewIdleRule(adapter.DefaultIdleTimeoutNs, adapter.DefaultIdleLagNs, adapter.Now(ctx))
	if err != nil || !info.Restore {
		return err
	}
	return s.restore(info.CheckpointState) // ids and watermark, as Checkpoint wrote them
}

func (s *Scans) Advance(ctx context.Context, step *adapter.Step) error {
	s.flushAcks(ctx)
	var got []*weirv1.Delivery
	if s.pull.Open(adapter.Now(ctx)) {
		var err error
		if got, err = adapter.Broker(ctx).Pull(ctx, 64); err != nil {
			s.pull.OnFailure(err, adapter.Now(ctx))
		} else {
			s.pull.OnSuccess()
		}
	}
	for _, d := range got {
		s.epoch = append(s.epoch, d.Receipt)
		if !s.emitted[d.MessageId] {
			s.emitted[d.MessageId] = true
			step.Emit(d.MessageId, d.EventTimeNs, d.Payload)
			s.watermark.Observe(d.EventTimeNs)
		}
	}
	s.idle.Step(adapter.Now(ctx), len(got) > 0, &s.watermark)
	s.watermark.Report(step)
	next := adapter.Now(ctx) + 500_000_000
	if s.pull.NotBefore() > next {
		next = s.pull.NotBefore()
	}
	step.ResumeAt(next)
	return nil
}

func (s *Scans) Checkpoint(ctx context.Context, id uint64) ([]byte, error) {
	s.closed[id], s.epoch = s.epoch, nil
	return s.save(), nil
}

func (s *Scans) Committed(ctx context.Context, id uint64) error {
	for cp, receipts := range s.closed {
		if cp <= id {
			s.toAck = append(s.toAck, receipts...)
			delete(s.closed, cp)
		}
	}
	s.flushAcks(ctx)
	return nil
}

func (s *Scans) flushAcks(ctx context.Context) {
	if len(s.toAck) == 0 || !s.ack.Open(adapter.Now(ctx)) {
		return
	}
	if err := adapter.Broker(ctx).Ack(ctx, s.toAck); err != nil {
		s.ack.OnFailure(err, adapter.Now(ctx)) // kept; retried at a later step
		return
	}
	s.ack.OnSuccess()
	s.toAck = nil
}

// save and restore would encode the emitted ids and the watermark (with
// Protobuf, say); left out here.
func (s *Scans) save() []byte               { return nil }
func (s *Scans) restore(state []byte) error { return nil }

// A stand-in for weir's broker, enough for the example: two scans at
// virtual 2 s, then nothing.
type twoScans struct {
	weirv1.BrokerClient // the methods the example does not call
	pulled              bool
}

func (b *twoScans) Pull(ctx context.Context, r *weirv1.PullRequest, _ ...grpc.CallOption) (*weirv1.PullResponse, error) {
	out := &weirv1.PullResponse{NowNs: 2_000_000_000}
	if !b.pulled {
		b.pulled = true
		out.Deliveries = []*weirv1.Delivery{
			{MessageId: 1, Receipt: 11, EventTimeNs: 1_500_000_000, Payload: []byte("parcel 1 at dock 4")},
			{MessageId: 2, Receipt: 12, EventTimeNs: 1_200_000_000, Payload: []byte("parcel 2 at dock 4")},
		}
	}
	return out, nil
}

func (b *twoScans) Ack(ctx context.Context, r *weirv1.AckRequest, _ ...grpc.CallOption) (*weirv1.AckResponse, error) {
	fmt.Println("acked receipts", r.Receipts)
	return &weirv1.AckResponse{NowNs: 2_000_000_000}, nil
}

// A connector's main is adapter.Main(&Scans{}); weir then drives it over
// gRPC. Here the Connector service is driven by hand, as weir would.
func Example() {
	ctx := context.Background()
	connector := adapter.NewConnectorServer(&Scans{}, &twoScans{})
	if _, err := connector.Open(ctx, &weirv1.OpenRequest{NowNs: 1_000_000_000, Incarnation: 1}); err != nil {
		fmt.Println(err)
		return
	}
	step, _ := connector.Advance(ctx, &weirv1.AdvanceRequest{NowNs: 1_000_000_000, Step: 1})
	for _, r := range step.Records {
		fmt.Printf("record of message %d: %s\n", r.MessageId, r.Value)
	}
	fmt.Println("watermark", step.GetWatermarkNs(), "next step at", step.GetResumeAtNs())
	connector.Checkpoint(ctx, &weirv1.CheckpointRequest{NowNs: 2_500_000_000, CheckpointId: 1})
	connector.Committed(ctx, &weirv1.CommittedRequest{NowNs: 3_000_000_000, CheckpointId: 1})
	// Output:
	// record of message 1: parcel 1 at dock 4
	// record of message 2: parcel 2 at dock 4
	// watermark 1500000000 next step at 2500000000
	// acked receipts [11 12]
}
