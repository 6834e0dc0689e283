package adapter

import (
	"context"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"google.golang.org/grpc"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/metadata"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/proto"

	weirv1 "weir/v1"
)

// BrokerCallWallTimeout bounds every broker call in wall time (a gRPC
// deadline: the only use of the wall clock; virtual time comes from the
// broker's answers).
const BrokerCallWallTimeout = 30 * time.Second

// Trailing metadata keys of the Broker service (proto/weir/v1/broker.proto).
const (
	nowKey                 = "weir-now-ns"
	retryAfterKey          = "retry-after-ms"
	firstRetainedOffsetKey = "weir-first-retained-offset"
)

// BrokerClient is weir's Broker service as a source sees it (Broker(ctx)).
// Each call is synchronous, bounded in wall time, and moves Now(ctx) to the
// virtual now of the broker's answer. A failed call returns a *BrokerError.
type BrokerClient interface {
	// Pull returns up to max deliverable messages, each with a fresh receipt.
	Pull(ctx context.Context, max uint32) ([]*weirv1.Delivery, error)
	// Ack removes the messages behind these receipts for good. A receipt
	// that no longer holds its message is ignored by the broker.
	Ack(ctx context.Context, receipts []uint64) error
	// Nack makes the messages behind these receipts deliverable again at once.
	Nack(ctx context.Context, receipts []uint64) error
	// ExtendLease moves the lease deadline of these receipts to now +
	// extensionNs and returns the receipts whose lease could not be extended.
	ExtendLease(ctx context.Context, receipts []uint64, extensionNs int64) (rejected []uint64, err error)

	// ListPartitions (log shape) returns every partition with its first
	// retained offset and the offset its next appended record will get.
	ListPartitions(ctx context.Context) ([]*weirv1.PartitionInfo, error)
	// Read (log shape) reads records of partition from offset on. Below the
	// first retained offset it fails OUT_OF_RANGE (IsOutOfRange) and the
	// error carries that offset.
	Read(ctx context.Context, partition uint32, offset uint64, opts ReadOptions) (ReadResult, error)
	// SaveBookmarks (log shape) stores bookmarks at the broker: only resume
	// points of a committed checkpoint, from Committed on.
	SaveBookmarks(ctx context.Context, bookmarks []Bookmark) error
	// LoadBookmarks (log shape) returns the bookmarks stored so far.
	LoadBookmarks(ctx context.Context) ([]Bookmark, error)
}

// ReadOptions says how much one Read may return.
type ReadOptions struct {
	MaxRecords uint32 // 0: 64
	MaxBytes   uint32 // 0: no byte bound
	MaxWaitNs  int64  // > 0: long poll at the readable end, this long (virtual)
}

// ReadResult is what one Read returned.
type ReadResult struct {
	// Records are in offset order, consecutive, from the requested offset.
	Records []*weirv1.LogRecord
	// NextOffset is the offset after the last record returned (the requested
	// offset if none).
	NextOffset          uint64
	FirstRetainedOffset uint64
	// ReadableEnd is the end of what is readable now.
	ReadableEnd uint64
}

// CaughtUp reports whether nothing more is readable now.
func (r ReadResult) CaughtUp() bool { return r.NextOffset >= r.ReadableEnd }

// BrokerError is a failed broker call.
type BrokerError struct {
	Method  string
	Code    codes.Code
	Message string
	// NowNs is the virtual now after the call as the broker reported it;
	// HasNow is false when the broker said nothing (the call never reached it).
	NowNs  int64
	HasNow bool
	// RetryAfterNs (RESOURCE_EXHAUSTED only, when HasRetryAfter): the
	// throttled method must not be called again before now + RetryAfterNs.
	RetryAfterNs  int64
	HasRetryAfter bool
	// FirstRetainedOffset (OUT_OF_RANGE only, when HasFirstRetainedOffset):
	// every offset below it is gone; report the skipped ones with
	// Step.ReportGap.
	FirstRetainedOffset    uint64
	HasFirstRetainedOffset bool
}

func (e *BrokerError) Error() string {
	return fmt.Sprintf("broker %s: %s: %s", e.Method, e.Code, e.Message)
}

// Throttled: RESOURCE_EXHAUSTED; wait RetryAfterNs when it is set.
func (e *BrokerError) Throttled() bool { return e.Code == codes.ResourceExhausted }

// Transient: a failure worth retrying after a backoff.
func (e *BrokerError) Transient() bool {
	return e.Code == codes.Unavailable || e.Code == codes.DeadlineExceeded
}

// OutOfRange: a log Read below the first retained offset.
func (e *BrokerError) OutOfRange() bool { return e.Code == codes.OutOfRange }

