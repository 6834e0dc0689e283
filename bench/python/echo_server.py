#!/usr/bin/python3
"""The bare Python gRPC echo of bench/echo.proto, started with weir's handshake
(WEIR_LISTEN_ADDRESS; the address listened on is written to fd 3): the round
trip a Python connector is measured against (bench/call_cost with
WEIR_BENCH_ECHO_SERVER, docs/performance.md).

usage: echo_server.py [pool|loop]
  pool (default)  grpc.server() with a one-worker thread pool: the plain way
                  to serve gRPC from Python, the baseline;
  loop            weir.adapter.loop's one-thread completion loop, what the
                  Python adapter serves connectors with: the echo through
                  the adapter's serving alone.
Needs on PYTHONPATH the echo stubs (build/bench/python) and, for loop, the
adapter (build/adapters/python).
"""

import os
import sys
from concurrent.futures import ThreadPoolExecutor

import grpc

import echo_pb2
import echo_pb2_grpc


class Echo(echo_pb2_grpc.EchoServicer):

    def Echo(self, request, context):
        if request.answer_bytes == 0:
            return echo_pb2.EchoMessage(payload=request.payload)
        return echo_pb2.EchoMessage(payload=b"y" * request.answer_bytes)


def main():
    mode = sys.argv[1] if len(sys.argv) > 1 else "pool"
    listen = os.environ.get("WEIR_LISTEN_ADDRESS")
    if mode not in ("pool", "loop") or not listen:
        print("usage: WEIR_LISTEN_ADDRESS=ADDRESS echo_server.py [pool|loop]", file=sys.stderr)
        return 2
    options = [("grpc.so_reuseport", 0)]
    if mode == "loop":
        from weir.adapter import loop
        server = loop.LoopServer(options)
    else:
        server = grpc.server(ThreadPoolExecutor(max_workers=1), options=options)
    echo_pb2_grpc.add_EchoServicer_to_server(Echo(), server)
    port = server.add_insecure_port(listen)
    if port == 0:
        return 2
    server.start()
    address = listen if listen.startswith("unix:") else f"{listen.rpartition(':')[0]}:{port}"
    os.write(3, (address + "\n").encode())
    os.close(3)
    if mode == "loop":
        server.serve()
    else:
        server.wait_for_termination()
    return 0


if __name__ == "__main__":
    sys.exit(main())
