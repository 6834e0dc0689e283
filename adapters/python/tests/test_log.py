"""Tests for the log shape of the Python adapter (mirrors the C++ adapter's
log API in adapters/cpp/include/weir/adapter/source.h): what a step carries
(log records, gaps), what open and checkpoint answer for a log source, the
default broker calls of a queue-only client, and how the gRPC broker client
reads an out-of-range read (the status and trailing metadata of
proto/weir/v1/broker.proto, Broker.Read)."""

import unittest
from concurrent.futures import ThreadPoolExecutor

import grpc

from weir.adapter import (Bookmark, BrokerClient, BrokerStatus, Context, GrpcBrokerClient,
                          ReadResult, ResumePoint, Source, SourceShape, Span)
from weir.adapter import server as serve_module
from weir.adapter.source import ADVANCE, CHECKPOINT, COMMITTED
from weir.v1 import status_details_pb2
from weir.v1 import broker_pb2, broker_pb2_grpc, connector_pb2


class QueueOnlyBroker(BrokerClient):
    """A queue-only broker client: the log calls keep their defaults."""

    def pull(self, max_messages):
        return BrokerStatus(), []


class CannedLogBroker(QueueOnlyBroker):
    """Reads answer one record at the offset asked, or OUT_OF_RANGE below
    first_retained; every answer carries answer_now_ns."""

    def __init__(self):
        self.first_retained = 0
        self.answer_now_ns = 0
        self.reads = []
        self.saved = []

    def read(self, partition, offset, max_records=64, max_bytes=0, max_wait_ns=0):
        self.reads.append((partition, offset, max_records, max_bytes, max_wait_ns))
        if offset < self.first_retained:
            return (BrokerStatus(grpc.StatusCode.OUT_OF_RANGE, now_ns=self.answer_now_ns,
                                 first_retained_offset=self.first_retained),
                    ReadResult(next_offset=offset))
        record = broker_pb2.LogRecord(offset=offset, event_time_ns=5)
        return (BrokerStatus(now_ns=self.answer_now_ns),
                ReadResult([record], offset + 1, self.first_retained, offset + 1))

    def save_bookmarks(self, bookmarks):
        self.saved.append(list(bookmarks))
        return BrokerStatus(now_ns=self.answer_now_ns)


class LogSource(Source):
    shape = SourceShape.LOG

    def __init__(self):
        self.order = []
        self.info = None

    def open(self, info, ctx):
        self.info = info

    def advance(self, ctx):
        pass

    def checkpoint(self, checkpoint_id, ctx):
        self.order.append("checkpoint")
        return b"state-%d" % checkpoint_id

    def committed(self, checkpoint_id, ctx):
        pass

    def resume_points(self):
        self.order.append("resume_points")
        return [ResumePoint(0, 17), ResumePoint(3, 4)]


class QueueSource(Source):
    def open(self, info, ctx):
        pass

    def advance(self, ctx):
        pass

    def checkpoint(self, checkpoint_id, ctx):
        return b"q"

    def committed(self, checkpoint_id, ctx):
        pass


class RecordingContext:
    """Stands in for grpc.ServicerContext: keeps the code and details set."""

    def __init__(self):
        self.code = None
        self.details = None

    def set_code(self, code):
        self.code = code

    def set_details(self, details):
        self.details = details


