package adapter

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"math"
	"net"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	anypb "github.com/golang/protobuf/ptypes/any"
	spb "google.golang.org/genproto/googleapis/rpc/status"
	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	weirv1 "weir/v1"
)

// These tests serve sources over real gRPC on loopback and Unix sockets,
// against a scripted broker in the same process: no child process.

// scriptedBroker answers Pull with two deliveries at now 5 s, fails Ack the
// way weir throttles: RESOURCE_EXHAUSTED with "weir-now-ns" and
// "retry-after-ms" in the trailing metadata and a RetryAfter in the status
// details, and fails Read below offset 77 OUT_OF_RANGE with the first retained
// offset in the status details only (proto/weir/v1/broker.proto).
type scriptedBroker struct {
	weirv1.UnimplementedBrokerServer
}

// withDetail is a status error whose details are one Any packing detail, the
// way weir sends them: a whole google.rpc.Status with the call's code and
// message (proto/weir/v1/status_details.proto); type URL "type.googleapis.com/"
// and the message's full name, as every protobuf runtime packs an Any.
func withDetail(code codes.Code, message string, detail proto.Message) error {
	value, err := proto.Marshal(detail)
	if err != nil {
		panic(err)
	}
	url := "type.googleapis.com/" + string(detail.ProtoReflect().Descriptor().FullName())
	return status.FromProto(&spb.Status{Code: int32(code), Message: message,
		Details: []*anypb.Any{{TypeUrl: url, Value: value}}}).Err()
}

func (scriptedBroker) Pull(ctx context.Context, r *weirv1.PullRequest) (*weirv1.PullResponse, error) {
	return &weirv1.PullResponse{NowNs: 5 * second, Deliveries: []*weirv1.Delivery{
		{MessageId: 7, Receipt: 70, EventTimeNs: 3 * second, Payload: []byte("buoy 7")},
		{MessageId: 8, Receipt: 80, EventTimeNs: 2 * second, Payload: []byte("buoy 8")},
	}}, nil
}

func (scriptedBroker) Ack(ctx context.Context, r *weirv1.AckRequest) (*weirv1.AckResponse, error) {
	grpc.SetTrailer(ctx, metadata.Pairs(nowKey, "6000000000", retryAfterKey, "250"))
	return nil, withDetail(codes.ResourceExhausted, "throttled: 4 calls/s", &weirv1.RetryAfter{RetryAfterNs: 249_000_001})
}

func (scriptedBroker) Read(ctx context.Context, r *weirv1.ReadRequest) (*weirv1.ReadResponse, error) {
	grpc.SetTrailer(ctx, metadata.Pairs(nowKey, "7000000000"))
	return nil, withDetail(codes.OutOfRange, "first retained offset 77",
		&weirv1.OffsetOutOfRange{Partition: r.Partition, FirstRetainedOffset: 77})
}

// funcSource is a Source whose calls are the functions given.
type funcSource struct {
	advance func(ctx context.Context, step *Step) error
	open    func(ctx context.Context, info OpenInfo) error
	state   []byte
}

func (s *funcSource) Open(ctx context.Context, info OpenInfo) error {
	if s.open != nil {
		return s.open(ctx, info)
	}
	return nil
}
func (s *funcSource) Advance(ctx context.Context, step *Step) error { return s.advance(ctx, step) }
func (s *funcSource) Checkpoint(ctx context.Context, id uint64) ([]byte, error) {
	return s.state, nil
}
func (s *funcSource) Committed(ctx context.Context, id uint64) error { return nil }

type logSource struct{ funcSource }

func (logSource) ResumePoints() []ResumePoint { return []ResumePoint{{Partition: 2, NextOffset: 40}} }

