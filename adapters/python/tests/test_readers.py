"""Tests for the many-readers calls of the Python adapter (Assign, Revoke, Cut
of proto/weir/v1/connector.proto) and what open is told about the reader:
what reaches the source, what goes back on the wire, the defaults of the
Source base class, and the lock-step rules (one call at a time, the broker
usable, the step-shaping Context methods refused)."""

import unittest
from concurrent.futures import ThreadPoolExecutor

import grpc

from weir.adapter import BrokerClient, BrokerStatus, Source, SourceError, SourceShape, Span
from weir.adapter import server as serve_module
from weir.v1 import connector_pb2, connector_pb2_grpc


class RecordingContext:
    """Stands in for grpc.ServicerContext: keeps the code and details set."""

    def __init__(self):
        self.code = None
        self.details = None

    def set_code(self, code):
        self.code = code

    def set_details(self, details):
        self.details = details


class ClockBroker(BrokerClient):
    """Every log call answers now_ns = answer_now_ns and is counted."""

    def __init__(self, answer_now_ns=0):
        self.answer_now_ns = answer_now_ns
        self.calls = []

    def list_partitions(self):
        self.calls.append("list_partitions")
        return BrokerStatus(now_ns=self.answer_now_ns), []

    def save_bookmarks(self, bookmarks):
        self.calls.append("save_bookmarks")
        return BrokerStatus(now_ns=self.answer_now_ns)


class Minimal(Source):
    """A log source that keeps every default of the many-readers calls."""
    shape = SourceShape.LOG

    def open(self, info, ctx):
        self.info = info

    def advance(self, ctx):
        pass

    def checkpoint(self, checkpoint_id, ctx):
        return b""

    def committed(self, checkpoint_id, ctx):
        pass


class Recording(Minimal):
    """Records what the many-readers calls are given; cut answers `answer`."""

    def __init__(self, answer=None):
        self.seen = []
        self.answer = answer
        self.service = None

    def assign(self, spans, ctx):
        self.seen.append(("assign", spans, ctx.now, self.service._lock.locked()))
        ctx.broker.list_partitions()
        self.seen.append(("now", ctx.now))

    def revoke(self, partitions, ctx):
        self.seen.append(("revoke", partitions, ctx.now, self.service._lock.locked()))
        ctx.broker.save_bookmarks([])
        self.seen.append(("now", ctx.now))

    def cut(self, partition, at_offset, ctx):
        self.seen.append(("cut", partition, at_offset, ctx.now, self.service._lock.locked()))
        return self.answer


def serve(source, broker=None):
    service = serve_module._ConnectorService(source, broker or ClockBroker())
    source.service = service
    return service


def open_with(service, *spans, restore=False):
    request = connector_pb2.OpenRequest(incarnation=1, restore=restore)
    for partition, start, end in spans:
        span = request.spans.add(partition=partition, start_offset=start)
        if end is not None:
            span.end_offset = end
    rc = RecordingContext()
    service.Open(request, rc)
    assert rc.code is None, rc.details


def cut(service, partition, at_offset, now_ns=0):
    rc = RecordingContext()
    got = service.Cut(connector_pb2.CutRequest(now_ns=now_ns, partition=partition,
                                               at_offset=at_offset), rc)
    return rc, got


def span_of(wire):
    return Span(wire.partition, wire.start_offset,
                wire.end_offset if wire.HasField("end_offset") else None)


class OpenInfoReaderTest(unittest.TestCase):
    def test_open_info_carries_the_reader_and_the_readers(self):
        info = serve_module.open_info_from(connector_pb2.OpenRequest(reader=2, readers=5))
        self.assertEqual((info.reader, info.readers), (2, 5))

    def test_a_single_reader_run_reads_as_reader_zero_of_one(self):
        info = serve_module.open_info_from(connector_pb2.OpenRequest())
        self.assertEqual((info.reader, info.readers), (0, 1))


class AssignTest(unittest.TestCase):
    def test_assign_hands_the_spans_over_in_lock_step_with_the_broker_usable(self):
        source = Recording()
        service = serve(source, ClockBroker(answer_now_ns=900))
        request = connector_pb2.AssignRequest(now_ns=300)
        request.spans.add(partition=4, start_offset=17)
        request.spans.add(partition=6, start_offset=0, end_offset=0)
        rc = RecordingContext()
        got = service.Assign(request, rc)
        self.assertIsNone(rc.code, rc.details)
        self.assertEqual(got.ByteSize(), 0)
        self.assertEqual(source.seen, [("assign", [Span(4, 17, None), Span(6, 0, 0)], 300, True),
                                       ("now", 900)])

    def test_the_default_assign_answers_unimplemented(self):
        rc = RecordingContext()
        serve(Minimal()).Assign(connector_pb2.AssignRequest(), rc)
        self.assertEqual(rc.code, grpc.StatusCode.UNIMPLEMENTED)
        self.assertIn("assign: assign is not implemented", rc.details)

    def test_a_record_emitted_during_assign_fails_it(self):
        class EmitsInAssign(Minimal):
            def assign(self, spans, ctx):
                ctx.emit_log_record(4, 17, 1)

        rc = RecordingContext()
        serve(EmitsInAssign()).Assign(connector_pb2.AssignRequest(), rc)
        self.assertEqual(rc.code, grpc.StatusCode.FAILED_PRECONDITION)
        self.assertIn("emit_log_record called during assign", rc.details)


