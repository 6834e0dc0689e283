"""Tests for weir.adapter.loop: the one-thread completion loop answers unary
calls like grpc.server() does (answers, status codes and details, trailing
metadata, exceptions, unknown and streaming methods), serves them all on the
thread that called serve(), and stops. Over a real Unix socket with a plain
grpc client; status codes are gRPC's (grpc.io "Status codes")."""

import os
import shutil
import tempfile
import threading
import unittest

import grpc

from weir.adapter import loop

SERVICE = "weir.test.Loop"
IDENTITY = {"request_deserializer": None, "response_serializer": None}


class Handlers:
    """Unary handlers on bytes; records the thread each ran on."""

    def __init__(self):
        self.threads = set()

    def echo(self, request, context):
        self.threads.add(threading.get_ident())
        return request

    def fail(self, request, context):
        context.set_code(grpc.StatusCode.RESOURCE_EXHAUSTED)
        context.set_details("slow down")
        context.set_trailing_metadata((("retry-after-ms", "250"),))
        return b"never sent"

    def raise_(self, request, context):
        raise ValueError("bad scan")

    def abort(self, request, context):
        context.abort(grpc.StatusCode.FAILED_PRECONDITION, "not now")

    def metadata(self, request, context):
        return dict(context.invocation_metadata()).get("who", "").encode()

    def nothing(self, request, context):
        return None

    def odd_code(self, request, context):
        context.set_code(5)  # not a grpc.StatusCode
        context.set_details(b"raw bytes")
        return b""

    def generic(self):
        unary = {
            name: grpc.unary_unary_rpc_method_handler(getattr(self, attr), **IDENTITY)
            for name, attr in (("Echo", "echo"), ("Fail", "fail"), ("Raise", "raise_"),
                               ("Abort", "abort"), ("Metadata", "metadata"),
                               ("Nothing", "nothing"), ("OddCode", "odd_code"))
        }
        unary["BadRequest"] = grpc.unary_unary_rpc_method_handler(
            self.echo, request_deserializer=lambda b: b.decode("ascii"), response_serializer=None)
        unary["BadAnswer"] = grpc.unary_unary_rpc_method_handler(
            self.echo, request_deserializer=None, response_serializer=lambda r: r.no_such)
        unary["Stream"] = grpc.unary_stream_rpc_method_handler(lambda r, c: iter([r]), **IDENTITY)
        return grpc.method_handlers_generic_handler(SERVICE, unary)