// serveForTest serves src with a scripted broker; it returns a Connector
// client and the address announced on the ready descriptor.
func serveForTest(t *testing.T, src Source, listen string) (weirv1.ConnectorClient, string) {
	t.Helper()
	brokerListener, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	broker := NewGRPCServer()
	weirv1.RegisterBrokerServer(broker, scriptedBroker{})
	go broker.Serve(brokerListener)
	t.Cleanup(broker.Stop)

	r, w, err := os.Pipe()
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	// Serve closes the ready descriptor it is given, so it gets a copy of its
	// own: handing it w's would close that number twice (w's finalizer closes
	// it again once w is collected, whatever file has reused it by then).
	readyFD, err := syscall.Dup(int(w.Fd()))
	w.Close()
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	served := make(chan error, 1)
	go func() {
		served <- Serve(ctx, src, Config{BrokerAddress: brokerListener.Addr().String(), ListenAddress: listen, ReadyFD: readyFD})
	}()
	t.Cleanup(func() {
		cancel()
		select {
		case err := <-served:
			if err != nil {
				t.Errorf("Serve: %v", err)
			}
		case <-time.After(10 * time.Second):
			t.Error("Serve did not return within 10 s of its context's end")
		}
	})
	line, err := bufio.NewReader(r).ReadString('\n')
	if err != nil {
		t.Fatalf("reading the ready descriptor: %v", err)
	}
	address := strings.TrimSuffix(line, "\n")
	conn, err := DialBroker(address) // weir's addresses all dial the same way
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { conn.Close() })
	return weirv1.NewConnectorClient(conn), address
}

func bounded(t *testing.T) context.Context {
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	t.Cleanup(cancel)
	return ctx
}

func TestAdvanceEmitsAndTheClockFollowsTheBroker(t *testing.T) {
	var nowBefore, nowAfterPull, nowAfterAck int64
	var ackErr error
	src := &funcSource{advance: func(ctx context.Context, step *Step) error {
		nowBefore = Now(ctx)
		got, err := Broker(ctx).Pull(ctx, 64)
		if err != nil {
			return err
		}
		nowAfterPull = Now(ctx)
		var w Watermark
		for _, d := range got {
			step.Emit(d.MessageId, d.EventTimeNs, d.Payload)
			w.Observe(d.EventTimeNs)
		}
		w.Report(step)
		ackErr = Broker(ctx).Ack(ctx, []uint64{70})
		nowAfterAck = Now(ctx)
		step.ResumeAt(Now(ctx) - 1) // in the past: the adapter answers now
		return nil
	}}
	client, address := serveForTest(t, src, "127.0.0.1:0")
	if !strings.HasPrefix(address, "127.0.0.1:") || address == "127.0.0.1:0" {
		t.Errorf("announced %q, want 127.0.0.1 and the port the OS picked", address)
	}
	ctx := bounded(t)
	if _, err := client.Open(ctx, &weirv1.OpenRequest{NowNs: 0, Incarnation: 1}); err != nil {
		t.Fatal(err)
	}
	resp, err := client.Advance(ctx, &weirv1.AdvanceRequest{NowNs: 4 * second, Step: 1})
	if err != nil {
		t.Fatal(err)
	}
	if nowBefore != 4*second || nowAfterPull != 5*second || nowAfterAck != 6*second {
		t.Errorf("clock %d, %d, %d; want 4 s from the request, 5 s after Pull, 6 s after the failed Ack",
			nowBefore, nowAfterPull, nowAfterAck)
	}
	if len(resp.Records) != 2 || resp.Records[0].MessageId != 7 || string(resp.Records[1].Value) != "buoy 8" {
		t.Errorf("records %v", resp.Records)
	}
	if resp.WatermarkNs == nil || *resp.WatermarkNs != 3*second {
		t.Errorf("watermark %v, want 3 s (the largest event time)", resp.WatermarkNs)
	}
	if resp.GetResumeAtNs() != 6*second {
		t.Errorf("resume at %d, want now (6 s)", resp.GetResumeAtNs())
	}
	be := AsBrokerError(ackErr)
	if be == nil || !be.Throttled() || !be.HasRetryAfter || be.RetryAfterNs != 250_000_000 || !IsThrottled(ackErr) {
		t.Errorf("Ack error %#v, want throttled with retry-after 250 ms (the trailer's)", be)
	}
	if be != nil && be.Message != "throttled: 4 calls/s" {
		t.Errorf("Ack error message %q, want the status's", be.Message)
	}
}

func TestAnOutOfRangeReadTakesTheFirstRetainedOffsetFromTheStatusDetails(t *testing.T) {
	var readErr error
	var nowAfterRead int64
	src := &funcSource{advance: func(ctx context.Context, step *Step) error {
		_, readErr = Broker(ctx).Read(ctx, 3, 12, ReadOptions{})
		nowAfterRead = Now(ctx)
		return nil
	}}
	client, _ := serveForTest(t, src, "127.0.0.1:0")
	if _, err := client.Advance(bounded(t), &weirv1.AdvanceRequest{NowNs: 4 * second}); err != nil {
		t.Fatal(err)
	}
	be := AsBrokerError(readErr)
	if be == nil || !be.OutOfRange() || be.Message != "first retained offset 77" || !be.HasFirstRetainedOffset ||
		be.FirstRetainedOffset != 77 || nowAfterRead != 7*second {
		t.Errorf("Read error %#v (now %d), want OUT_OF_RANGE, first retained offset 77 at 7 s", be, nowAfterRead)
	}
}

