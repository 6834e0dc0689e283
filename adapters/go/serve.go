package adapter

import (
	"context"
	"errors"
	"fmt"
	"math"
	"net"
	"os"
	"sort"
	"strconv"
	"strings"
	"sync"
	"syscall"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"

	weirv1 "weir/v1"
)

// ExitBadEnvironment is the exit code of Main when the start-up handshake's
// environment is missing or bad, or the address cannot be listened on.
const ExitBadEnvironment = 2

// Config is the start-up handshake (proto/weir/v1/connector.proto).
type Config struct {
	// BrokerAddress is the gRPC target of weir's Broker service.
	BrokerAddress string
	// ListenAddress is where to listen: "host:port" (port 0: the OS picks),
	// "unix:/path" or "unix-abstract:name".
	ListenAddress string
	// ReadyFD is the descriptor on which the address actually listened on is
	// written with a trailing newline, then closed.
	ReadyFD int
}

// StartupError is a Serve failure before the connector was ready: a missing
// or bad environment, or an address that cannot be listened on.
type StartupError struct{ Reason string }

func (e *StartupError) Error() string { return e.Reason }

func required(getenv func(string) string, name string) (string, error) {
	v := getenv(name)
	if v == "" {
		return "", &StartupError{name + " is not set; this program is a weir connector and expects to be started by weir " +
			"(see proto/weir/v1/connector.proto for the start-up handshake)"}
	}
	return v, nil
}

// ConfigFromEnv reads the handshake from the environment through getenv
// (os.Getenv in a connector): WEIR_BROKER_ADDRESS, WEIR_LISTEN_ADDRESS and
// WEIR_READY_FD. The error is a *StartupError naming what is wrong.
func ConfigFromEnv(getenv func(string) string) (Config, error) {
	var cfg Config
	var err error
	if cfg.BrokerAddress, err = required(getenv, "WEIR_BROKER_ADDRESS"); err != nil {
		return cfg, err
	}
	if cfg.ListenAddress, err = required(getenv, "WEIR_LISTEN_ADDRESS"); err != nil {
		return cfg, err
	}
	fdText, err := required(getenv, "WEIR_READY_FD")
	if err != nil {
		return cfg, err
	}
	fd, perr := strconv.Atoi(fdText)
	if perr != nil || fd < 0 {
		return cfg, &StartupError{fmt.Sprintf("WEIR_READY_FD is %q, expected a file descriptor number", fdText)}
	}
	if _, _, errno := syscall.Syscall(syscall.SYS_FCNTL, uintptr(fd), syscall.F_GETFD, 0); errno != 0 {
		return cfg, &StartupError{fmt.Sprintf("WEIR_READY_FD %d is not an open file descriptor (%v)", fd, errno)}
	}
	cfg.ReadyFD = fd
	return cfg, nil
}

// listen opens the listener for a weir listen address.
func listen(address string) (net.Listener, error) {
	switch {
	case strings.HasPrefix(address, "unix-abstract:"):
		return net.Listen("unix", "@"+strings.TrimPrefix(address, "unix-abstract:"))
	case strings.HasPrefix(address, "unix:"):
		path := strings.TrimPrefix(address, "unix:")
		path = strings.TrimPrefix(path, "//") // unix:///abs/path
		return net.Listen("unix", path)
	default:
		return net.Listen("tcp", address)
	}
}

// listenedAddress is the address to announce: "host:port" with the port the
// OS picked; unix addresses as given.
func listenedAddress(requested string, l net.Listener) string {
	if strings.HasPrefix(requested, "unix:") || strings.HasPrefix(requested, "unix-abstract:") {
		return requested
	}
	host := requested
	if i := strings.LastIndex(requested, ":"); i >= 0 {
		host = requested[:i]
	}
	port := 0
	if a, ok := l.Addr().(*net.TCPAddr); ok {
		port = a.Port
	}
	return host + ":" + strconv.Itoa(port)
}