// AsBrokerError returns the *BrokerError in err's chain, or nil.
func AsBrokerError(err error) *BrokerError {
	var be *BrokerError
	if errors.As(err, &be) {
		return be
	}
	return nil
}

// IsThrottled reports whether err is a throttled broker call.
func IsThrottled(err error) bool { be := AsBrokerError(err); return be != nil && be.Throttled() }

// IsTransient reports whether err is a broker call worth retrying after a backoff.
func IsTransient(err error) bool { be := AsBrokerError(err); return be != nil && be.Transient() }

// IsOutOfRange reports whether err is a log Read below the first retained offset.
func IsOutOfRange(err error) bool { be := AsBrokerError(err); return be != nil && be.OutOfRange() }

// callBroker is the BrokerClient of one source call: it forwards to the gRPC
// stub, moves the call's clock from each answer and refuses to work once the
// call has returned.
type callBroker struct {
	stub weirv1.BrokerClient
	c    *call
}

func trailingInt(md metadata.MD, key string) (int64, bool) {
	v := md.Get(key)
	if len(v) == 0 {
		return 0, false
	}
	n, err := strconv.ParseInt(v[0], 10, 64)
	return n, err == nil
}

// failed turns a failed gRPC call into a *BrokerError. weir sends a
// throttle's and an out-of-range read's status details as a whole
// google.rpc.Status with the call's code and message, its details holding a
// RetryAfter or OffsetOutOfRange packed in an Any; gRPC for Go lets that
// status replace the code and message of the call, which weir keeps equal.
// The trailing metadata of those two answers names their code too, and is
// what the code is taken from when it is there: status details gRPC for Go
// could not take as a whole status would otherwise leave a wrong code.
func failed(method string, err error, md metadata.MD) *BrokerError {
	st, _ := status.FromError(err)
	be := &BrokerError{Method: method, Code: st.Code(), Message: st.Message()}
	be.NowNs, be.HasNow = trailingInt(md, nowKey)
	if ms, ok := trailingInt(md, retryAfterKey); ok {
		be.Code = codes.ResourceExhausted
		if be.Message == "" {
			be.Message = "throttled"
		}
		if ms >= 0 {
			be.HasRetryAfter = true
			if ms > math.MaxInt64/1_000_000 {
				be.RetryAfterNs = math.MaxInt64
			} else {
				be.RetryAfterNs = ms * 1_000_000
			}
		}
	}
	if v := md.Get(firstRetainedOffsetKey); len(v) > 0 {
		be.Code = codes.OutOfRange
		if be.Message == "" {
			be.Message = "read below the first retained offset"
		}
		if off, err := strconv.ParseUint(v[0], 10, 64); err == nil {
			be.FirstRetainedOffset, be.HasFirstRetainedOffset = off, true
		}
	}
	if be.OutOfRange() && !be.HasFirstRetainedOffset {
		var detail weirv1.OffsetOutOfRange
		if unpackDetail(st, &detail) {
			be.FirstRetainedOffset, be.HasFirstRetainedOffset = detail.FirstRetainedOffset, true
		}
	}
	return be
}

// unpackDetail fills m from the first of st's details that is a message of
// m's type (an Any whose type URL ends in "/" and m's full name); false when
// there is none or it does not parse.
func unpackDetail(st *status.Status, m proto.Message) bool {
	name := string(m.ProtoReflect().Descriptor().FullName())
	for _, packed := range st.Proto().GetDetails() {
		url := packed.GetTypeUrl()
		if url[strings.LastIndexByte(url, '/')+1:] == name {
			return proto.Unmarshal(packed.GetValue(), m) == nil
		}
	}
	return false
}

// invoke runs one broker call with the wall-clock bound, the trailer and
// the clock update.
func (b *callBroker) invoke(ctx context.Context, method string,
	rpc func(ctx context.Context, opts ...grpc.CallOption) (int64, error)) error {
	if err := b.c.usable(method); err != nil {
		return err
	}
	ctx, cancel := context.WithTimeout(ctx, BrokerCallWallTimeout)
	defer cancel()
	var md metadata.MD
	now, err := rpc(ctx, grpc.Trailer(&md), grpc.WaitForReady(true))
	if err != nil {
		be := failed(method, err, md)
		if be.HasNow {
			b.c.observe(be.NowNs)
		}
		return be
	}
	b.c.observe(now)
	return nil
}