func TestDefaultResumeAndFinish(t *testing.T) {
	finish := false
	src := &funcSource{advance: func(ctx context.Context, step *Step) error {
		if finish {
			step.Finish()
		}
		return nil
	}}
	client, _ := serveForTest(t, src, "127.0.0.1:0")
	ctx := bounded(t)
	resp, err := client.Advance(ctx, &weirv1.AdvanceRequest{NowNs: 9 * second})
	if err != nil {
		t.Fatal(err)
	}
	if resp.GetResumeAtNs() != 9*second+DefaultResumeDelayNs || resp.WatermarkNs != nil {
		t.Errorf("without ResumeAt: resume at %d, watermark %v", resp.GetResumeAtNs(), resp.WatermarkNs)
	}
	finish = true
	if resp, err = client.Advance(ctx, &weirv1.AdvanceRequest{NowNs: 9 * second}); err != nil || !resp.GetFinished() {
		t.Errorf("Finish: %v, %v", resp, err)
	}
}

func TestSourceFailuresFailOneCallAndTheProcessServesOn(t *testing.T) {
	var failWith func() error
	var late BrokerClient
	var lateCtx context.Context
	src := &funcSource{advance: func(ctx context.Context, step *Step) error {
		late, lateCtx = Broker(ctx), ctx
		return failWith()
	}}
	client, _ := serveForTest(t, src, "127.0.0.1:0")
	ctx := bounded(t)
	cases := []struct {
		name    string
		fail    func() error
		code    codes.Code
		message string
	}{
		{"panic", func() error { panic("parcel scanner jammed") }, codes.Internal,
			"source panicked during Advance: parcel scanner jammed"},
		{"plain error", func() error { return errors.New("scanner offline") }, codes.Unknown, "Advance: scanner offline"},
		{"status error", func() error { return Errorf(codes.InvalidArgument, "bad scan") }, codes.InvalidArgument, "Advance: bad scan"},
		// A broker error passed up must not read as weir's own UNAVAILABLE.
		{"broker error", func() error { return &BrokerError{Method: "Pull", Code: codes.Unavailable, Message: "down"} },
			codes.Unknown, "Advance: broker Pull: Unavailable: down"},
		{"wrapped status", func() error { return fmt.Errorf("wrapped: %w", Errorf(codes.NotFound, "gone")) }, codes.Unknown,
			"Advance: wrapped: rpc error: code = NotFound desc = gone"},
	}
	for _, c := range cases {
		failWith = c.fail
		_, err := client.Advance(ctx, &weirv1.AdvanceRequest{NowNs: 1})
		st, _ := status.FromError(err)
		if st.Code() != c.code || st.Message() != c.message {
			t.Errorf("%s: answered %v %q, want %v %q", c.name, st.Code(), st.Message(), c.code, c.message)
		}
	}
	// The broker of a call that returned refuses to work.
	if _, err := late.Pull(lateCtx, 1); AsBrokerError(err) == nil || AsBrokerError(err).Code != codes.FailedPrecondition {
		t.Errorf("Pull after the call returned: %v, want FAILED_PRECONDITION", err)
	}
	failWith = func() error { return nil }
	if _, err := client.Advance(ctx, &weirv1.AdvanceRequest{NowNs: 1}); err != nil {
		t.Errorf("the call after the failures: %v", err)
	}
}

