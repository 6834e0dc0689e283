// Command tide_gauges is the connector of docs/go.md, "certify your Go
// connector in ten minutes": a complete queue source for a network of tide
// gauges, small enough to read in one go. It emits each message once (the
// ids it emitted go into every checkpoint), acks an epoch's receipts only on
// its commit notice, keeps its watermark from going back (restored from the
// checkpoint) and moving while idle, and waits out throttles and transient
// errors with one retry gate per broker method. It passes the quick suite.
// (It remembers emitted ids forever; fixtures/connectors/go/reference
// forgets them after the broker's redelivery horizon.)
package main

import (
	"context"
	"encoding/binary"
	"fmt"
	"sort"

	"google.golang.org/grpc/codes"

	"weir/adapter"
	weirv1 "weir/v1"
)

type TideGauges struct {
	emitted   map[uint64]bool
	epoch     []uint64            // receipts of the open epoch
	closed    map[uint64][]uint64 // checkpoint id -> receipts of its epoch
	toAck     []uint64            // committed, not yet acked
	watermark adapter.Watermark
	idle      adapter.IdleRule
	pull, ack adapter.RetryGate
}

func (s *TideGauges) Open(ctx context.Context, info adapter.OpenInfo) error {
	*s = TideGauges{emitted: map[uint64]bool{}, closed: map[uint64][]uint64{},
		// One jitter stream per method and incarnation: replays retry alike.
		pull: adapter.NewRetryGate(adapter.MixSeed(info.Incarnation, 1)),
		ack:  adapter.NewRetryGate(adapter.MixSeed(info.Incarnation, 2))}
	var err error
	s.idle, err = adapter.NewIdleRule(adapter.DefaultIdleTimeoutNs, adapter.DefaultIdleLagNs, adapter.Now(ctx))
	if err != nil || !info.Restore {
		return err
	}
	if err := s.restore(info.CheckpointState); err != nil {
		return adapter.Errorf(codes.InvalidArgument, "checkpoint %d: %v", info.CheckpointID, err)
	}
	return nil
}

func (s *TideGauges) Advance(ctx context.Context, step *adapter.Step) error {
	s.flushAcks(ctx)
	var got []*weirv1.Delivery
	var err error
	if s.pull.Open(adapter.Now(ctx)) {
		if got, err = adapter.Broker(ctx).Pull(ctx, 64); err != nil {
			s.pull.OnFailure(err, adapter.Now(ctx)) // throttled: retry-after; else backoff
		} else {
			s.pull.OnSuccess()
		}
	}
	for _, d := range got {
		s.epoch = append(s.epoch, d.Receipt) // a redelivery's receipt is acked too
		if !s.emitted[d.MessageId] {
			s.emitted[d.MessageId] = true
			step.Emit(d.MessageId, d.EventTimeNs, d.Payload)
			s.watermark.Observe(d.EventTimeNs)
		}
	}
	s.idle.Step(adapter.Now(ctx), len(got) > 0, &s.watermark)
	s.watermark.Report(step)
	next := adapter.Now(ctx) + 500_000_000 // poll every 500 ms (virtual)
	if s.pull.NotBefore() > next {
		next = s.pull.NotBefore()
	}
	step.ResumeAt(next)
	return nil
}

func (s *TideGauges) Checkpoint(ctx context.Context, id uint64) ([]byte, error) {
	s.closed[id], s.epoch = s.epoch, nil
	return s.save(), nil
}

func (s *TideGauges) Committed(ctx context.Context, id uint64) error {
	var done []uint64
	for cp := range s.closed {
		if cp <= id {
			done = append(done, cp)
		}
	}
	sort.Slice(done, func(i, j int) bool { return done[i] < done[j] })
	for _, cp := range done {
		s.toAck = append(s.toAck, s.closed[cp]...)
		delete(s.closed, cp)
	}
	s.flushAcks(ctx)
	return nil
}

func (s *TideGauges) flushAcks(ctx context.Context) {
	if len(s.toAck) == 0 || !s.ack.Open(adapter.Now(ctx)) {
		return
	}
	if err := adapter.Broker(ctx).Ack(ctx, s.toAck); err != nil {
		s.ack.OnFailure(err, adapter.Now(ctx)) // kept, retried at a later step
		return
	}
	s.ack.OnSuccess()
	s.toAck = nil
}

// save writes the watermark (a flag and 8 bytes) and the emitted ids,
// ascending, as uvarints.
func (s *TideGauges) save() []byte {
	out := make([]byte, 9, 9+len(s.emitted)*binary.MaxVarintLen64)
	if w, ok := s.watermark.Value(); ok {
		out[0] = 1
		binary.BigEndian.PutUint64(out[1:], uint64(w))
	}
	ids := make([]uint64, 0, len(s.emitted))
	for id := range s.emitted {
		ids = append(ids, id)
	}
	sort.Slice(ids, func(i, j int) bool { return ids[i] < ids[j] })
	for _, id := range ids {
		out = binary.AppendUvarint(out, id)
	}
	return out
}

func (s *TideGauges) restore(state []byte) error {
	if len(state) < 9 {
		return fmt.Errorf("state of %d bytes, want at least 9", len(state))
	}
	if state[0] == 1 {
		s.watermark = adapter.RestoredWatermark(int64(binary.BigEndian.Uint64(state[1:])))
	}
	for rest := state[9:]; len(rest) > 0; {
		id, n := binary.Uvarint(rest)
		if n <= 0 {
			return fmt.Errorf("a message id does not parse")
		}
		s.emitted[id] = true
		rest = rest[n:]
	}
	return nil
}

func main() { adapter.Main(&TideGauges{}) }