@unittest.skipUnless(loop.available(), "this grpcio lacks the completion-queue layer")
class LoopServerTest(unittest.TestCase):

    def setUp(self):
        self.dir = tempfile.mkdtemp(prefix="weir-loop-")
        self.handlers = Handlers()
        self.server = loop.LoopServer((("grpc.so_reuseport", 0),))
        self.server.add_generic_rpc_handlers((self.handlers.generic(),))
        address = f"unix:{self.dir}/loop.sock"
        self.assertNotEqual(self.server.add_insecure_port(address), 0)
        self.server.start()
        self.thread = threading.Thread(target=self.server.serve)
        self.thread.start()
        self.channel = grpc.insecure_channel(address)

    def tearDown(self):
        self.channel.close()
        self.server.stop()
        self.thread.join(timeout=30)
        stopped = not self.thread.is_alive()
        shutil.rmtree(self.dir)
        self.assertTrue(stopped, "serve() did not return after stop()")

    def call(self, method, request=b"", metadata=None):
        return self.channel.unary_unary(f"/{SERVICE}/{method}")(request, timeout=30,
                                                               metadata=metadata)

    def failure(self, method, request=b""):
        with self.assertRaises(grpc.RpcError) as raised:
            self.call(method, request)
        return raised.exception

    def test_answers_on_the_serving_thread_only(self):
        for i in range(50):
            self.assertEqual(self.call("Echo", b"scan %d" % i), b"scan %d" % i)
        self.assertEqual(self.handlers.threads, {self.thread.ident})

    def test_empty_and_large_messages(self):
        self.assertEqual(self.call("Echo", b""), b"")
        big = os.urandom(3 << 20)
        self.assertEqual(self.call("Echo", big), big)

    def test_a_set_code_sends_code_details_and_trailers_without_the_answer(self):
        error = self.failure("Fail")
        self.assertEqual(error.code(), grpc.StatusCode.RESOURCE_EXHAUSTED)
        self.assertEqual(error.details(), "slow down")
        self.assertIn(("retry-after-ms", "250"), tuple(error.trailing_metadata()))

    def test_an_exception_fails_that_call_only(self):
        error = self.failure("Raise")
        self.assertEqual(error.code(), grpc.StatusCode.UNKNOWN)
        self.assertIn("ValueError: bad scan", error.details())
        self.assertEqual(self.call("Echo", b"still here"), b"still here")

    def test_abort_ends_with_its_code(self):
        error = self.failure("Abort")
        self.assertEqual(error.code(), grpc.StatusCode.FAILED_PRECONDITION)
        self.assertEqual(error.details(), "not now")

    def test_the_handler_sees_the_call_metadata(self):
        self.assertEqual(self.call("Metadata", metadata=(("who", "buoy-7"),)), b"buoy-7")

    def test_no_answer_is_internal(self):
        self.assertEqual(self.failure("Nothing").code(), grpc.StatusCode.INTERNAL)

    def test_a_code_that_is_not_a_status_code_is_unknown_and_the_loop_goes_on(self):
        # As grpc.server() does (grpc/_server.py, _application_code).
        error = self.failure("OddCode")
        self.assertEqual(error.code(), grpc.StatusCode.UNKNOWN)
        self.assertEqual(error.details(), "raw bytes")
        self.assertEqual(self.call("Echo", b"on"), b"on")

    def test_serializer_failures_are_internal(self):
        # As grpc.server() answers them: INTERNAL (grpc/_server.py, _abort on
        # a failed deserialization or serialization).
        error = self.failure("BadRequest", b"\xff")
        self.assertEqual(error.code(), grpc.StatusCode.INTERNAL)
        self.assertIn("deserializing the request", error.details())
        error = self.failure("BadAnswer", b"x")
        self.assertEqual(error.code(), grpc.StatusCode.INTERNAL)
        self.assertIn("serializing the answer", error.details())

    def test_unknown_and_streaming_methods_are_unimplemented(self):
        self.assertEqual(self.failure("Missing").code(), grpc.StatusCode.UNIMPLEMENTED)
        with self.assertRaises(grpc.RpcError) as raised:
            list(self.channel.unary_stream(f"/{SERVICE}/Stream")(b"x", timeout=30))
        self.assertEqual(raised.exception.code(), grpc.StatusCode.UNIMPLEMENTED)
        self.assertEqual(self.call("Echo", b"after"), b"after")


@unittest.skipUnless(loop.available(), "this grpcio lacks the completion-queue layer")
class LoopServerStopTest(unittest.TestCase):

    def test_stop_before_serve_or_from_another_thread_ends_serve(self):
        for stop_first in (True, False):
            with self.subTest(stop_first=stop_first):
                directory = tempfile.mkdtemp(prefix="weir-loop-")
                try:
                    server = loop.LoopServer()
                    server.add_generic_rpc_handlers((Handlers().generic(),))
                    self.assertNotEqual(server.add_insecure_port(f"unix:{directory}/s.sock"), 0)
                    server.start()
                    if stop_first:
                        server.stop()
                    raised = []

                    def serve():
                        try:
                            server.serve()
                        except Exception as e:  # what the test is about
                            raised.append(e)

                    thread = threading.Thread(target=serve)
                    thread.start()
                    if not stop_first:
                        server.stop()
                    thread.join(timeout=30)
                    self.assertFalse(thread.is_alive(), "serve() did not return")
                    self.assertEqual(raised, [])
                finally:
                    shutil.rmtree(directory)

    def test_newer_stubs_may_register_methods_twice(self):
        server = loop.LoopServer()
        server.add_registered_method_handlers(SERVICE, {})  # newer generated stubs call it


if __name__ == "__main__":
    unittest.main()
