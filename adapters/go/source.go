package adapter

import (
	"context"

	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
)

// Source is a source connector. The adapter calls Open first (again on every
// new incarnation, on the same value: Open must reset all state), then any
// sequence of Advance, Checkpoint and Committed, one at a time.
type Source interface {
	// Open starts an incarnation, fresh or (info.Restore) from the committed
	// checkpoint in info. An error means the incarnation cannot start; with
	// info.Restore set weir reports it as a bad checkpoint.
	Open(ctx context.Context, info OpenInfo) error
	// Advance does one step: a unit of work now, shaped through step.
	Advance(ctx context.Context, step *Step) error
	// Checkpoint closes the current epoch as checkpoint checkpointID and
	// returns state that, restored by Open, resumes after every record
	// emitted so far.
	Checkpoint(ctx context.Context, checkpointID uint64) ([]byte, error)
	// Committed is the commit notice: checkpoint checkpointID and every epoch
	// before it are durable. The only moment from which acks (log shape:
	// bookmarks) for those records are allowed. Sent at most once, never
	// retried.
	Committed(ctx context.Context, checkpointID uint64) error
}

// LogSource is a Source that reads the log shape of broker (partitions,
// offsets, retention, bookmarks); a Source that does not implement it reads
// the queue shape.
type LogSource interface {
	Source
	// ResumePoints is called right after Checkpoint returned, in the same
	// connector call: the resume point of every partition the reader holds
	// (the next offset to read after every record emitted so far). Open gets
	// them back as the spans' start offsets.
	ResumePoints() []ResumePoint
}

// ManyReaders is a LogSource that can run as one of several readers of one
// log (a scenario's readers.count > 1). A source that does not implement it
// answers Assign and Revoke with UNIMPLEMENTED and declines every Cut.
type ManyReaders interface {
	// Assign takes up spans, each from its start offset (its resume point); an
	// open end means the live log. Never a partition already held.
	Assign(ctx context.Context, spans []Span) error
	// Revoke gives up the spans of partitions (whole): nothing of them is
	// read or emitted from now on.
	Revoke(ctx context.Context, partitions []uint32) error
	// Cut gives up the unread tail of held (the span as the adapter told it),
	// the runtime asking for the tail to begin at atOffset. Return
	// DeclineCut(held) to keep it all.
	Cut(ctx context.Context, held Span, atOffset uint64) (CutAnswer, error)
}

// OpenInfo is what Open is told.
type OpenInfo struct {
	// Incarnation is 1 for the first life of the connector, then 2, ...
	Incarnation uint64
	// Restore: restore from the committed checkpoint below.
	Restore         bool
	CheckpointID    uint64
	CheckpointState []byte
	// RedeliveryHorizonNs: the broker redelivers an acked message no later
	// than this long after the ack, so dedup memory of acked messages may be
	// dropped after it.
	RedeliveryHorizonNs int64
	// Spans (log shape) are the partitions this reader holds, each from its
	// resume point.
	Spans []Span
	// NewPartitionsHeld (log shape): partitions that appear after Open are
	// held too, from offset 0.
	NewPartitionsHeld bool
	// Reader and Readers (many readers): this reader's index (0-based) and
	// how many reader slots the run has (1 for a single reader).
	Reader  uint32
	Readers uint32
}

// PartitionOffset is a partition and the next offset to read there: a resume
// point (in a checkpoint) or a bookmark (stored at the broker).
type PartitionOffset struct {
	Partition  uint32
	NextOffset uint64
}

// ResumePoint is a partition's next offset to read, as a checkpoint records it.
type ResumePoint = PartitionOffset

// Bookmark is a partition's next offset to read, as the broker stores it.
type Bookmark = PartitionOffset

// Span is a partition and a range of its offsets held by a reader:
// [StartOffset, EndOffset), or open ended (a live log) when EndOffset is nil.
type Span struct {
	Partition   uint32
	StartOffset uint64
	EndOffset   *uint64
}

// CutAnswer is what Cut answers: for the cut offset c the reader chose (never
// below an offset it has emitted from the span), Head = [the held span's
// start, c) and Tail = [c, the held span's end). A nil Tail declines: Head is
// then the whole held span.
type CutAnswer struct {
	Head Span
	Tail *Span
}

// DeclineCut keeps all of held.
func DeclineCut(held Span) CutAnswer { return CutAnswer{Head: held} }

// Errorf returns an error that fails the source call with code c and the
// formatted message (status.Errorf; codes.InvalidArgument is a good default
// for a checkpoint that does not parse).
func Errorf(c codes.Code, format string, args ...interface{}) error {
	return status.Errorf(c, format, args...)
}