func (b *callBroker) Pull(ctx context.Context, max uint32) ([]*weirv1.Delivery, error) {
	var out []*weirv1.Delivery
	err := b.invoke(ctx, "Pull", func(ctx context.Context, opts ...grpc.CallOption) (int64, error) {
		r, err := b.stub.Pull(ctx, &weirv1.PullRequest{MaxMessages: max}, opts...)
		if err != nil {
			return 0, err
		}
		out = r.Deliveries
		return r.NowNs, nil
	})
	return out, err
}

func (b *callBroker) Ack(ctx context.Context, receipts []uint64) error {
	return b.invoke(ctx, "Ack", func(ctx context.Context, opts ...grpc.CallOption) (int64, error) {
		r, err := b.stub.Ack(ctx, &weirv1.AckRequest{Receipts: receipts}, opts...)
		if err != nil {
			return 0, err
		}
		return r.NowNs, nil
	})
}

func (b *callBroker) Nack(ctx context.Context, receipts []uint64) error {
	return b.invoke(ctx, "Nack", func(ctx context.Context, opts ...grpc.CallOption) (int64, error) {
		r, err := b.stub.Nack(ctx, &weirv1.NackRequest{Receipts: receipts}, opts...)
		if err != nil {
			return 0, err
		}
		return r.NowNs, nil
	})
}

func (b *callBroker) ExtendLease(ctx context.Context, receipts []uint64, extensionNs int64) ([]uint64, error) {
	var rejected []uint64
	err := b.invoke(ctx, "ExtendLease", func(ctx context.Context, opts ...grpc.CallOption) (int64, error) {
		r, err := b.stub.ExtendLease(ctx, &weirv1.ExtendLeaseRequest{Receipts: receipts, ExtensionNs: extensionNs}, opts...)
		if err != nil {
			return 0, err
		}
		rejected = r.RejectedReceipts
		return r.NowNs, nil
	})
	return rejected, err
}

func (b *callBroker) ListPartitions(ctx context.Context) ([]*weirv1.PartitionInfo, error) {
	var out []*weirv1.PartitionInfo
	err := b.invoke(ctx, "ListPartitions", func(ctx context.Context, opts ...grpc.CallOption) (int64, error) {
		r, err := b.stub.ListPartitions(ctx, &weirv1.ListPartitionsRequest{}, opts...)
		if err != nil {
			return 0, err
		}
		out = r.Partitions
		return r.NowNs, nil
	})
	return out, err
}

func (b *callBroker) Read(ctx context.Context, partition uint32, offset uint64, opts ReadOptions) (ReadResult, error) {
	out := ReadResult{NextOffset: offset}
	max := opts.MaxRecords
	if max == 0 {
		max = 64
	}
	err := b.invoke(ctx, "Read", func(ctx context.Context, callOpts ...grpc.CallOption) (int64, error) {
		r, err := b.stub.Read(ctx, &weirv1.ReadRequest{Partition: partition, Offset: offset, MaxRecords: max,
			MaxBytes: opts.MaxBytes, MaxWaitNs: opts.MaxWaitNs}, callOpts...)
		if err != nil {
			return 0, err
		}
		out = ReadResult{Records: r.Records, NextOffset: r.NextOffset,
			FirstRetainedOffset: r.FirstRetainedOffset, ReadableEnd: r.ReadableEnd}
		return r.NowNs, nil
	})
	return out, err
}

func (b *callBroker) SaveBookmarks(ctx context.Context, bookmarks []Bookmark) error {
	req := &weirv1.SaveBookmarksRequest{Bookmarks: make([]*weirv1.Bookmark, 0, len(bookmarks))}
	for _, bm := range bookmarks {
		req.Bookmarks = append(req.Bookmarks, &weirv1.Bookmark{Partition: bm.Partition, NextOffset: bm.NextOffset})
	}
	return b.invoke(ctx, "SaveBookmarks", func(ctx context.Context, opts ...grpc.CallOption) (int64, error) {
		r, err := b.stub.SaveBookmarks(ctx, req, opts...)
		if err != nil {
			return 0, err
		}
		return r.NowNs, nil
	})
}

func (b *callBroker) LoadBookmarks(ctx context.Context) ([]Bookmark, error) {
	var out []Bookmark
	err := b.invoke(ctx, "LoadBookmarks", func(ctx context.Context, opts ...grpc.CallOption) (int64, error) {
		r, err := b.stub.LoadBookmarks(ctx, &weirv1.LoadBookmarksRequest{}, opts...)
		if err != nil {
			return 0, err
		}
		for _, bm := range r.Bookmarks {
			out = append(out, Bookmark{Partition: bm.Partition, NextOffset: bm.NextOffset})
		}
		return r.NowNs, nil
	})
	return out, err
}
