"""Event-time watermark helpers, written once so connectors do not get them wrong.

Watermark follows the largest event time seen and never decreases, even when
events arrive out of order (a watermark that followed the latest event time
would move back on the first out-of-order event). Restore it from the
checkpoint: a restored incarnation must not report less than the watermark
committed with its checkpoint.

IdleRule moves the watermark while no input arrives: a source with no new input
must still move its watermark forward, or windows downstream never close. After
`timeout_ns` of virtual time without input it raises the watermark to
now - lag_ns (never lowers it). lag_ns must cover the source's largest
event-time skew, or records arriving after the gap are late; to satisfy a
profile's stall rule, pick timeout_ns <= profile idle_timeout_ms and
lag_ns <= profile idle_max_lag_ms, and poll at least that often while idle.
These are the semantics of the C++ reference's --idle-timeout-ms and
--idle-lag-ms (fixtures/connectors/reference_source.h).

Example, inside Source.advance:
    for d in deliveries:
        ctx.emit(d.message_id, d.event_time_ns, d.payload)
        self.watermark.observe(d.event_time_ns)
    self.idle.step(ctx.now, had_input=bool(deliveries), watermark=self.watermark)
    if self.watermark.value is not None:
        ctx.set_watermark(self.watermark.value)
"""

from .source import clamp_int64


class Watermark:
    """The largest event time observed; None before the first. Never decreases."""

    __slots__ = ("value",)

    def __init__(self, restored_ns=None):
        self.value = restored_ns

    def observe(self, event_time_ns):
        """Takes one event time into account; lower values change nothing."""
        if self.value is None or event_time_ns > self.value:
            self.value = event_time_ns

    def advance_to(self, ns):
        """Raises the watermark to ns if that is higher (idle advance)."""
        self.observe(ns)


class IdleRule:
    """Counts as idle once no input has arrived for timeout_ns; while idle,
    each step raises the watermark to now - lag_ns. Defaults match the C++
    reference connector: 10 s timeout, 5 s lag."""

    __slots__ = ("timeout_ns", "lag_ns", "last_input_ns")

    def __init__(self, timeout_ns=10_000_000_000, lag_ns=5_000_000_000, now_ns=0):
        if timeout_ns < 0 or lag_ns < 0:
            raise ValueError(f"IdleRule: timeout_ns ({timeout_ns}) and lag_ns ({lag_ns}) "
                             "must be >= 0")
        self.timeout_ns = timeout_ns
        self.lag_ns = lag_ns
        self.last_input_ns = now_ns

    def start(self, now_ns):
        """Starts the idle clock, e.g. in open: no input yet as of now_ns."""
        self.last_input_ns = now_ns

    def idle(self, now_ns):
        """True once timeout_ns has passed since the last input."""
        return now_ns - self.last_input_ns >= self.timeout_ns

    def step(self, now_ns, had_input, watermark):
        """Call once per step after handling its input. A step with input resets
        the idle clock; a step without input, once idle, advances `watermark` to
        now - lag_ns. Returns True when it advanced (or tried to) the watermark."""
        if had_input:
            self.last_input_ns = now_ns
            return False
        if not self.idle(now_ns):
            return False
        watermark.advance_to(clamp_int64(now_ns - self.lag_ns))
        return True
