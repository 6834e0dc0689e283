"""The connector side of weir, for Python: the plain source interface.

A source connector subclasses Source; a host drives it one call at a time and
hands each call a Context. The host is serve() (server.py: the Connector gRPC
service in its own process, what weir launches). This mirrors the C++ adapter
(adapters/cpp/include/weir/adapter/source.h) call for call.

Protocol (lock-step, see proto/weir/v1/connector.proto):
  open        starts an incarnation, fresh or restored from a committed checkpoint;
  advance     one step: pull, emit records, report a watermark, say when to be
              called again;
  checkpoint  closes the current epoch and returns bytes that, restored by open,
              resume after every record emitted so far;
  committed   commit notice: checkpoint N and every epoch before it are durable.
              The only moment from which acks for those records are allowed.
              Sent at most once and never retried.

Two shapes of broker (Source.shape, fixed by the scenario; docs/log-mode.md):
  queue  (the default) pull hands out messages with receipts; a record names
         its message (Context.emit); an ack after the commit notice removes it.
  log    partitions, each an append-only sequence of records at offsets
         0, 1, 2, ...; retention deletes the oldest. The log protocol:
    open        info.spans are the partitions this reader holds, each from its
                resume point (the restored checkpoint's, or the span's first
                offset); with info.new_partitions_held, partitions that appear
                later (broker.list_partitions) are held too, from offset 0.
    advance     read each held partition from its next offset; emit one record
                per log record (Context.emit_log_record: partition and offset);
                a read below the first retained offset fails OUT_OF_RANGE with
                status.first_retained_offset: the skipped offsets must be
                reported (Context.report_gap) before reading on from there.
    checkpoint  the host then asks Source.resume_points(), in the same call:
                the next offset to read of every held partition after every
                record emitted so far. open hands them back as the spans' start
                offsets on restore.
    committed   the only moment from which broker.save_bookmarks may store
                checkpoint N's resume points (never anything newer): a bookmark
                ahead of the committed resume point is the log twin of an ack
                before the commit.
  Many readers (log shape, a scenario's readers.count > 1; info.reader and
  info.readers say which reader of how many): spans move between readers, in
  three more calls, lock-step like the others (the broker is usable in them,
  the step-shaping Context methods are not):
    assign      more spans, each from its resume point; never a second span of
                a partition already held.
    revoke      takes whole spans away (right after a commit notice): stop
                reading and emitting them at once and forget them.
    cut         give up the unread tail of one held span: answer the head kept
                [start as told, c) and the tail given up [c, end) for a cut
                offset c at or after every offset emitted from it (the head
                holds them all), or decline (no tail). From then on the span
                ends at c.
  A single reader never sees these calls; the defaults answer UNIMPLEMENTED
  (assign, revoke) and decline (cut).

Time: Context.now is the virtual now. It starts at the call's now and moves
forward as broker answers arrive. Source code must never read a wall clock and
must draw any randomness from a generator seeded deterministically (e.g. from
the incarnation, see backoff.mix_seed), so that a (scenario, seed) pair
replays byte for byte.

Thread rules: the host calls the source from one thread at a time and never
concurrently; a Context and its broker are used only during the call they were
given to.

Example:
    class Scans(Source):
        def advance(self, ctx):
            status, got = ctx.broker.pull(64)
            for d in got:
                ctx.emit(d.message_id, d.event_time_ns, d.payload)
            ctx.resume_at(ctx.now + 100_000_000)
        ...
    serve_forever(Scans())

Example (log shape; retries, idleness and bookmarks left out, see
fixtures/connectors/python/log_reference_source.py for a complete reader):
    class Buoys(Source):
        shape = SourceShape.LOG

        def open(self, info, ctx):
            self.next = {span.partition: span.start_offset for span in info.spans}

        def advance(self, ctx):
            for partition, offset in sorted(self.next.items()):
                status, got = ctx.broker.read(partition, offset)
                if status.out_of_range and status.first_retained_offset is not None:
                    ctx.report_gap(partition, offset, status.first_retained_offset)
                    self.next[partition] = status.first_retained_offset
                if not status.ok:
                    continue
                for r in got.records:
                    ctx.emit_log_record(partition, r.offset, r.event_time_ns, r.payload)
                self.next[partition] = got.next_offset

        def resume_points(self):
            return [ResumePoint(p, n) for p, n in sorted(self.next.items())]
        ...
"""