func TestOpenErrorAndCheckpointState(t *testing.T) {
	src := &funcSource{state: []byte("epoch 3"), open: func(ctx context.Context, info OpenInfo) error {
		if info.Restore && string(info.CheckpointState) != "epoch 2" {
			return Errorf(codes.InvalidArgument, "checkpoint %d does not parse", info.CheckpointID)
		}
		if info.Readers != 1 {
			return fmt.Errorf("readers %d, want 1 for an unset field", info.Readers)
		}
		return nil
	}}
	client, _ := serveForTest(t, src, "127.0.0.1:0")
	ctx := bounded(t)
	_, err := client.Open(ctx, &weirv1.OpenRequest{Restore: true, CheckpointId: 4, CheckpointState: []byte("x")})
	if st, _ := status.FromError(err); st.Code() != codes.InvalidArgument || st.Message() != "Open: checkpoint 4 does not parse" {
		t.Errorf("Open: %v", err)
	}
	resp, err := client.Open(ctx, &weirv1.OpenRequest{Restore: true, CheckpointId: 4, CheckpointState: []byte("epoch 2")})
	if err != nil || resp.Shape != weirv1.SourceShape_SOURCE_SHAPE_UNSPECIFIED {
		t.Errorf("Open: %v, %v (a queue source leaves the shape unset)", resp, err)
	}
	cp, err := client.Checkpoint(ctx, &weirv1.CheckpointRequest{CheckpointId: 5})
	if err != nil || string(cp.State) != "epoch 3" || len(cp.ResumePoints) != 0 {
		t.Errorf("Checkpoint: %v, %v", cp, err)
	}
}

func TestLogSourceOverAUnixSocket(t *testing.T) {
	socket := "unix:" + filepath.Join(t.TempDir(), "connector.sock")
	client, address := serveForTest(t, &logSource{funcSource{state: []byte("s")}}, socket)
	if address != socket {
		t.Errorf("announced %q, want %q as given", address, socket)
	}
	ctx := bounded(t)
	resp, err := client.Open(ctx, &weirv1.OpenRequest{Spans: []*weirv1.Span{{Partition: 2, StartOffset: 40}}})
	if err != nil || resp.Shape != weirv1.SourceShape_LOG {
		t.Fatalf("Open: %v, %v", resp, err)
	}
	cp, err := client.Checkpoint(ctx, &weirv1.CheckpointRequest{CheckpointId: 1})
	if err != nil || len(cp.ResumePoints) != 1 || cp.ResumePoints[0].NextOffset != 40 {
		t.Errorf("Checkpoint: %v, %v", cp, err)
	}
	// Without ManyReaders: Assign is UNIMPLEMENTED, Cut declines with the span as told.
	if _, err := client.Assign(ctx, &weirv1.AssignRequest{}); status.Code(err) != codes.Unimplemented {
		t.Errorf("Assign: %v, want UNIMPLEMENTED", err)
	}
	cut, err := client.Cut(ctx, &weirv1.CutRequest{Partition: 2, AtOffset: 50})
	if err != nil || cut.Head.GetStartOffset() != 40 || cut.Head.EndOffset != nil || cut.Tail != nil {
		t.Errorf("Cut: %v, %v", cut, err)
	}
}

func TestFailedReadsTheCodeOfThrottlesAndOutOfRangeFromTheTrailer(t *testing.T) {
	// Status details that are a bare RetryAfter message rather than a whole
	// google.rpc.Status (as weir sent them before it wrapped them) are parsed
	// by gRPC for Go as a status all the same: the code that arrives is the
	// delay's low bits and the message is empty. The trailer tells.
	garbled := status.Error(codes.Code(250000000), "")
	be := failed("Pull", garbled, metadata.Pairs(nowKey, "12", retryAfterKey, "250"))
	if !be.Throttled() || !be.HasNow || be.NowNs != 12 || be.RetryAfterNs != 250_000_000 {
		t.Errorf("throttle: %#v", be)
	}
	be = failed("Read", status.Error(codes.OK, ""), metadata.Pairs(nowKey, "13", firstRetainedOffsetKey, "900"))
	if !be.OutOfRange() || !be.HasFirstRetainedOffset || be.FirstRetainedOffset != 900 || !IsOutOfRange(be) {
		t.Errorf("out of range: %#v", be)
	}
	be = failed("Ack", status.Error(codes.Unavailable, "restarting"), nil)
	if !be.Transient() || be.HasNow || be.Message != "restarting" || !IsTransient(be) {
		t.Errorf("unavailable: %#v", be)
	}
	if huge := failed("Pull", garbled, metadata.Pairs(retryAfterKey, "9223372036854775")); huge.RetryAfterNs != math.MaxInt64 {
		t.Errorf("a huge retry-after: %d, want MaxInt64", huge.RetryAfterNs)
	}
}

