"""Tests for weir.adapter.backoff against gRPC's connection-backoff parameters.

Source of every constant below: grpc doc/connection-backoff.md, "Proposed
Backoff Algorithm" (docs/references.md): INITIAL_BACKOFF 1 s, MULTIPLIER
1.6, JITTER 0.2, MAX_BACKOFF 120 s; next = min(cur x 1.6, 120 s), and the
deadline is now + next +/- 0.2 x next. MIN_CONNECT_TIMEOUT (20 s) bounds a
connection attempt, not the wait between broker calls, so it has no
counterpart here.

As in the C++ adapter (tests/unit/backoff_test.cc), the first delay is
jittered too (the doc's pseudocode waits exactly INITIAL_BACKOFF first): the
tests accept 1 s +/- 20 % for it.
"""

import unittest

import grpc

from weir.adapter import Backoff, BackoffPolicy, BrokerStatus, RetryGate, mix_seed
from weir.adapter import backoff as backoff_module

SECOND = 1_000_000_000
# grpc doc/connection-backoff.md, "Proposed Backoff Algorithm".
INITIAL_BACKOFF_NS = 1.0 * SECOND
MULTIPLIER = 1.6
JITTER = 0.2
MAX_BACKOFF_NS = 120.0 * SECOND


def unjittered_delays(n):
    """The doc's delays: 1 s, then min(cur x 1.6, 120 s)."""
    out, cur = [], INITIAL_BACKOFF_NS
    for _ in range(n):
        out.append(cur)
        cur = min(cur * MULTIPLIER, MAX_BACKOFF_NS)
    return out


def delays(seed, n):
    b = Backoff(seed)
    return [b.next_delay() for _ in range(n)]


class BackoffPolicyTest(unittest.TestCase):
    def test_defaults_are_grpc_connection_backoff_parameters(self):
        # grpc doc/connection-backoff.md, "Proposed Backoff Algorithm".
        p = BackoffPolicy()
        self.assertEqual(p.initial_ns, 1 * SECOND)   # INITIAL_BACKOFF = 1 second
        self.assertEqual(p.multiplier, 1.6)          # MULTIPLIER = 1.6
        self.assertEqual(p.jitter, 0.2)              # JITTER = 0.2
        self.assertEqual(p.max_ns, 120 * SECOND)     # MAX_BACKOFF = 120 seconds


class BackoffTest(unittest.TestCase):
    def assert_within_jitter(self, delay, unjittered, i):
        # +/- JITTER of the un-jittered value, 1 ns of slack for rounding to ns.
        self.assertGreaterEqual(delay, unjittered * (1 - JITTER) - 1, f"failure #{i}")
        self.assertLessEqual(delay, unjittered * (1 + JITTER) + 1, f"failure #{i}")

    def test_each_delay_is_within_twenty_percent_of_the_capped_exponential_sequence(self):
        # 20 failures reach the cap (1.6^11 s > 120 s).
        expected = unjittered_delays(20)
        for seed in (0, 1, 7, 0xDEADBEEF, (1 << 64) - 1):
            for i, d in enumerate(delays(seed, 20)):
                self.assert_within_jitter(d, expected[i], i)
                self.assertIsInstance(d, int)

    def test_spot_values_of_the_unjittered_sequence(self):
        # 1 s, 1.6 s, 2.56 s, 4.096 s; 1.6^10 s = 109.95 s is the last below the cap.
        e = unjittered_delays(12)
        self.assertEqual(e[0], 1.0e9)
        self.assertEqual(e[1], 1.6e9)
        self.assertAlmostEqual(e[2], 2.56e9, delta=1)
        self.assertAlmostEqual(e[3], 4.096e9, delta=1)
        self.assertAlmostEqual(e[10], 109.9511627776e9, delta=1e3)
        self.assertEqual(e[11], 120e9)

    def test_delays_stay_capped_at_max_backoff_plus_jitter_after_many_failures(self):
        # MAX_BACKOFF caps the un-jittered value; the jitter still applies, so
        # every delay past the cap lies in [96 s, 144 s].
        b = Backoff(99)
        capped = [b.next_delay() for _ in range(1000)][11:]
        self.assertEqual(b.failures, 1000)
        self.assertGreaterEqual(min(capped), 96 * SECOND - 1)
        self.assertLessEqual(max(capped), 144 * SECOND + 1)
        # Spread over the range, not stuck at one end: 989 uniform draws over
        # +/-20 % reach within 2 % of both ends (a miss has odds ~0.9^989).
        self.assertLess(min(capped), 98.4 * SECOND)
        self.assertGreater(max(capped), 141.6 * SECOND)

    def test_reset_starts_again_from_the_initial_backoff(self):
        b = Backoff(3)
        for _ in range(15):
            b.next_delay()
        self.assertGreater(b.next_delay(), 90 * SECOND)
        b.reset()
        self.assertEqual(b.failures, 0)
        self.assert_within_jitter(b.next_delay(), INITIAL_BACKOFF_NS, 0)
        self.assert_within_jitter(b.next_delay(), INITIAL_BACKOFF_NS * MULTIPLIER, 1)
        self.assertEqual(b.failures, 2)

    def test_same_seed_gives_the_same_delays_and_another_seed_others(self):
        # Determinism: a replayed run must retry at the same virtual times.
        self.assertEqual(delays(42, 50), delays(42, 50))
        self.assertNotEqual(delays(42, 50), delays(43, 50))
        self.assertNotEqual(delays(mix_seed(1, 1), 50), delays(mix_seed(1, 2), 50))
        self.assertEqual(mix_seed(5, 9), mix_seed(5, 9))
        self.assertTrue(0 <= mix_seed(5, 9) < 1 << 64)

    def test_jitter_source_is_splitmix64(self):
        # SplitMix64 from seed 0, computed from the published reference
        # implementation (splitmix64.c, S. Vigna; docs/references.md). The
        # same generator drives the C++ adapter's jitter, which is what makes
        # the two adapters retry at the same virtual times.
        expected = [0xE220A8397B1DCDAF, 0x6E789E6AA1B965F4, 0x06C45D188009454F,
                    0xF88BB8A8724C81EC]
        state, got = 0, []
        for _ in expected:
            state = (state + backoff_module._GOLDEN_GAMMA) & ((1 << 64) - 1)
            got.append(backoff_module._mix64(state))
        self.assertEqual(got, expected)
        # Backoff draws its unit from the top 53 bits of that stream.
        first_factor = 1.0 + JITTER * (2.0 * ((expected[0] >> 11) / (1 << 53)) - 1.0)
        self.assertEqual(Backoff(0).next_delay(), round(INITIAL_BACKOFF_NS * first_factor))

    def test_a_custom_policy_is_honoured(self):
        b = Backoff(5, BackoffPolicy(initial_ns=100, multiplier=2.0, max_ns=400, jitter=0.0))
        self.assertEqual([b.next_delay() for _ in range(5)], [100, 200, 400, 400, 400])