import enum
from typing import NamedTuple, Optional

import grpc

INT64_MIN = -(1 << 63)
INT64_MAX = (1 << 63) - 1


def clamp_int64(value):
    """value limited to the int64 range of the wire (Python ints do not overflow)."""
    return INT64_MIN if value < INT64_MIN else INT64_MAX if value > INT64_MAX else value


class BrokerStatus:
    """The outcome of one broker call.

    code: a grpc.StatusCode. message: the broker's text on failure.
    now_ns: the virtual now after the call as the broker reported it (the
      answer's now_ns, or trailing metadata "weir-now-ns" on failure); None when
      the broker said nothing (e.g. the call never reached it).
    retry_after_ns: RESOURCE_EXHAUSTED only: the broker's retry-after hint
      (trailing metadata "retry-after-ms"), in ns. The throttled method must not
      be called again before now + retry_after_ns; other methods may.
    first_retained_offset: OUT_OF_RANGE only (log shape, a read below the first
      retained offset): the partition's first retained offset (trailing
      metadata "weir-first-retained-offset", or the OffsetOutOfRange status
      detail). Every offset below it is gone: report the skipped ones with
      Context.report_gap. None when the broker did not say.
    """

    __slots__ = ("code", "message", "now_ns", "retry_after_ns", "first_retained_offset")

    def __init__(self, code=grpc.StatusCode.OK, message="", now_ns=None, retry_after_ns=None,
                 first_retained_offset=None):
        self.code = code
        self.message = message
        self.now_ns = now_ns
        self.retry_after_ns = retry_after_ns
        self.first_retained_offset = first_retained_offset

    @property
    def ok(self):
        return self.code == grpc.StatusCode.OK

    @property
    def throttled(self):
        return self.code == grpc.StatusCode.RESOURCE_EXHAUSTED

    @property
    def transient(self):
        """A transient failure worth retrying after a backoff."""
        return self.code in (grpc.StatusCode.UNAVAILABLE, grpc.StatusCode.DEADLINE_EXCEEDED)

    @property
    def out_of_range(self):
        return self.code == grpc.StatusCode.OUT_OF_RANGE

    def __repr__(self):
        return (f"BrokerStatus({self.code.name}, {self.message!r}, now_ns={self.now_ns}, "
                f"retry_after_ns={self.retry_after_ns}, "
                f"first_retained_offset={self.first_retained_offset})")


class PartitionOffset(NamedTuple):
    """Log shape: a partition and the next offset to read there. The same pair
    is a resume point (in a checkpoint) and a bookmark (stored at the broker)."""
    partition: int
    next_offset: int


ResumePoint = PartitionOffset
Bookmark = PartitionOffset


class Span(NamedTuple):
    """Log shape: a partition and a range of its offsets held by the reader:
    [start_offset, end_offset), or open ended (a live log) when end_offset is None."""
    partition: int
    start_offset: int
    end_offset: Optional[int] = None


class ReadResult:
    """Log shape: what one read returned.

    records: weir.v1.LogRecord messages in offset order, consecutive, from the
      requested offset (empty on error).
    next_offset: the offset after the last record returned (the requested
      offset if none).
    first_retained_offset: the partition's oldest offset still held.
    readable_end: the end of what is readable now.
    """

    __slots__ = ("records", "next_offset", "first_retained_offset", "readable_end")

    def __init__(self, records=(), next_offset=0, first_retained_offset=0, readable_end=0):
        self.records = list(records)
        self.next_offset = next_offset
        self.first_retained_offset = first_retained_offset
        self.readable_end = readable_end

    @property
    def caught_up(self):
        """Nothing more is readable now: next_offset == readable_end."""
        return self.next_offset >= self.readable_end

    def __repr__(self):
        return (f"ReadResult({len(self.records)} records, next_offset={self.next_offset}, "
                f"first_retained_offset={self.first_retained_offset}, "
                f"readable_end={self.readable_end})")


