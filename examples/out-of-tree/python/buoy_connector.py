#!/usr/bin/python3
# buoy_connector.py: the weather-buoy source of buoy_source.h in Python, on
# weir's Python adapter as installed (PREFIX/lib/python3/dist-packages, on
# Debian's python3 path when weir came from the .deb; else on PYTHONPATH).
# The same rules: ack only after the commit notice, the ids with a record and
# the watermark in the checkpoint, an idle watermark, retries that wait.
#
#   weir certify --suite quick --connector python/buoy_connector.py
import json

from weir.adapter import IdleRule, RetryGate, Source, Watermark, mix_seed, serve_forever

SECOND = 1_000_000_000
IDLE_POLL_NS = SECOND // 2  # how often to pull while nothing arrives (virtual time)


class BuoySource(Source):
    def open(self, info, ctx):
        # A new incarnation keeps nothing but the committed checkpoint.
        self.watermark = Watermark()
        self.idle = IdleRule(timeout_ns=10 * SECOND, lag_ns=5 * SECOND, now_ns=ctx.now)
        # Seeded from the incarnation, never from a clock: runs must replay.
        self.pull_gate = RetryGate(mix_seed(info.incarnation, 1))
        self.ack_gate = RetryGate(mix_seed(info.incarnation, 2))
        self.emitted = set()  # message ids with a record
        self.epoch = []       # receipts of the open epoch
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
        for report in got:
            # A redelivered report is acked after the next commit, never emitted twice.
            self.epoch.append(report.receipt)
            if report.message_id not in self.emitted:
                self.emitted.add(report.message_id)
                ctx.emit(report.message_id, report.event_time_ns, report.payload)
                self.watermark.observe(report.event_time_ns)
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
    serve_forever(BuoySource())