class RetryGateTest(unittest.TestCase):
    def assert_within_jitter(self, delay, unjittered):
        self.assertGreaterEqual(delay, unjittered * (1 - JITTER) - 1)
        self.assertLessEqual(delay, unjittered * (1 + JITTER) + 1)

    def test_transient_failure_closes_the_gate_for_one_jittered_initial_backoff(self):
        g = RetryGate(11)
        self.assertTrue(g.is_open(0))
        unavailable = BrokerStatus(grpc.StatusCode.UNAVAILABLE)
        now = 500 * SECOND
        g.on_failure(unavailable, now)
        self.assert_within_jitter(g.not_before - now, INITIAL_BACKOFF_NS)
        self.assertFalse(g.is_open(now))
        self.assertFalse(g.is_open(g.not_before - 1))
        self.assertTrue(g.is_open(g.not_before))
        # A second consecutive failure waits about 1.6 s, a third 2.56 s; a
        # success starts over.
        g.on_failure(unavailable, g.not_before)
        t = g.not_before
        g.on_failure(BrokerStatus(grpc.StatusCode.DEADLINE_EXCEEDED), t)
        self.assert_within_jitter(g.not_before - t, INITIAL_BACKOFF_NS * MULTIPLIER * MULTIPLIER)
        g.on_success()
        g.on_failure(unavailable, t)
        self.assert_within_jitter(g.not_before - t, INITIAL_BACKOFF_NS)

    def test_throttled_with_hint_waits_exactly_the_retry_after(self):
        # RFC 9110 section 10.2.3 Retry-After: wait at least the server's hint.
        g = RetryGate(12)
        throttled = BrokerStatus(grpc.StatusCode.RESOURCE_EXHAUSTED,
                                 retry_after_ns=7 * SECOND + 3)
        g.on_failure(throttled, 100 * SECOND)
        self.assertEqual(g.not_before, 107 * SECOND + 3)
        self.assertFalse(g.is_open(107 * SECOND + 2))
        self.assertTrue(g.is_open(107 * SECOND + 3))

    def test_throttled_without_hint_falls_back_to_the_backoff(self):
        g = RetryGate(13)
        g.on_failure(BrokerStatus(grpc.StatusCode.RESOURCE_EXHAUSTED), 0)
        self.assert_within_jitter(g.not_before, INITIAL_BACKOFF_NS)

    def test_a_huge_retry_after_saturates_at_the_int64_range(self):
        g = RetryGate(14)
        g.on_failure(BrokerStatus(grpc.StatusCode.RESOURCE_EXHAUSTED, retry_after_ns=1 << 70),
                     1 << 62)
        self.assertEqual(g.not_before, (1 << 63) - 1)


if __name__ == "__main__":
    unittest.main()