class SourceShape(enum.IntEnum):
    """Which shape of broker a source reads (the values of weir.v1.SourceShape);
    it must be the scenario's."""
    QUEUE = 1
    LOG = 2


def _unimplemented(method):
    return BrokerStatus(grpc.StatusCode.UNIMPLEMENTED,
                        f"{method} is not implemented by this broker client (log shape)")


class BrokerClient:
    """weir's Broker service as the source sees it. Every call is synchronous,
    bounded in wall time by the implementation, and never raises.

    pull(max_messages) -> (BrokerStatus, [weir.v1.Delivery]): up to max
      deliverable messages, each with a fresh receipt; an empty list on error.
    ack(receipts) -> BrokerStatus: removes the messages behind these receipts
      for good. A receipt that no longer holds its message is ignored.
    nack(receipts) -> BrokerStatus: makes those messages deliverable again.
    extend_lease(receipts, extension_ns) -> (BrokerStatus, [rejected receipts]):
      moves their lease deadline to now + extension_ns.

    Log shape (the defaults answer UNIMPLEMENTED, so a queue-only client need
    not define them):
    list_partitions() -> (BrokerStatus, [weir.v1.PartitionInfo]): every
      partition, its first retained offset and the offset its next appended
      record will get; an empty list on error.
    read(partition, offset, max_records=64, max_bytes=0, max_wait_ns=0)
      -> (BrokerStatus, ReadResult): records of `partition` from `offset` on
      (max_bytes 0: no byte bound; max_wait_ns > 0: a long poll at the readable
      end, in virtual time). On error the result has no records and
      next_offset == offset. OUT_OF_RANGE: `offset` is below the first retained
      offset, which the status carries.
    save_bookmarks([Bookmark]) -> BrokerStatus: stores them at the broker. Only
      resume points of a committed checkpoint may be saved.
    load_bookmarks() -> (BrokerStatus, [Bookmark]): the bookmarks stored so
      far (never-bookmarked partitions are left out).
    """

    def pull(self, max_messages):
        raise NotImplementedError

    def ack(self, receipts):
        raise NotImplementedError

    def nack(self, receipts):
        raise NotImplementedError

    def extend_lease(self, receipts, extension_ns):
        raise NotImplementedError

    def list_partitions(self):
        return _unimplemented("list_partitions"), []

    def read(self, partition, offset, max_records=64, max_bytes=0, max_wait_ns=0):
        return _unimplemented("read"), ReadResult(next_offset=offset)

    def save_bookmarks(self, bookmarks):
        return _unimplemented("save_bookmarks")

    def load_bookmarks(self):
        return _unimplemented("load_bookmarks"), []


class OpenInfo:
    """What open is told.

    incarnation: 1 for the first life of the connector, then 2, ...
    restore: True to restore from the committed checkpoint below.
    checkpoint_id, checkpoint_state (bytes the source returned from checkpoint).
    redelivery_horizon_ns: the broker redelivers an acked message no later than
      this long after the ack, so dedup memory of acked messages may be dropped
      after it.
    spans: log shape: the spans (Span) this reader holds, each from its resume
      point.
    new_partitions_held: log shape: partitions that appear after open are held
      too, from offset 0.
    reader, readers: many readers: this reader's index (0-based) and how many
      reader slots the run has (1 and reader 0 for a single reader). With
      several, the restored state is this reader's own last committed
      checkpoint, which may name other partitions than `spans`: the spans are
      what it holds now (spans move between readers).
    """

    __slots__ = ("incarnation", "restore", "checkpoint_id", "checkpoint_state",
                 "redelivery_horizon_ns", "spans", "new_partitions_held", "reader", "readers")

    def __init__(self, incarnation=0, restore=False, checkpoint_id=0, checkpoint_state=b"",
                 redelivery_horizon_ns=0, spans=(), new_partitions_held=False, reader=0,
                 readers=1):
        self.incarnation = incarnation
        self.restore = restore
        self.checkpoint_id = checkpoint_id
        self.checkpoint_state = checkpoint_state
        self.redelivery_horizon_ns = redelivery_horizon_ns
        self.spans = list(spans)
        self.new_partitions_held = new_partitions_held
        self.reader = reader
        self.readers = readers