class RevokeTest(unittest.TestCase):
    def test_revoke_hands_the_partitions_over_in_lock_step_with_the_broker_usable(self):
        source = Recording()
        service = serve(source, ClockBroker(answer_now_ns=800))
        rc = RecordingContext()
        got = service.Revoke(connector_pb2.RevokeRequest(now_ns=200, partitions=[3, 1]), rc)
        self.assertIsNone(rc.code, rc.details)
        self.assertEqual(got.ByteSize(), 0)
        self.assertEqual(source.seen, [("revoke", [3, 1], 200, True), ("now", 800)])

    def test_the_default_revoke_answers_unimplemented(self):
        rc = RecordingContext()
        serve(Minimal()).Revoke(connector_pb2.RevokeRequest(partitions=[1]), rc)
        self.assertEqual(rc.code, grpc.StatusCode.UNIMPLEMENTED)

    def test_a_watermark_set_during_revoke_fails_it(self):
        class WatermarkInRevoke(Minimal):
            def revoke(self, partitions, ctx):
                ctx.set_watermark(5)

        rc = RecordingContext()
        serve(WatermarkInRevoke()).Revoke(connector_pb2.RevokeRequest(partitions=[1]), rc)
        self.assertEqual(rc.code, grpc.StatusCode.FAILED_PRECONDITION)
        self.assertIn("set_watermark called during revoke", rc.details)


class CutTest(unittest.TestCase):
    def test_the_source_answers_head_and_tail(self):
        source = Recording(answer=(Span(2, 10, 25), Span(2, 25, None)))
        service = serve(source)
        open_with(service, (2, 10, None))
        rc, got = cut(service, 2, 20, now_ns=70)
        self.assertIsNone(rc.code, rc.details)
        self.assertEqual(source.seen, [("cut", 2, 20, 70, True)])
        self.assertEqual(span_of(got.head), Span(2, 10, 25))
        self.assertTrue(got.HasField("tail"))
        self.assertEqual(span_of(got.tail), Span(2, 25, None))
        self.assertTrue(got.head.HasField("end_offset"))
        self.assertFalse(got.tail.HasField("end_offset"))

    def test_a_closed_tail_keeps_its_end_and_a_tail_at_zero_is_on_the_wire(self):
        service = serve(Recording(answer=(Span(0, 0, 0), Span(0, 0, 9))))
        open_with(service, (0, 0, 9))
        _, got = cut(service, 0, 0)
        self.assertEqual((span_of(got.head), span_of(got.tail)), (Span(0, 0, 0), Span(0, 0, 9)))
        self.assertTrue(got.head.HasField("end_offset"))

    def test_a_decline_with_a_head_has_no_tail(self):
        service = serve(Recording(answer=(Span(5, 3, 8), None)))
        open_with(service, (5, 3, 8))
        rc, got = cut(service, 5, 6)
        self.assertIsNone(rc.code)
        self.assertEqual(span_of(got.head), Span(5, 3, 8))
        self.assertFalse(got.HasField("tail"))

    def test_the_default_cut_declines_with_the_span_as_open_told_it(self):
        service = serve(Minimal())
        open_with(service, (1, 40, None), (7, 2, 9))
        rc, got = cut(service, 7, 5)
        self.assertIsNone(rc.code, rc.details)
        self.assertEqual(span_of(got.head), Span(7, 2, 9))
        self.assertFalse(got.HasField("tail"))
        _, got = cut(service, 1, 50)
        self.assertEqual(span_of(got.head), Span(1, 40, None))

    def test_a_decline_names_the_span_as_assign_and_earlier_cuts_left_it(self):
        source = Recording(answer=(Span(3, 6, 12), Span(3, 12, None)))
        service = serve(source)
        open_with(service)
        request = connector_pb2.AssignRequest()
        request.spans.add(partition=3, start_offset=6)
        service.Assign(request, RecordingContext())
        source.answer = None
        _, got = cut(service, 3, 9)
        self.assertEqual(span_of(got.head), Span(3, 6, None))  # as assign told it
        source.answer = (Span(3, 6, 12), Span(3, 12, None))
        cut(service, 3, 12)
        source.answer = None
        _, got = cut(service, 3, 10)
        self.assertEqual(span_of(got.head), Span(3, 6, 12))  # as the cut left it
        service.Revoke(connector_pb2.RevokeRequest(partitions=[3]), RecordingContext())
        _, got = cut(service, 3, 10)
        self.assertEqual(span_of(got.head), Span(3, 0, None))  # forgotten

    def test_a_failed_cut_answers_nothing_and_leaves_the_span_as_it_was(self):
        class Raises(Minimal):
            def __init__(self):
                self.fail = True

            def cut(self, partition, at_offset, ctx):
                if self.fail:
                    raise SourceError("no span of that partition",
                                      grpc.StatusCode.FAILED_PRECONDITION)
                return None

        source = Raises()
        service = serve_module._ConnectorService(source, ClockBroker())
        open_with(service, (2, 0, 30))
        rc, got = cut(service, 2, 10)
        self.assertEqual(rc.code, grpc.StatusCode.FAILED_PRECONDITION)
        self.assertEqual(rc.details, "cut: no span of that partition")
        self.assertEqual(got.ByteSize(), 0)
        source.fail = False
        _, got = cut(service, 2, 10)
        self.assertEqual(span_of(got.head), Span(2, 0, 30))

    def test_a_gap_reported_during_cut_fails_it(self):
        class GapInCut(Minimal):
            def cut(self, partition, at_offset, ctx):
                ctx.report_gap(partition, 0, 1)
                return None

        service = serve_module._ConnectorService(GapInCut(), ClockBroker())
        rc, got = cut(service, 2, 10)
        self.assertEqual(rc.code, grpc.StatusCode.FAILED_PRECONDITION)
        self.assertIn("report_gap called during cut", rc.details)
        self.assertEqual(got.ByteSize(), 0)


