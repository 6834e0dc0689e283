"""Tests for the gRPC edge of the Python adapter (weir.adapter.server) without
sockets: the Connector service's answers, how a source's exceptions and misuse
become failed calls, and how broker failures become BrokerStatus values."""

import os
import unittest

import grpc

from weir.adapter import BrokerClient, BrokerStatus, Source, SourceError
from weir.adapter import server as serve_module
from weir.v1 import connector_pb2


class RecordingContext:
    """Stands in for grpc.ServicerContext: keeps the code and details set."""

    def __init__(self):
        self.code = None
        self.details = None

    def set_code(self, code):
        self.code = code

    def set_details(self, details):
        self.details = details


class NoBroker(BrokerClient):
    pass


class Scripted(Source):
    def __init__(self, advance=None, open=None, checkpoint=None):
        self._advance, self._open, self._checkpoint = advance, open, checkpoint

    def open(self, info, ctx):
        if self._open:
            self._open(info, ctx)

    def advance(self, ctx):
        self._advance(ctx)

    def checkpoint(self, checkpoint_id, ctx):
        return self._checkpoint(checkpoint_id, ctx)

    def committed(self, checkpoint_id, ctx):
        pass


def service(source):
    return serve_module._ConnectorService(source, NoBroker())


class ConnectorServiceTest(unittest.TestCase):
    def test_advance_answers_records_watermark_and_resume_time(self):
        def advance(ctx):
            ctx.emit(4, 40, b"w")
            ctx.emit(2, 20)
            ctx.set_watermark(40)
            ctx.resume_at(900)

        rc = RecordingContext()
        got = service(Scripted(advance)).Advance(connector_pb2.AdvanceRequest(now_ns=500), rc)
        self.assertIsNone(rc.code)
        self.assertEqual([(r.message_id, r.event_time_ns, r.value) for r in got.records],
                         [(4, 40, b"w"), (2, 20, b"")])
        self.assertEqual((got.watermark_ns, got.resume_at_ns), (40, 900))

    def test_a_step_without_watermark_or_resume_gets_neither_and_the_default_delay(self):
        got = service(Scripted(lambda ctx: None)).Advance(
            connector_pb2.AdvanceRequest(now_ns=500), RecordingContext())
        self.assertFalse(got.HasField("watermark_ns"))
        self.assertEqual(got.resume_at_ns, 500 + 100_000_000)

    def test_finish_answers_finished(self):
        got = service(Scripted(lambda ctx: ctx.finish())).Advance(
            connector_pb2.AdvanceRequest(now_ns=1), RecordingContext())
        self.assertEqual(got.WhichOneof("next"), "finished")

    def test_an_exception_fails_the_call_with_internal_and_names_it(self):
        def advance(ctx):
            raise KeyError("parcel-7")

        rc = RecordingContext()
        service(Scripted(advance)).Advance(connector_pb2.AdvanceRequest(), rc)
        self.assertEqual(rc.code, grpc.StatusCode.INTERNAL)
        self.assertRegex(rc.details, r"^source raised during advance: KeyError: 'parcel-7' "
                                     r"\(.*test_server\.py:\d+\)$")

    def test_source_error_in_open_fails_with_its_code(self):
        def open_(info, ctx):
            raise SourceError(f"checkpoint {info.checkpoint_id} is unreadable")

        rc = RecordingContext()
        service(Scripted(open=open_)).Open(
            connector_pb2.OpenRequest(restore=True, checkpoint_id=3), rc)
        self.assertEqual(rc.code, grpc.StatusCode.INVALID_ARGUMENT)
        self.assertEqual(rc.details, "open: checkpoint 3 is unreadable")

    def test_emitting_outside_advance_fails_with_failed_precondition(self):
        def checkpoint(checkpoint_id, ctx):
            ctx.emit(1, 1)
            return b""

        rc = RecordingContext()
        service(Scripted(checkpoint=checkpoint)).Checkpoint(connector_pb2.CheckpointRequest(), rc)
        self.assertEqual(rc.code, grpc.StatusCode.FAILED_PRECONDITION)
        self.assertIn("emit called during checkpoint", rc.details)

    def test_checkpoint_state_is_returned(self):
        got = service(Scripted(checkpoint=lambda i, ctx: b"state-%d" % i)).Checkpoint(
            connector_pb2.CheckpointRequest(checkpoint_id=9), RecordingContext())
        self.assertEqual(got.state, b"state-9")