class SourceError(Exception):
    """Raise from a Source call to fail that call with `code` and a message
    (e.g. open cannot parse a checkpoint). Any other exception fails the call
    with INTERNAL; neither ends the process."""

    def __init__(self, message, code=grpc.StatusCode.INVALID_ARGUMENT):
        super().__init__(message)
        self.code = code


class Source:
    """A source connector. The host calls open first (again on every new
    incarnation: open must reset all state), then any sequence of advance,
    checkpoint and committed, one at a time.

    shape: the shape of broker this source reads; a log reader sets
    `shape = SourceShape.LOG` in its class body."""

    shape = SourceShape.QUEUE

    def open(self, info, ctx):
        """Starts an incarnation. Raise SourceError if it cannot start; with
        info.restore set, weir reports that as a bad checkpoint."""
        raise NotImplementedError

    def advance(self, ctx):
        """One step: do a unit of work now and shape the step through ctx."""
        raise NotImplementedError

    def checkpoint(self, checkpoint_id, ctx):
        """Closes the current epoch as checkpoint `checkpoint_id`; returns bytes
        that, restored by open, resume after every record emitted so far."""
        raise NotImplementedError

    def committed(self, checkpoint_id, ctx):
        """Commit notice: checkpoint `checkpoint_id` and every epoch before it are
        durable. Acks for their messages are allowed from now on."""
        raise NotImplementedError

    def resume_points(self):
        """Log shape: called right after checkpoint returned, in the same
        connector call: the ResumePoint of every partition the reader holds (the
        next offset to read after every record emitted so far). Default: none
        (queue shape)."""
        return []

    def assign(self, spans, ctx):
        """Many readers, log shape: hold these spans (Span) too, each from its
        start_offset (its resume point). Default: fails the call UNIMPLEMENTED
        (a source that cannot take spans cannot run with several readers)."""
        raise SourceError("assign is not implemented by this source (several readers need it)",
                          grpc.StatusCode.UNIMPLEMENTED)

    def revoke(self, partitions, ctx):
        """Many readers, log shape: give up the whole span of each of these
        partitions: stop reading and emitting it at once and forget it (and
        anything read ahead for it). Default: fails the call UNIMPLEMENTED."""
        raise SourceError("revoke is not implemented by this source (several readers need it)",
                          grpc.StatusCode.UNIMPLEMENTED)

    def cut(self, partition, at_offset, ctx):
        """Many readers, log shape: give up the unread tail of the span held of
        `partition`; the runtime would like the tail to begin at `at_offset`.
        Returns (head, tail): for the cut offset c chosen (at or after every
        offset emitted from the span; later or earlier than at_offset),
        head = Span(partition, start as told, c) and tail = Span(partition, c,
        end or None); the span then ends at c. Declining: (head, None) with head
        the whole span, or just None (the host answers the span as open or
        assign told it). Default: declines."""
        return None


OPEN, ADVANCE, CHECKPOINT, COMMITTED = "open", "advance", "checkpoint", "committed"
ASSIGN, REVOKE, CUT = "assign", "revoke", "cut"


