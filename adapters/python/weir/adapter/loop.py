"""One thread, one completion loop: serves unary gRPC methods on the thread
that calls serve(), the way the C++ adapter serves its connector.

Why: grpc.server() hands every call from its polling thread to a worker of a
thread pool and back, three hand-offs under the GIL per call; a connector is
called strictly one call at a time, so those hand-offs are pure cost (they
were most of the Python adapter's time per call). Here one thread polls one
completion queue: a call arrives, its request is read, the handler runs, the
answer and the status go out in one batch, all on that thread.

It uses grpcio's Cython layer (grpc._cython.cygrpc, the layer grpc.server()
itself is built on), which is not a public API. available() says whether this
grpcio has the names the loop uses; serve() in server.py falls back to
grpc.server() when it has not or when a LoopServer cannot be built. A grpcio
whose layer kept those names but changed what they do would fail calls rather
than fall back: the tests run the loop on Debian 12's grpcio (1.51), and
WEIR_PYTHON_SERVING=pool is the way around it elsewhere.

Handlers come the public way: a generated add_XServicer_to_server() registers
its generic handler on the LoopServer, and each call's RpcMethodHandler comes
from that handler's service(). Only unary-unary methods are served; any other
method is answered UNIMPLEMENTED. The handler gets a LoopContext, which has
the part of grpc.ServicerContext a unary handler needs (set_code,
set_details, set_trailing_metadata, invocation_metadata, abort).
"""

import collections

import grpc

try:
    from grpc._cython import cygrpc
except ImportError:  # a grpcio without the Cython layer: serve() falls back
    cygrpc = None

_NEEDED = ("Server", "CompletionQueue", "ReceiveMessageOperation", "SendInitialMetadataOperation",
           "SendMessageOperation", "SendStatusFromServerOperation", "ReceiveCloseOnServerOperation")
_NO_FLAGS = 0


def available():
    """True when this grpcio has everything the loop uses."""
    return cygrpc is not None and all(hasattr(cygrpc, name) for name in _NEEDED)


class _Abort(Exception):
    """Raised by LoopContext.abort to end the handler with a status."""


class LoopContext:
    """What a unary handler may do with its call."""

    __slots__ = ("_metadata", "code", "details", "trailing_metadata")

    def __init__(self, metadata):
        self._metadata = metadata
        self.code = grpc.StatusCode.OK
        self.details = ""
        self.trailing_metadata = None

    def invocation_metadata(self):
        return self._metadata

    def set_code(self, code):
        self.code = code

    def set_details(self, details):
        self.details = details

    def set_trailing_metadata(self, metadata):
        self.trailing_metadata = tuple(metadata)

    def abort(self, code, details):
        self.code = code
        self.details = details
        raise _Abort()


_HandlerCallDetails = collections.namedtuple("_HandlerCallDetails", ("method", "invocation_metadata"))

# Tags: what a completion on the queue is about.
_NEW_CALL = "new call"
_SHUT_DOWN = "shut down"


class _Request:
    """A call whose request message is being read."""
    __slots__ = ("call", "handler", "metadata")

    def __init__(self, call, handler, metadata):
        self.call = call
        self.handler = handler
        self.metadata = metadata


class _Finish:
    """A call whose answer and status are being sent."""
    __slots__ = ("call",)

    def __init__(self, call):
        self.call = call


def _status_operations(code, details, trailing_metadata, answer=None):
    # Like grpc.server(): a code that is not a grpc.StatusCode is UNKNOWN.
    number = code.value[0] if isinstance(code, grpc.StatusCode) else grpc.StatusCode.UNKNOWN.value[0]
    details = details if isinstance(details, bytes) else str(details).encode()
    operations = [cygrpc.SendInitialMetadataOperation(None, _NO_FLAGS)]
    if answer is not None:
        operations.append(cygrpc.SendMessageOperation(answer, _NO_FLAGS))
    operations.append(cygrpc.SendStatusFromServerOperation(trailing_metadata, number, details,
                                                           _NO_FLAGS))
    operations.append(cygrpc.ReceiveCloseOnServerOperation(_NO_FLAGS))
    return tuple(operations)