// dialer reaches weir's broker at a gRPC target: "unix:/path",
// "unix-abstract:name", or host:port over TCP (loopback: never a proxy).
func dialer(ctx context.Context, target string) (net.Conn, error) {
	var d net.Dialer
	switch {
	case strings.HasPrefix(target, "unix-abstract:"):
		return d.DialContext(ctx, "unix", "@"+strings.TrimPrefix(target, "unix-abstract:"))
	case strings.HasPrefix(target, "unix:"):
		return d.DialContext(ctx, "unix", strings.TrimPrefix(strings.TrimPrefix(target, "unix:"), "//"))
	default:
		return d.DialContext(ctx, "tcp", target)
	}
}

// DialBroker connects to weir's Broker service at target. Calls are never
// retried by gRPC (a retried call would be a second broker call the trace
// does not expect) and messages have no size bound.
func DialBroker(target string) (*grpc.ClientConn, error) {
	return grpc.Dial("passthrough:///"+target,
		grpc.WithInsecure(),
		grpc.WithContextDialer(dialer),
		grpc.WithDisableRetry(),
		grpc.WithDefaultCallOptions(grpc.ForceCodec(codec{}),
			grpc.MaxCallRecvMsgSize(math.MaxInt32), grpc.MaxCallSendMsgSize(math.MaxInt32)),
	)
}

// NewGRPCServer returns a gRPC server with the adapter's codec and no
// message size bound; register NewConnectorServer on it.
func NewGRPCServer() *grpc.Server {
	return grpc.NewServer(grpc.CustomCodec(codec{}), grpc.MaxRecvMsgSize(math.MaxInt32), grpc.MaxSendMsgSize(math.MaxInt32))
}

// Serve serves src as a connector process: it listens where cfg says, writes
// the address to cfg.ReadyFD, and serves weir's Connector service until ctx
// is cancelled (a connector normally runs until weir kills it). Connector
// calls reach src strictly one at a time. The error is a *StartupError when
// the connector could not get ready.
func Serve(ctx context.Context, src Source, cfg Config) error {
	conn, err := DialBroker(cfg.BrokerAddress)
	if err != nil {
		return &StartupError{fmt.Sprintf("cannot use WEIR_BROKER_ADDRESS %q: %v", cfg.BrokerAddress, err)}
	}
	defer conn.Close()
	l, err := listen(cfg.ListenAddress)
	if err != nil {
		return &StartupError{fmt.Sprintf("cannot listen on WEIR_LISTEN_ADDRESS %q (%v)", cfg.ListenAddress, err)}
	}
	server := NewGRPCServer()
	weirv1.RegisterConnectorServer(server, NewConnectorServer(src, weirv1.NewBrokerClient(conn)))
	served := make(chan error, 1)
	go func() { served <- server.Serve(l) }()

	ready := os.NewFile(uintptr(cfg.ReadyFD), "WEIR_READY_FD")
	_, werr := ready.Write([]byte(listenedAddress(cfg.ListenAddress, l) + "\n"))
	ready.Close()
	if werr != nil {
		server.Stop()
		return &StartupError{fmt.Sprintf("cannot write the listen address to WEIR_READY_FD %d (%v)", cfg.ReadyFD, werr)}
	}
	select {
	case <-ctx.Done():
		server.Stop()
		<-served
		return nil
	case err := <-served:
		return err
	}
}

// Main serves src with the handshake from the environment until weir kills
// the process. On a bad environment it prints one line to stderr and exits
// with ExitBadEnvironment.
func Main(src Source) {
	cfg, err := ConfigFromEnv(os.Getenv)
	if err == nil {
		err = Serve(context.Background(), src, cfg)
	}
	if err != nil {
		fmt.Fprintf(os.Stderr, "weir connector: %v\n", err)
		var se *StartupError
		if errors.As(err, &se) {
			os.Exit(ExitBadEnvironment)
		}
		os.Exit(1)
	}
	os.Exit(0)
}

// connectorServer serves the Connector service for one source, one call at
// a time.
type connectorServer struct {
	weirv1.UnimplementedConnectorServer
	src    Source
	broker weirv1.BrokerClient
	mu     sync.Mutex
	told   spansTold // many readers: the spans the source holds, for Cut
}

// NewConnectorServer returns weir's Connector service for src, its broker
// calls going to broker. Serve uses it; a host of its own (a test) may too.
func NewConnectorServer(src Source, broker weirv1.BrokerClient) weirv1.ConnectorServer {
	return &connectorServer{src: src, broker: broker}
}