class FakeRpcError(grpc.RpcError):
    def __init__(self, code, details, trailers):
        self._code, self._details, self._trailers = code, details, trailers

    def code(self):
        return self._code

    def details(self):
        return self._details

    def trailing_metadata(self):
        return self._trailers


class BrokerFailureTest(unittest.TestCase):
    # Keys from proto/weir/v1/broker.proto: "weir-now-ns", "retry-after-ms".
    def test_throttled_call_carries_now_and_retry_after_in_ns(self):
        s = serve_module._failed(FakeRpcError(grpc.StatusCode.RESOURCE_EXHAUSTED, "slow down",
                                              (("weir-now-ns", "1234"), ("retry-after-ms", "250"))))
        self.assertTrue(s.throttled)
        self.assertEqual((s.now_ns, s.retry_after_ns, s.message), (1234, 250_000_000, "slow down"))

    def test_retry_after_only_counts_when_throttled(self):
        s = serve_module._failed(FakeRpcError(grpc.StatusCode.UNAVAILABLE, "",
                                              (("retry-after-ms", "250"),)))
        self.assertIsNone(s.retry_after_ns)
        self.assertIsNone(s.now_ns)

    def test_malformed_or_missing_trailers_are_ignored(self):
        s = serve_module._failed(FakeRpcError(grpc.StatusCode.RESOURCE_EXHAUSTED, None,
                                              (("retry-after-ms", "soon"),)))
        self.assertEqual((s.retry_after_ns, s.message), (None, ""))
        s = serve_module._failed(FakeRpcError(grpc.StatusCode.DEADLINE_EXCEEDED, "", None))
        self.assertFalse(s.ok)

    def test_a_huge_retry_after_saturates(self):
        s = serve_module._failed(FakeRpcError(grpc.StatusCode.RESOURCE_EXHAUSTED, "",
                                              (("retry-after-ms", str(1 << 62)),)))
        self.assertEqual(s.retry_after_ns, (1 << 63) - 1)

    def test_status_codes_are_grpcs(self):
        # gRPC status code table (grpc.io "Status codes"): RESOURCE_EXHAUSTED 8, UNAVAILABLE 14.
        self.assertEqual(grpc.StatusCode.RESOURCE_EXHAUSTED.value[0], 8)
        self.assertEqual(grpc.StatusCode.UNAVAILABLE.value[0], 14)
        self.assertTrue(BrokerStatus().ok)


class ServingTest(unittest.TestCase):
    def setUp(self):
        self.saved_env = os.environ.pop(serve_module.SERVING_ENV, None)
        self.saved_available = serve_module.loop.available

    def tearDown(self):
        serve_module.loop.available = self.saved_available
        if self.saved_env is not None:
            os.environ[serve_module.SERVING_ENV] = self.saved_env

    def test_loop_by_default_where_grpcio_allows(self):
        if not serve_module.loop.available():
            self.skipTest("this grpcio lacks the completion-queue layer")
        self.assertIsInstance(serve_module._server(None), serve_module.loop.LoopServer)

    def test_a_grpcio_without_the_loop_falls_back_to_the_pool(self):
        serve_module.loop.available = lambda: False
        self.assertNotIsInstance(serve_module._server(None), serve_module.loop.LoopServer)
        with self.assertRaises(RuntimeError):
            serve_module._server(serve_module.LOOP)

    def test_the_environment_picks_when_the_caller_does_not(self):
        os.environ[serve_module.SERVING_ENV] = serve_module.POOL
        self.assertNotIsInstance(serve_module._server(None), serve_module.loop.LoopServer)
        os.environ[serve_module.SERVING_ENV] = "threads"
        with self.assertRaises(ValueError) as raised:
            serve_module._server(None)
        self.assertIn("expected 'loop' or 'pool'", str(raised.exception))
        os.environ.pop(serve_module.SERVING_ENV)


class ListenedAddressTest(unittest.TestCase):
    def test_tcp_gets_the_chosen_port_and_unix_stays_as_given(self):
        self.assertEqual(serve_module._listened_address("127.0.0.1:0", 41235), "127.0.0.1:41235")
        self.assertEqual(serve_module._listened_address("[::1]:0", 7), "[::1]:7")
        self.assertEqual(serve_module._listened_address("unix:/tmp/d/c.sock", 1),
                         "unix:/tmp/d/c.sock")


if __name__ == "__main__":
    unittest.main()
