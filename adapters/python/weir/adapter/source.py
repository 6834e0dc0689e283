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
"""

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
    """

    __slots__ = ("code", "message", "now_ns", "retry_after_ns")

    def __init__(self, code=grpc.StatusCode.OK, message="", now_ns=None, retry_after_ns=None):
        self.code = code
        self.message = message
        self.now_ns = now_ns
        self.retry_after_ns = retry_after_ns

    @property
    def ok(self):
        return self.code == grpc.StatusCode.OK

    @property
    def throttled(self):
        return self.code == grpc.StatusCode.RESOURCE_EXHAUSTED

    def __repr__(self):
        return (f"BrokerStatus({self.code.name}, {self.message!r}, now_ns={self.now_ns}, "
                f"retry_after_ns={self.retry_after_ns})")


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
    """

    def pull(self, max_messages):
        raise NotImplementedError

    def ack(self, receipts):
        raise NotImplementedError

    def nack(self, receipts):
        raise NotImplementedError

    def extend_lease(self, receipts, extension_ns):
        raise NotImplementedError


class OpenInfo:
    """What open is told.

    incarnation: 1 for the first life of the connector, then 2, ...
    restore: True to restore from the committed checkpoint below.
    checkpoint_id, checkpoint_state (bytes the source returned from checkpoint).
    redelivery_horizon_ns: the broker redelivers an acked message no later than
      this long after the ack, so dedup memory of acked messages may be dropped
      after it.
    """

    __slots__ = ("incarnation", "restore", "checkpoint_id", "checkpoint_state",
                 "redelivery_horizon_ns")

    def __init__(self, incarnation=0, restore=False, checkpoint_id=0, checkpoint_state=b"",
                 redelivery_horizon_ns=0):
        self.incarnation = incarnation
        self.restore = restore
        self.checkpoint_id = checkpoint_id
        self.checkpoint_state = checkpoint_state
        self.redelivery_horizon_ns = redelivery_horizon_ns


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
    checkpoint and committed, one at a time."""

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


OPEN, ADVANCE, CHECKPOINT, COMMITTED = "open", "advance", "checkpoint", "committed"


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


class Context:
    """Given to every Source call. Collects what an advance produces and keeps
    the virtual now.

    Invariants: now never decreases; the step-shaping methods (emit,
    set_watermark, resume_at, finish) are valid only in an advance call —
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