// guarded runs one source call: a panic or a returned error fails the call
// instead of ending the process.
func (s *connectorServer) guarded(kind CallKind, parent context.Context, nowNs int64,
	body func(ctx context.Context, c *call) error) (err error) {
	ctx, c := newCall(parent, kind, nowNs, s.broker)
	defer c.end()
	defer func() {
		if p := recover(); p != nil {
			err = status.Errorf(codes.Internal, "source panicked during %s: %v", kind, p)
		}
	}()
	if err := body(ctx, c); err != nil {
		return sourceError(kind, err)
	}
	return nil
}

// sourceError is the status a source's error fails its call with: an error
// made with the status package keeps its code, any other is UNKNOWN. A
// broker error passed up is UNKNOWN too, so that weir does not read it as
// its own (UNAVAILABLE would be a transport failure).
func sourceError(kind CallKind, err error) error {
	if AsBrokerError(err) == nil {
		if st, ok := status.FromError(err); ok {
			return status.Errorf(st.Code(), "%s: %s", kind, st.Message())
		}
	}
	return status.Errorf(codes.Unknown, "%s: %v", kind, err)
}

func spanFrom(s *weirv1.Span) Span {
	out := Span{Partition: s.Partition, StartOffset: s.StartOffset}
	if s.EndOffset != nil {
		end := *s.EndOffset
		out.EndOffset = &end
	}
	return out
}

func spanTo(s Span) *weirv1.Span {
	out := &weirv1.Span{Partition: s.Partition, StartOffset: s.StartOffset}
	if s.EndOffset != nil {
		end := *s.EndOffset
		out.EndOffset = &end
	}
	return out
}

func openInfoFrom(r *weirv1.OpenRequest) OpenInfo {
	info := OpenInfo{Incarnation: r.Incarnation, Restore: r.Restore, CheckpointID: r.CheckpointId,
		CheckpointState: r.CheckpointState, RedeliveryHorizonNs: r.RedeliveryHorizonNs,
		NewPartitionsHeld: r.NewPartitionsHeld, Reader: r.Reader, Readers: r.Readers}
	if info.Readers == 0 {
		info.Readers = 1
	}
	for _, sp := range r.Spans {
		info.Spans = append(info.Spans, spanFrom(sp))
	}
	return info
}

func (s *connectorServer) Open(parent context.Context, r *weirv1.OpenRequest) (*weirv1.OpenResponse, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	info := openInfoFrom(r)
	resp := &weirv1.OpenResponse{}
	err := s.guarded(CallOpen, parent, r.NowNs, func(ctx context.Context, _ *call) error {
		if err := s.src.Open(ctx, info); err != nil {
			return err
		}
		// A queue source leaves the shape unset (the same as QUEUE), so its
		// answers are byte for byte the C++ adapter's.
		if _, ok := s.src.(LogSource); ok {
			resp.Shape = weirv1.SourceShape_LOG
		}
		s.told.opened(info.Spans)
		return nil
	})
	if err != nil {
		return nil, err
	}
	return resp, nil
}

func (s *connectorServer) Advance(parent context.Context, r *weirv1.AdvanceRequest) (*weirv1.AdvanceResponse, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	resp := &weirv1.AdvanceResponse{}
	err := s.guarded(CallAdvance, parent, r.NowNs, func(ctx context.Context, c *call) error {
		var step Step
		if err := s.src.Advance(ctx, &step); err != nil {
			return err
		}
		step.write(c.clock(), resp)
		return nil
	})
	if err != nil {
		return nil, err
	}
	return resp, nil
}