class LogStepTest(unittest.TestCase):
    def test_a_step_carries_log_records_and_gaps_in_order(self):
        ctx = Context(ADVANCE, 100, QueueOnlyBroker())
        ctx.report_gap(2, 10, 14)
        ctx.emit_log_record(2, 14, 900, b"v14")
        ctx.emit_log_record(2, 15, 901)
        response = connector_pb2.AdvanceResponse()
        serve_module.write_step(ctx, response)

        self.assertEqual(ctx.misuse, "")
        self.assertEqual([(r.partition, r.offset, r.event_time_ns, r.value, r.message_id)
                          for r in response.records],
                         [(2, 14, 900, b"v14", 0), (2, 15, 901, b"", 0)])
        self.assertTrue(response.records[0].HasField("offset"))
        self.assertEqual([(g.partition, g.from_offset, g.to_offset) for g in response.gaps],
                         [(2, 10, 14)])

    def test_offset_zero_is_still_an_offset_on_the_wire(self):
        ctx = Context(ADVANCE, 0, QueueOnlyBroker())
        ctx.emit_log_record(0, 0, 1)
        response = connector_pb2.AdvanceResponse()
        serve_module.write_step(ctx, response)
        self.assertTrue(response.records[0].HasField("offset"))
        self.assertEqual(response.records[0].offset, 0)

    def test_a_queue_record_carries_no_offset(self):
        ctx = Context(ADVANCE, 100, QueueOnlyBroker())
        ctx.emit(7, 1)
        response = connector_pb2.AdvanceResponse()
        serve_module.write_step(ctx, response)
        self.assertEqual(len(response.records), 1)
        self.assertFalse(response.records[0].HasField("offset"))
        self.assertEqual(len(response.gaps), 0)

    def test_gaps_and_log_records_outside_advance_are_misuse(self):
        checkpoint = Context(CHECKPOINT, 0, QueueOnlyBroker())
        checkpoint.report_gap(0, 1, 2)
        self.assertIn("report_gap called during checkpoint", checkpoint.misuse)
        self.assertEqual(checkpoint.gaps, [])
        committed = Context(COMMITTED, 0, QueueOnlyBroker())
        committed.emit_log_record(0, 1, 2)
        self.assertIn("emit_log_record called during committed", committed.misuse)
        self.assertEqual(committed.log_records, [])

    def test_a_gap_reported_in_checkpoint_fails_that_call(self):
        class GapInCheckpoint(LogSource):
            def checkpoint(self, checkpoint_id, ctx):
                ctx.report_gap(1, 2, 3)
                return b""

        rc = RecordingContext()
        serve_module._ConnectorService(GapInCheckpoint(), QueueOnlyBroker()).Checkpoint(
            connector_pb2.CheckpointRequest(checkpoint_id=1), rc)
        self.assertEqual(rc.code, grpc.StatusCode.FAILED_PRECONDITION)
        self.assertIn("report_gap called during checkpoint", rc.details)


class OpenAndCheckpointTest(unittest.TestCase):
    def test_open_info_carries_spans_and_new_partitions(self):
        request = connector_pb2.OpenRequest(incarnation=3, restore=True, checkpoint_id=9,
                                            checkpoint_state=b"s", new_partitions_held=True)
        request.spans.add(partition=1, start_offset=40)
        request.spans.add(partition=2, start_offset=5, end_offset=8)
        info = serve_module.open_info_from(request)
        self.assertEqual((info.incarnation, info.restore, info.checkpoint_id, info.checkpoint_state),
                         (3, True, 9, b"s"))
        self.assertEqual(info.spans, [Span(1, 40, None), Span(2, 5, 8)])
        self.assertTrue(info.new_partitions_held)

    def test_a_span_ending_at_zero_is_closed_not_open(self):
        request = connector_pb2.OpenRequest()
        request.spans.add(partition=4, start_offset=0, end_offset=0)
        self.assertEqual(serve_module.open_info_from(request).spans, [Span(4, 0, 0)])

    def test_open_answers_the_source_shape(self):
        log = LogSource()
        rc = RecordingContext()
        request = connector_pb2.OpenRequest(incarnation=1)
        request.spans.add(partition=0, start_offset=12)
        got = serve_module._ConnectorService(log, QueueOnlyBroker()).Open(request, rc)
        self.assertIsNone(rc.code)
        self.assertEqual(got.shape, connector_pb2.LOG)
        self.assertEqual(log.info.spans, [Span(0, 12)])

        got = serve_module._ConnectorService(QueueSource(), QueueOnlyBroker()).Open(
            connector_pb2.OpenRequest(), RecordingContext())
        # Unset reads as QUEUE; a queue source's answer stays empty on the wire.
        self.assertEqual(got.shape, connector_pb2.SOURCE_SHAPE_UNSPECIFIED)
        self.assertEqual(got.ByteSize(), 0)

    def test_a_failed_open_answers_no_shape(self):
        class Refusing(LogSource):
            def open(self, info, ctx):
                raise ValueError("no spans")

        rc = RecordingContext()
        got = serve_module._ConnectorService(Refusing(), QueueOnlyBroker()).Open(
            connector_pb2.OpenRequest(), rc)
        self.assertEqual(rc.code, grpc.StatusCode.INTERNAL)
        self.assertEqual(got.ByteSize(), 0)

    def test_shape_values_are_the_wire_enum(self):
        self.assertEqual(SourceShape.QUEUE, connector_pb2.QUEUE)
        self.assertEqual(SourceShape.LOG, connector_pb2.LOG)

    def test_checkpoint_asks_for_resume_points_right_after_the_state(self):
        source = LogSource()
        got = serve_module._ConnectorService(source, QueueOnlyBroker()).Checkpoint(
            connector_pb2.CheckpointRequest(checkpoint_id=4), RecordingContext())
        self.assertEqual(source.order, ["checkpoint", "resume_points"])
        self.assertEqual(got.state, b"state-4")
        self.assertEqual([(p.partition, p.next_offset) for p in got.resume_points],
                         [(0, 17), (3, 4)])

    def test_a_queue_source_checkpoint_has_no_resume_points(self):
        got = serve_module._ConnectorService(QueueSource(), QueueOnlyBroker()).Checkpoint(
            connector_pb2.CheckpointRequest(checkpoint_id=1), RecordingContext())
        self.assertEqual(got.state, b"q")
        self.assertEqual(len(got.resume_points), 0)


