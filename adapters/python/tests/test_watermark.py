"""Tests for weir.adapter.watermark: the watermark that follows the largest
event time seen, and the idle rule.

Facts checked (docs/references.md, "Facts of the trade"): a watermark
never moves backwards (Akidau et al., "The Dataflow Model", PVLDB 8(12), 2015,
section 1.3); one that follows the largest event time seen never decreases even
when events arrive out of order (common practice); a source with no new input
must still move its watermark forward (common practice).
"""

import random
import unittest

from weir.adapter import INT64_MIN, IdleRule, Watermark

SECOND = 1_000_000_000


class WatermarkTest(unittest.TestCase):
    def test_starts_unset_or_at_the_restored_value(self):
        self.assertIsNone(Watermark().value)
        self.assertEqual(Watermark(42).value, 42)

    def test_follows_the_largest_event_time_even_out_of_order(self):
        w = Watermark()
        for t, expected in [(5, 5), (9, 9), (7, 9), (-3, 9), (9, 9), (12, 12)]:
            w.observe(t)
            self.assertEqual(w.value, expected, f"after observing {t}")

    def test_never_decreases_and_equals_the_running_maximum(self):
        # Model check against max() over random out-of-order event times.
        rng = random.Random(7)
        w, seen = Watermark(), []
        for _ in range(2000):
            t = rng.randrange(-10**12, 10**12)
            before = w.value
            w.observe(t)
            seen.append(t)
            self.assertEqual(w.value, max(seen))
            if before is not None:
                self.assertGreaterEqual(w.value, before)

    def test_a_restored_watermark_is_not_lowered_by_older_events(self):
        w = Watermark(100)
        w.observe(50)
        w.advance_to(60)
        self.assertEqual(w.value, 100)
        w.advance_to(150)
        self.assertEqual(w.value, 150)


class IdleRuleTest(unittest.TestCase):
    def test_not_idle_before_the_timeout(self):
        rule, w = IdleRule(timeout_ns=10 * SECOND, lag_ns=5 * SECOND, now_ns=0), Watermark(1)
        self.assertFalse(rule.step(10 * SECOND - 1, had_input=False, watermark=w))
        self.assertEqual(w.value, 1)

    def test_idle_at_the_timeout_moves_the_watermark_to_now_minus_lag(self):
        rule, w = IdleRule(timeout_ns=10 * SECOND, lag_ns=5 * SECOND, now_ns=0), Watermark(1)
        self.assertTrue(rule.step(10 * SECOND, had_input=False, watermark=w))
        self.assertEqual(w.value, 5 * SECOND)
        # Later idle steps keep it moving with virtual now.
        rule.step(17 * SECOND, had_input=False, watermark=w)
        self.assertEqual(w.value, 12 * SECOND)

    def test_an_unset_watermark_gets_one_when_idle(self):
        rule, w = IdleRule(timeout_ns=SECOND, lag_ns=0, now_ns=3 * SECOND), Watermark()
        rule.step(4 * SECOND, had_input=False, watermark=w)
        self.assertEqual(w.value, 4 * SECOND)

    def test_input_restarts_the_idle_clock_and_does_not_advance(self):
        rule, w = IdleRule(timeout_ns=10 * SECOND, lag_ns=SECOND, now_ns=0), Watermark(0)
        self.assertFalse(rule.step(30 * SECOND, had_input=True, watermark=w))
        self.assertEqual(w.value, 0)
        self.assertFalse(rule.idle(39 * SECOND))
        self.assertFalse(rule.step(39 * SECOND, had_input=False, watermark=w))
        self.assertTrue(rule.step(40 * SECOND, had_input=False, watermark=w))
        self.assertEqual(w.value, 39 * SECOND)

    def test_never_lowers_a_watermark_ahead_of_now_minus_lag(self):
        # Event times may run ahead of virtual now (skew): idle must not pull back.
        rule, w = IdleRule(timeout_ns=SECOND, lag_ns=5 * SECOND, now_ns=0), Watermark(100 * SECOND)
        rule.step(20 * SECOND, had_input=False, watermark=w)
        self.assertEqual(w.value, 100 * SECOND)

    def test_start_resets_the_clock_for_a_new_incarnation(self):
        rule, w = IdleRule(timeout_ns=10 * SECOND, lag_ns=0, now_ns=0), Watermark()
        rule.start(100 * SECOND)
        self.assertFalse(rule.step(105 * SECOND, had_input=False, watermark=w))
        self.assertIsNone(w.value)

    def test_lag_past_the_int64_range_saturates(self):
        rule, w = IdleRule(timeout_ns=0, lag_ns=(1 << 63) - 1, now_ns=-(1 << 62)), Watermark()
        rule.step(-(1 << 62), had_input=False, watermark=w)
        self.assertEqual(w.value, INT64_MIN)

    def test_negative_settings_are_refused_with_their_names(self):
        with self.assertRaisesRegex(ValueError, "timeout_ns"):
            IdleRule(timeout_ns=-1)


if __name__ == "__main__":
    unittest.main()