func (s *connectorServer) Checkpoint(parent context.Context, r *weirv1.CheckpointRequest) (*weirv1.CheckpointResponse, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	resp := &weirv1.CheckpointResponse{}
	err := s.guarded(CallCheckpoint, parent, r.NowNs, func(ctx context.Context, _ *call) error {
		state, err := s.src.Checkpoint(ctx, r.CheckpointId)
		if err != nil {
			return err
		}
		resp.State = state
		if ls, ok := s.src.(LogSource); ok {
			for _, p := range ls.ResumePoints() {
				resp.ResumePoints = append(resp.ResumePoints, &weirv1.ResumePoint{Partition: p.Partition, NextOffset: p.NextOffset})
			}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	return resp, nil
}

func (s *connectorServer) Committed(parent context.Context, r *weirv1.CommittedRequest) (*weirv1.CommittedResponse, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	err := s.guarded(CallCommitted, parent, r.NowNs, func(ctx context.Context, _ *call) error {
		return s.src.Committed(ctx, r.CheckpointId)
	})
	if err != nil {
		return nil, err
	}
	return &weirv1.CommittedResponse{}, nil
}

func (s *connectorServer) Assign(parent context.Context, r *weirv1.AssignRequest) (*weirv1.AssignResponse, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	spans := make([]Span, 0, len(r.Spans))
	for _, sp := range r.Spans {
		spans = append(spans, spanFrom(sp))
	}
	err := s.guarded(CallAssign, parent, r.NowNs, func(ctx context.Context, _ *call) error {
		mr, ok := s.src.(ManyReaders)
		if !ok {
			return status.Error(codes.Unimplemented, "this source does not take spans by Assign (several readers need it)")
		}
		if err := mr.Assign(ctx, spans); err != nil {
			return err
		}
		s.told.assigned(spans)
		return nil
	})
	if err != nil {
		return nil, err
	}
	return &weirv1.AssignResponse{}, nil
}

func (s *connectorServer) Revoke(parent context.Context, r *weirv1.RevokeRequest) (*weirv1.RevokeResponse, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	err := s.guarded(CallRevoke, parent, r.NowNs, func(ctx context.Context, _ *call) error {
		mr, ok := s.src.(ManyReaders)
		if !ok {
			return status.Error(codes.Unimplemented, "this source does not give up spans by Revoke (several readers need it)")
		}
		if err := mr.Revoke(ctx, r.Partitions); err != nil {
			return err
		}
		s.told.revoked(r.Partitions)
		return nil
	})
	if err != nil {
		return nil, err
	}
	return &weirv1.RevokeResponse{}, nil
}

func (s *connectorServer) Cut(parent context.Context, r *weirv1.CutRequest) (*weirv1.CutResponse, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	resp := &weirv1.CutResponse{}
	err := s.guarded(CallCut, parent, r.NowNs, func(ctx context.Context, _ *call) error {
		held := s.told.held(r.Partition)
		answer := DeclineCut(held)
		if mr, ok := s.src.(ManyReaders); ok {
			var err error
			if answer, err = mr.Cut(ctx, held, r.AtOffset); err != nil {
				return err
			}
		}
		s.told.assigned([]Span{answer.Head})
		resp.Head = spanTo(answer.Head)
		if answer.Tail != nil {
			resp.Tail = spanTo(*answer.Tail)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	return resp, nil
}

// spansTold keeps the spans the source has been told it holds, so that Cut
// can name the held span: reset by Open, grown by Assign, shrunk by Revoke,
// narrowed to the head of each Cut answer. A partition never told (taken up
// through NewPartitionsHeld) is held from offset 0, open ended.
type spansTold struct{ spans []Span } // by partition, ascending

func (t *spansTold) find(partition uint32) (int, bool) {
	i := sort.Search(len(t.spans), func(i int) bool { return t.spans[i].Partition >= partition })
	return i, i < len(t.spans) && t.spans[i].Partition == partition
}

func (t *spansTold) opened(spans []Span) { t.spans = nil; t.assigned(spans) }

func (t *spansTold) assigned(spans []Span) {
	for _, sp := range spans {
		i, found := t.find(sp.Partition)
		if found {
			t.spans[i] = sp
			continue
		}
		t.spans = append(t.spans, Span{})
		copy(t.spans[i+1:], t.spans[i:])
		t.spans[i] = sp
	}
}

func (t *spansTold) revoked(partitions []uint32) {
	for _, p := range partitions {
		if i, found := t.find(p); found {
			t.spans = append(t.spans[:i], t.spans[i+1:]...)
		}
	}
}

func (t *spansTold) held(partition uint32) Span {
	if i, found := t.find(partition); found {
		return t.spans[i]
	}
	return Span{Partition: partition}
}