class LogBrokerCallsTest(unittest.TestCase):
    def test_a_queue_only_client_answers_log_calls_unimplemented(self):
        broker = QueueOnlyBroker()
        status, partitions = broker.list_partitions()
        self.assertEqual((status.code, partitions), (grpc.StatusCode.UNIMPLEMENTED, []))
        status, got = broker.read(0, 9)
        self.assertEqual(status.code, grpc.StatusCode.UNIMPLEMENTED)
        self.assertEqual((got.records, got.next_offset), ([], 9))
        self.assertEqual(broker.save_bookmarks([Bookmark(0, 1)]).code,
                         grpc.StatusCode.UNIMPLEMENTED)
        status, bookmarks = broker.load_bookmarks()
        self.assertEqual((status.code, bookmarks), (grpc.StatusCode.UNIMPLEMENTED, []))

    def test_reads_through_the_context_move_now_and_carry_the_first_retained_offset(self):
        broker = CannedLogBroker()
        broker.first_retained = 30
        broker.answer_now_ns = 500
        ctx = Context(ADVANCE, 100, broker)
        gone, _ = ctx.broker.read(6, 12)
        self.assertTrue(gone.out_of_range)
        self.assertFalse(gone.transient)
        self.assertEqual(gone.first_retained_offset, 30)
        self.assertEqual(ctx.now, 500)

        broker.answer_now_ns = 700
        status, got = ctx.broker.read(6, 30, max_records=8, max_wait_ns=250)
        self.assertTrue(status.ok)
        self.assertEqual(broker.reads[-1], (6, 30, 8, 0, 250))
        self.assertEqual(len(got.records), 1)
        self.assertTrue(got.caught_up)
        self.assertEqual(ctx.now, 700)

    def test_bookmark_saves_through_the_context_move_now(self):
        broker = CannedLogBroker()
        broker.answer_now_ns = 42
        ctx = Context(COMMITTED, 7, broker)
        self.assertTrue(ctx.broker.save_bookmarks([Bookmark(1, 5)]).ok)
        self.assertEqual((ctx.now, broker.saved), (42, [[(1, 5)]]))

    def test_read_result_is_caught_up_only_at_the_readable_end(self):
        self.assertFalse(ReadResult(next_offset=4, readable_end=9).caught_up)
        self.assertTrue(ReadResult(next_offset=9, readable_end=9).caught_up)


class FakeRpcError(grpc.RpcError):
    def __init__(self, code, trailers):
        self._code, self._trailers = code, trailers

    def code(self):
        return self._code

    def details(self):
        return "first retained offset 77"

    def trailing_metadata(self):
        return self._trailers


def wrapped(code, message, detail):
    """Status details as weir sends them (proto/weir/v1/broker.proto): a whole
    google.rpc.Status with the call's code and message and `detail` packed in
    one Any (type URL "type.googleapis.com/weir.v1....")."""
    status = status_details_pb2.StatusDetails(code=code.value[0], message=message)
    status.details.add().Pack(detail)
    return status.SerializeToString()