class OverGrpcTest(unittest.TestCase):
    """The three calls through a real gRPC server and stub over loopback."""

    def test_assign_cut_and_revoke_round_trip(self):
        class Spans(Minimal):
            def assign(self, spans, ctx):
                self.assigned = spans

            def revoke(self, partitions, ctx):
                self.revoked = partitions

            def cut(self, partition, at_offset, ctx):
                return Span(partition, 4, at_offset), Span(partition, at_offset, None)

        source = Spans()
        server = grpc.server(ThreadPoolExecutor(max_workers=1), options=[("grpc.so_reuseport", 0)])
        connector_pb2_grpc.add_ConnectorServicer_to_server(
            serve_module._ConnectorService(source, ClockBroker()), server)
        port = server.add_insecure_port("127.0.0.1:0")
        server.start()
        self.addCleanup(server.stop, None)
        channel = grpc.insecure_channel(f"127.0.0.1:{port}")
        self.addCleanup(channel.close)
        stub = connector_pb2_grpc.ConnectorStub(channel)

        request = connector_pb2.AssignRequest(now_ns=5)
        request.spans.add(partition=8, start_offset=4)
        stub.Assign(request, timeout=10)
        self.assertEqual(source.assigned, [Span(8, 4, None)])
        got = stub.Cut(connector_pb2.CutRequest(partition=8, at_offset=11), timeout=10)
        self.assertEqual((span_of(got.head), span_of(got.tail)), (Span(8, 4, 11), Span(8, 11)))
        stub.Revoke(connector_pb2.RevokeRequest(partitions=[8]), timeout=10)
        self.assertEqual(source.revoked, [8])

    def test_the_defaults_answer_unimplemented_on_the_wire(self):
        server = grpc.server(ThreadPoolExecutor(max_workers=1), options=[("grpc.so_reuseport", 0)])
        connector_pb2_grpc.add_ConnectorServicer_to_server(
            serve_module._ConnectorService(Minimal(), ClockBroker()), server)
        port = server.add_insecure_port("127.0.0.1:0")
        server.start()
        self.addCleanup(server.stop, None)
        channel = grpc.insecure_channel(f"127.0.0.1:{port}")
        self.addCleanup(channel.close)
        stub = connector_pb2_grpc.ConnectorStub(channel)
        with self.assertRaises(grpc.RpcError) as failed:
            stub.Assign(connector_pb2.AssignRequest(), timeout=10)
        self.assertEqual(failed.exception.code(), grpc.StatusCode.UNIMPLEMENTED)
        got = stub.Cut(connector_pb2.CutRequest(partition=3, at_offset=1), timeout=10)
        self.assertEqual(span_of(got.head), Span(3, 0, None))
        self.assertFalse(got.HasField("tail"))


if __name__ == "__main__":
    unittest.main()
