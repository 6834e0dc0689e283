"""Tests for weir.adapter.Context: virtual time from broker answers, the
step-shaping rules and misuse outside advance (mirrors the C++ Context in
adapters/cpp/include/weir/adapter/source.h)."""

import unittest

import grpc

from weir.adapter import BrokerClient, BrokerStatus, Context
from weir.adapter.source import ADVANCE, CHECKPOINT


class ScriptedBroker(BrokerClient):
    """Answers each call with the next scripted status."""

    def __init__(self, *statuses):
        self.statuses = list(statuses)
        self.calls = []

    def pull(self, max_messages):
        self.calls.append(("pull", max_messages))
        return self.statuses.pop(0), []

    def ack(self, receipts):
        self.calls.append(("ack", list(receipts)))
        return self.statuses.pop(0)


class ContextTest(unittest.TestCase):
    def test_now_follows_broker_answers_and_never_decreases(self):
        broker = ScriptedBroker(BrokerStatus(now_ns=150),
                                BrokerStatus(grpc.StatusCode.UNAVAILABLE, now_ns=120),
                                BrokerStatus(grpc.StatusCode.UNAVAILABLE))
        ctx = Context(ADVANCE, 100, broker)
        status, got = ctx.broker.pull(8)
        self.assertTrue(status.ok)
        self.assertEqual((ctx.now, got), (150, []))
        self.assertFalse(ctx.broker.ack([1]).ok)
        self.assertEqual(ctx.now, 150)  # an earlier now in an answer is ignored
        ctx.broker.ack([2])              # an answer without a now leaves it alone
        self.assertEqual(ctx.now, 150)
        self.assertEqual(broker.calls, [("pull", 8), ("ack", [1]), ("ack", [2])])

    def test_default_resume_is_now_plus_100ms_and_the_past_means_now(self):
        ctx = Context(ADVANCE, 1000, ScriptedBroker())
        self.assertEqual(ctx.next_resume_ns(), 1000 + Context.DEFAULT_RESUME_DELAY_NS)
        ctx.resume_at(10)
        self.assertEqual(ctx.next_resume_ns(), 1000)
        ctx.finish()
        self.assertIsNone(ctx.next_resume_ns())
        ctx.resume_at(5000)  # the last of resume_at/finish wins
        self.assertEqual(ctx.next_resume_ns(), 5000)

    def test_step_shaping_outside_advance_is_ignored_and_reported(self):
        ctx = Context(CHECKPOINT, 0, ScriptedBroker())
        ctx.emit(1, 2, b"x")
        ctx.set_watermark(3)
        self.assertEqual(ctx.records, [])
        self.assertIsNone(ctx.watermark_ns)
        self.assertEqual(ctx.misuse, "emit called during checkpoint; it shapes a step and is "
                                     "allowed only during advance")

    def test_records_keep_their_emission_order(self):
        ctx = Context(ADVANCE, 0, ScriptedBroker())
        ctx.emit(7, 70, b"a")
        ctx.emit(3, 30)
        ctx.set_watermark(70)
        self.assertEqual(ctx.records, [(7, 70, b"a"), (3, 30, b"")])
        self.assertEqual((ctx.watermark_ns, ctx.misuse), (70, ""))


if __name__ == "__main__":
    unittest.main()