OFFSET_77 = broker_pb2.OffsetOutOfRange(partition=3, first_retained_offset=77)
DETAIL_77 = wrapped(grpc.StatusCode.OUT_OF_RANGE, "first retained offset 77", OFFSET_77)
# The bare message, as weir sent it before it wrapped it in a google.rpc.Status.
BARE_DETAIL_77 = OFFSET_77.SerializeToString()


class OutOfRangeStatusTest(unittest.TestCase):
    # Keys from proto/weir/v1/broker.proto (Broker.Read): "weir-first-retained-offset"
    # and the OffsetOutOfRange detail; gRPC carries a status's details in the
    # trailer "grpc-status-details-bin", a whole google.rpc.Status (gRPC's rich
    # error model, docs/references.md).
    def test_the_first_retained_offset_comes_from_the_trailing_metadata(self):
        s = serve_module._failed(FakeRpcError(grpc.StatusCode.OUT_OF_RANGE, (
            ("weir-now-ns", "4200"), ("weir-first-retained-offset", "77"))))
        self.assertTrue(s.out_of_range)
        self.assertEqual((s.first_retained_offset, s.now_ns), (77, 4200))

    def test_it_falls_back_to_the_status_detail(self):
        s = serve_module._failed(FakeRpcError(grpc.StatusCode.OUT_OF_RANGE, (
            ("grpc-status-details-bin", DETAIL_77),)))
        self.assertEqual(s.first_retained_offset, 77)
        s = serve_module._failed(FakeRpcError(grpc.StatusCode.OUT_OF_RANGE, (
            ("weir-first-retained-offset", "-1"), ("grpc-status-details-bin", DETAIL_77))))
        self.assertEqual(s.first_retained_offset, 77)

    def test_the_detail_packs_the_offset_the_way_every_grpc_reads_details(self):
        # gRPC's rich error model: grpc-status-details-bin holds a google.rpc.Status
        # (code 1, message 2, details 3: repeated google.protobuf.Any), and
        # Any.Pack names the type "type.googleapis.com/" + its full name.
        status = status_details_pb2.StatusDetails.FromString(DETAIL_77)
        self.assertEqual((status.code, status.message, len(status.details)),
                         (11, "first retained offset 77", 1))
        self.assertEqual(status.details[0].type_url,
                         "type.googleapis.com/weir.v1.OffsetOutOfRange")

    def test_without_either_it_stays_unset(self):
        s = serve_module._failed(FakeRpcError(grpc.StatusCode.OUT_OF_RANGE, ()))
        self.assertTrue(s.out_of_range)
        self.assertIsNone(s.first_retained_offset)
        s = serve_module._failed(FakeRpcError(grpc.StatusCode.OUT_OF_RANGE, (
            ("grpc-status-details-bin", b"\xff\xff"),)))
        self.assertIsNone(s.first_retained_offset)

    def test_details_that_hold_no_offset_are_ignored(self):
        garbled_any = status_details_pb2.StatusDetails(code=11)
        garbled_any.details.add(type_url="type.googleapis.com/weir.v1.OffsetOutOfRange",
                                value=b"\xff\xff")
        for name, details in (
                ("the bare message", BARE_DETAIL_77),
                ("another type", wrapped(grpc.StatusCode.OUT_OF_RANGE, "x",
                                         broker_pb2.RetryAfter(retry_after_ns=77))),
                ("an Any that does not parse", garbled_any.SerializeToString()),
                ("no details", status_details_pb2.StatusDetails(code=11).SerializeToString())):
            with self.subTest(name):
                s = serve_module._failed(FakeRpcError(grpc.StatusCode.OUT_OF_RANGE, (
                    ("grpc-status-details-bin", details),)))
                self.assertTrue(s.out_of_range)
                self.assertIsNone(s.first_retained_offset)

    def test_only_an_out_of_range_failure_carries_it(self):
        s = serve_module._failed(FakeRpcError(grpc.StatusCode.UNAVAILABLE, (
            ("weir-first-retained-offset", "77"),)))
        self.assertIsNone(s.first_retained_offset)
        self.assertTrue(s.transient)

    def test_out_of_range_is_grpc_code_11(self):
        # gRPC status code table (grpc.io "Status codes"): OUT_OF_RANGE 11.
        self.assertEqual(grpc.StatusCode.OUT_OF_RANGE.value[0], 11)