class LoopServer:
    """A gRPC server whose calls run on the thread that calls serve()."""

    def __init__(self, options=()):
        if not available():
            raise RuntimeError("this grpcio lacks the completion-queue layer LoopServer uses")
        self._queue = cygrpc.CompletionQueue()
        self._server = cygrpc.Server(tuple(options), False)
        self._server.register_completion_queue(self._queue)
        self._generic_handlers = []
        self._stopping = False

    # What generated add_XServicer_to_server() calls.
    def add_generic_rpc_handlers(self, handlers):
        self._generic_handlers.extend(handlers)

    def add_registered_method_handlers(self, service, handlers):
        """What newer generated stubs call besides add_generic_rpc_handlers:
        the same methods again, already served through the generic handler."""

    def add_insecure_port(self, address):
        """The port listened on (0 when the address cannot be listened on)."""
        return self._server.add_http2_port(address.encode())

    def start(self):
        self._server.start()

    def stop(self, grace=None):
        """Ends every call at once (grace is ignored) and makes serve()
        return; callable from any thread."""
        self._stopping = True
        self._server.shutdown(self._queue, _SHUT_DOWN)
        self._server.cancel_all_calls()

    def _method_handler(self, method, metadata):
        details = _HandlerCallDetails(method, metadata)
        for generic in self._generic_handlers:
            handler = generic.service(details)
            if handler is not None:
                return handler
        return None

    def serve(self):
        """Serves until stop() (a signal's exception propagates)."""
        server, queue = self._server, self._queue
        self._request_call()
        while True:
            event = queue.poll()
            tag = event.tag
            if tag is _NEW_CALL:
                if event.success:
                    self._request_call()
                    self._arrived(event)
            elif type(tag) is _Request:
                self._answer(tag, event)
            elif tag is _SHUT_DOWN:
                server.destroy()
                return
            # A _Finish needs nothing more: dropping it frees the call.

    def _request_call(self):
        """Asks for the next call, unless stop() has begun (a shut-down
        server refuses the request; the shutdown's own completion ends
        serve())."""
        if self._stopping:
            return
        try:
            self._server.request_call(self._queue, self._queue, _NEW_CALL)
        except ValueError:  # stop() won the race
            pass

    def _arrived(self, event):
        call = event.call
        method = event.call_details.method
        method = method.decode() if isinstance(method, bytes) else method
        metadata = event.invocation_metadata
        handler = self._method_handler(method, metadata)
        if handler is None or handler.request_streaming or handler.response_streaming:
            call.start_server_batch(
                _status_operations(grpc.StatusCode.UNIMPLEMENTED, f"method {method} is not served",
                                   None), _Finish(call))
            return
        call.start_server_batch((cygrpc.ReceiveMessageOperation(_NO_FLAGS),),
                                _Request(call, handler, metadata))

    def _answer(self, request, event):
        call, handler = request.call, request.handler
        message = event.batch_operations[0].message()
        if message is None:
            call.start_server_batch(
                _status_operations(grpc.StatusCode.UNIMPLEMENTED, "a unary call needs one request",
                                   None), _Finish(call))
            return
        context = LoopContext(request.metadata)
        answer = None
        step = "deserializing the request"
        try:
            if handler.request_deserializer is not None:  # None: the handler takes bytes
                message = handler.request_deserializer(message)
            step = None
            response = handler.unary_unary(message, context)
            if context.code == grpc.StatusCode.OK and response is not None:
                step = "serializing the answer"
                answer = response if handler.response_serializer is None else \
                    handler.response_serializer(response)
        except _Abort:
            pass
        except Exception as e:  # the edge: a handler's exception fails its call only
            # Like grpc.server(): INTERNAL for the (de)serializers, UNKNOWN for the handler.
            context.code = grpc.StatusCode.UNKNOWN if step is None else grpc.StatusCode.INTERNAL
            context.details = f"{step or 'handler'} raised {type(e).__name__}: {e}"
        if context.code == grpc.StatusCode.OK and answer is None:
            context.code = grpc.StatusCode.INTERNAL
            context.details = "handler returned no answer"
        call.start_server_batch(
            _status_operations(context.code, context.details, context.trailing_metadata, answer),
            _Finish(call))