class _ClockedBroker(BrokerClient):
    """Forwards to the host's broker and moves the context's now from each answer."""

    __slots__ = ("_inner", "_ctx")

    def __init__(self, inner, ctx):
        self._inner = inner
        self._ctx = ctx

    def _observe(self, status):
        if status.now_ns is not None and status.now_ns > self._ctx._now_ns:
            self._ctx._now_ns = status.now_ns
        return status

    def pull(self, max_messages):
        status, deliveries = self._inner.pull(max_messages)
        return self._observe(status), deliveries

    def ack(self, receipts):
        return self._observe(self._inner.ack(receipts))

    def nack(self, receipts):
        return self._observe(self._inner.nack(receipts))

    def extend_lease(self, receipts, extension_ns):
        status, rejected = self._inner.extend_lease(receipts, extension_ns)
        return self._observe(status), rejected

    def list_partitions(self):
        status, partitions = self._inner.list_partitions()
        return self._observe(status), partitions

    def read(self, partition, offset, max_records=64, max_bytes=0, max_wait_ns=0):
        status, result = self._inner.read(partition, offset, max_records, max_bytes, max_wait_ns)
        return self._observe(status), result

    def save_bookmarks(self, bookmarks):
        return self._observe(self._inner.save_bookmarks(bookmarks))

    def load_bookmarks(self):
        status, bookmarks = self._inner.load_bookmarks()
        return self._observe(status), bookmarks


class Context:
    """Given to every Source call. Collects what an advance produces and keeps
    the virtual now.

    Invariants: now never decreases; the step-shaping methods (emit,
    emit_log_record, report_gap, set_watermark, resume_at, finish) are valid
    only in an advance call —
    elsewhere they are ignored and recorded as misuse, which the host turns into
    a failed call (FAILED_PRECONDITION) so the mistake surfaces as a protocol
    error.
    """

    DEFAULT_RESUME_DELAY_NS = 100_000_000  # 100 ms virtual

    def __init__(self, call, now_ns, broker):
        self.call = call
        self._now_ns = now_ns
        self.broker = _ClockedBroker(broker, self)
        self.records = []  # (message_id, event_time_ns, value) in emission order
        self.log_records = []  # (partition, offset, event_time_ns, value) in emission order
        self.gaps = []  # (partition, from_offset, to_offset) in report order
        self.watermark_ns = None
        self.resume_at_ns = None
        self.finished = False
        self.misuse = ""

    @property
    def now(self):
        """The virtual now in ns. Moves forward as broker calls return."""
        return self._now_ns

    def _allowed_here(self, method):
        if self.call == ADVANCE:
            return True
        if not self.misuse:
            self.misuse = (f"{method} called during {self.call}; it shapes a step and is "
                           "allowed only during advance")
        return False

    def emit(self, message_id, event_time_ns, value=b""):
        """Advance only. Adds a record produced from message `message_id`."""
        if self._allowed_here("emit"):
            self.records.append((message_id, event_time_ns, value))

    def emit_log_record(self, partition, offset, event_time_ns, value=b""):
        """Advance only, log shape. Adds a record produced from the log record
        at (partition, offset)."""
        if self._allowed_here("emit_log_record"):
            self.log_records.append((partition, offset, event_time_ns, value))

    def report_gap(self, partition, from_offset, to_offset):
        """Advance only, log shape. Offsets [from_offset, to_offset) of
        `partition` will never be emitted: retention deleted them before they
        could be read. A reader that skips offsets must say so; skipping
        silently is a violation."""
        if self._allowed_here("report_gap"):
            self.gaps.append((partition, from_offset, to_offset))

    def set_watermark(self, watermark_ns):
        """Advance only. The watermark after this step's records; the last call
        wins. Never called: the step reports no watermark."""
        if self._allowed_here("set_watermark"):
            self.watermark_ns = watermark_ns

    def resume_at(self, at_ns):
        """Advance only. Call advance again at this virtual time (a time already
        past means now). The last of resume_at/finish wins. With neither, the
        step asks to be called again at now + DEFAULT_RESUME_DELAY_NS."""
        if self._allowed_here("resume_at"):
            self.resume_at_ns = at_ns
            self.finished = False

    def finish(self):
        """Advance only. No more work will ever come from this source."""
        if self._allowed_here("finish"):
            self.finished = True
            self.resume_at_ns = None

    def next_resume_ns(self):
        """For hosts: the resume time the step asks for (None when finished),
        after the default rule and the at-least-now rule."""
        if self.finished:
            return None
        if self.resume_at_ns is None:
            return clamp_int64(self._now_ns + self.DEFAULT_RESUME_DELAY_NS)
        return clamp_int64(max(self.resume_at_ns, self._now_ns))