class OutOfRangeBroker(broker_pb2_grpc.BrokerServicer):
    """A Broker service whose Read fails OUT_OF_RANGE below offset 77 the way
    weir's does (trailing metadata and status detail), or with the detail only."""

    def __init__(self, metadata=True):
        self.metadata = metadata

    def Read(self, request, context):
        trailers = [("weir-now-ns", "4200")]
        if request.offset >= 77:
            context.set_trailing_metadata(trailers)
            response = broker_pb2.ReadResponse(now_ns=4300, partition=request.partition,
                                               next_offset=request.offset + 1,
                                               first_retained_offset=77,
                                               readable_end=request.offset + 5)
            response.records.add(offset=request.offset, event_time_ns=9)
            return response
        if self.metadata:
            trailers.append(("weir-first-retained-offset", "77"))
        trailers.append(("grpc-status-details-bin", DETAIL_77))
        context.set_trailing_metadata(trailers)
        context.set_code(grpc.StatusCode.OUT_OF_RANGE)
        context.set_details("first retained offset 77")
        return broker_pb2.ReadResponse()

    def ListPartitions(self, request, context):
        response = broker_pb2.ListPartitionsResponse(now_ns=10)
        response.partitions.add(partition=0, first_retained_offset=77, next_offset=90)
        return response

    def SaveBookmarks(self, request, context):
        self.saved = [(b.partition, b.next_offset) for b in request.bookmarks]
        return broker_pb2.SaveBookmarksResponse(now_ns=11)

    def LoadBookmarks(self, request, context):
        response = broker_pb2.LoadBookmarksResponse(now_ns=12)
        response.bookmarks.add(partition=0, next_offset=80)
        return response


class GrpcLogBrokerTest(unittest.TestCase):
    """The log calls of GrpcBrokerClient over loopback gRPC."""

    def serve(self, service):
        server = grpc.server(ThreadPoolExecutor(max_workers=1), options=[("grpc.so_reuseport", 0)])
        broker_pb2_grpc.add_BrokerServicer_to_server(service, server)
        port = server.add_insecure_port("127.0.0.1:0")
        server.start()
        self.addCleanup(server.stop, None)
        return GrpcBrokerClient(f"127.0.0.1:{port}", timeout_s=10)

    def test_an_out_of_range_read_carries_the_first_retained_offset_from_metadata(self):
        status, got = self.serve(OutOfRangeBroker()).read(3, 12)
        self.assertTrue(status.out_of_range)
        self.assertEqual((status.first_retained_offset, status.now_ns), (77, 4200))
        self.assertEqual((got.records, got.next_offset), ([], 12))

    def test_an_out_of_range_read_falls_back_to_the_status_detail(self):
        status, _ = self.serve(OutOfRangeBroker(metadata=False)).read(3, 12)
        self.assertTrue(status.out_of_range)
        self.assertEqual(status.first_retained_offset, 77)

    def test_a_successful_read_returns_records_and_where_the_partition_stands(self):
        status, got = self.serve(OutOfRangeBroker()).read(3, 80)
        self.assertTrue(status.ok, status)
        self.assertEqual([r.offset for r in got.records], [80])
        self.assertEqual((got.next_offset, got.first_retained_offset, got.readable_end),
                         (81, 77, 85))
        self.assertFalse(got.caught_up)
        self.assertEqual(status.now_ns, 4300)
        self.assertIsNone(status.first_retained_offset)

    def test_listing_and_bookmarks_round_trip(self):
        service = OutOfRangeBroker()
        client = self.serve(service)
        status, partitions = client.list_partitions()
        self.assertEqual(status.now_ns, 10)
        self.assertEqual([(p.partition, p.first_retained_offset, p.next_offset)
                          for p in partitions], [(0, 77, 90)])
        self.assertEqual(client.save_bookmarks([Bookmark(0, 80), Bookmark(2, 3)]).now_ns, 11)
        self.assertEqual(service.saved, [(0, 80), (2, 3)])
        status, bookmarks = client.load_bookmarks()
        self.assertEqual((status.now_ns, bookmarks), (12, [Bookmark(0, 80)]))


if __name__ == "__main__":
    unittest.main()
