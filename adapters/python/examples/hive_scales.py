#!/usr/bin/python3
# hive_scales: a small exactly-once source connector for hive scales that
# publish weight readings, written on weir's Python adapter. It is the example
# of docs/python.md and passes the quick suite. It keeps every emitted id in its
# checkpoint (simple, but unbounded); fixtures/connectors/python/reference_source.py
# shows how to forget ids after the broker's redelivery horizon.
#
# Run by weir: PYTHONPATH=build/adapters/python build/harness/weir run ... \
#   --connector adapters/python/examples/hive_scales.py
import json

from weir.adapter import IdleRule, RetryGate, Source, Watermark, mix_seed, serve_forever

SECOND = 1_000_000_000
IDLE_POLL_NS = SECOND // 2  # how often to pull while nothing arrives (virtual time)


class HiveScales(Source):
    def open(self, info, ctx):
        # A new incarnation: forget everything not in the committed checkpoint.
        self.watermark = Watermark()
        self.idle = IdleRule(timeout_ns=10 * SECOND, lag_ns=5 * SECOND, now_ns=ctx.now)
        # Seeded from the incarnation, never from the clock: runs must replay.
        self.pull_gate = RetryGate(mix_seed(info.incarnation, 1))
        self.ack_gate = RetryGate(mix_seed(info.incarnation, 2))
        self.emitted = set()  # ids of messages with a record (dedup across restarts)
        self.epoch = []       # receipts behind the open epoch's records
        self.pending = {}     # checkpoint id -> receipts, until its commit notice
        self.to_ack = []      # receipts whose records are committed
        if info.restore:
            state = json.loads(info.checkpoint_state)
            self.watermark = Watermark(state["watermark"])
            self.emitted = set(state["emitted"])

    def advance(self, ctx):
        self.flush_acks(ctx)
        got = []
        if self.pull_gate.is_open(ctx.now):
            status, got = ctx.broker.pull(64)
            if status.ok:
                self.pull_gate.on_success()
            else:  # throttled: wait the retry-after; transient: back off
                self.pull_gate.on_failure(status, ctx.now)
        for d in got:
            # A redelivery is acked after the next commit, never emitted twice.
            self.epoch.append(d.receipt)
            if d.message_id not in self.emitted:
                self.emitted.add(d.message_id)
                ctx.emit(d.message_id, d.event_time_ns, d.payload)
                self.watermark.observe(d.event_time_ns)
        self.idle.step(ctx.now, had_input=bool(got), watermark=self.watermark)
        if self.watermark.value is not None:
            ctx.set_watermark(self.watermark.value)
        next_ns = ctx.now if got else ctx.now + IDLE_POLL_NS
        next_ns = max(next_ns, self.pull_gate.not_before)
        if self.to_ack:
            next_ns = min(next_ns, max(ctx.now, self.ack_gate.not_before))
        ctx.resume_at(next_ns)

    def checkpoint(self, checkpoint_id, ctx):
        self.pending[checkpoint_id] = self.epoch
        self.epoch = []
        return json.dumps({"watermark": self.watermark.value,
                           "emitted": sorted(self.emitted)}).encode()

    def committed(self, checkpoint_id, ctx):
        # Only now are these records durable: their messages may be acked.
        for done in sorted(c for c in self.pending if c <= checkpoint_id):
            self.to_ack += self.pending.pop(done)
        self.flush_acks(ctx)

    def flush_acks(self, ctx):
        if self.to_ack and self.ack_gate.is_open(ctx.now):
            status = ctx.broker.ack(self.to_ack)
            if status.ok:
                self.ack_gate.on_success()
                self.to_ack = []
            else:
                self.ack_gate.on_failure(status, ctx.now)


if __name__ == "__main__":
    serve_forever(HiveScales())