func TestFailedReadsTheFirstRetainedOffsetFromTheDetailsOnlyWhenTheyHoldIt(t *testing.T) {
	detail := &weirv1.OffsetOutOfRange{Partition: 3, FirstRetainedOffset: 77}
	be := failed("Read", withDetail(codes.OutOfRange, "first retained offset 77", detail), nil)
	if !be.OutOfRange() || !be.HasFirstRetainedOffset || be.FirstRetainedOffset != 77 {
		t.Errorf("from the details: %#v", be)
	}
	// The trailer wins over the details.
	be = failed("Read", withDetail(codes.OutOfRange, "x", detail), metadata.Pairs(firstRetainedOffsetKey, "80"))
	if be.FirstRetainedOffset != 80 {
		t.Errorf("trailer and details: %d, want the trailer's 80", be.FirstRetainedOffset)
	}
	// Details of another type, or whose value does not parse, say nothing.
	for name, err := range map[string]error{
		"a RetryAfter": withDetail(codes.OutOfRange, "x", &weirv1.RetryAfter{RetryAfterNs: 77}),
		"garbage": status.FromProto(&spb.Status{Code: int32(codes.OutOfRange), Details: []*anypb.Any{
			{TypeUrl: "type.googleapis.com/weir.v1.OffsetOutOfRange", Value: []byte{0xff, 0xff}}}}).Err(),
		"no details": status.Error(codes.OutOfRange, "gone"),
	} {
		if be := failed("Read", err, nil); !be.OutOfRange() || be.HasFirstRetainedOffset {
			t.Errorf("%s: %#v, want OUT_OF_RANGE without a first retained offset", name, be)
		}
	}
	// Only an out-of-range failure carries it.
	if be := failed("Read", withDetail(codes.Unavailable, "x", detail), nil); be.HasFirstRetainedOffset {
		t.Errorf("UNAVAILABLE: %#v", be)
	}
}

func TestConfigFromEnvNamesWhatIsWrong(t *testing.T) {
	env := func(m map[string]string) func(string) string { return func(k string) string { return m[k] } }
	full := map[string]string{"WEIR_BROKER_ADDRESS": "127.0.0.1:1", "WEIR_LISTEN_ADDRESS": "127.0.0.1:0", "WEIR_READY_FD": "1"}
	if cfg, err := ConfigFromEnv(env(full)); err != nil || cfg.ReadyFD != 1 {
		t.Errorf("full environment: %+v, %v", cfg, err)
	}
	for key, want := range map[string]string{
		"WEIR_BROKER_ADDRESS": "WEIR_BROKER_ADDRESS is not set",
		"WEIR_LISTEN_ADDRESS": "WEIR_LISTEN_ADDRESS is not set",
		"WEIR_READY_FD":       "WEIR_READY_FD is not set",
	} {
		m := map[string]string{}
		for k, v := range full {
			if k != key {
				m[k] = v
			}
		}
		_, err := ConfigFromEnv(env(m))
		var se *StartupError
		if !errors.As(err, &se) || !strings.HasPrefix(err.Error(), want) {
			t.Errorf("without %s: %v", key, err)
		}
	}
	full["WEIR_READY_FD"] = "three"
	if _, err := ConfigFromEnv(env(full)); err == nil || err.Error() != `WEIR_READY_FD is "three", expected a file descriptor number` {
		t.Errorf("bad fd: %v", err)
	}
	full["WEIR_READY_FD"] = "987"
	if _, err := ConfigFromEnv(env(full)); err == nil || !strings.HasPrefix(err.Error(), "WEIR_READY_FD 987 is not an open file descriptor") {
		t.Errorf("closed fd: %v", err)
	}
}

func TestServeRefusesAnAddressItCannotListenOn(t *testing.T) {
	err := Serve(context.Background(), &funcSource{}, Config{BrokerAddress: "127.0.0.1:1", ListenAddress: "192.0.2.1:0", ReadyFD: 1})
	var se *StartupError
	if !errors.As(err, &se) || !strings.Contains(err.Error(), `cannot listen on WEIR_LISTEN_ADDRESS "192.0.2.1:0"`) {
		t.Errorf("Serve: %v", err)
	}
}

func TestNowOutsideACallPanicsWithAClearMessage(t *testing.T) {
	defer func() {
		if p := recover(); p == nil || !strings.Contains(fmt.Sprint(p), "the context carries no weir call") {
			t.Errorf("recovered %v", p)
		}
	}()
	Now(context.Background())
}
