"""The floor of the gRPC bench: a bare Python gRPC echo server.

It serves the etchguard.v1 method paths through a generic handler on raw bytes: no
protobuf parsing, no engine, no metrics. Every request is answered with canned reply
bytes that the bench captured from the real server for the same requests, in the
same order (round robin), so both servers put the same bytes on the wire. The gRPC
server itself is ``etchguard.server.app.grpc_server``: the same thread pool, options
and limits as the real one, so the only difference measured is what etchguard adds.

    python -m bench.echo_server --replies FILE [--listen 127.0.0.1:0]

FILE is JSON ``{case: {method path: [base64 reply, ...]}}``; the control method
``/bench.Echo/Select`` (request: the case name, UTF-8) picks the case and restarts its
rounds. On start the server prints ``{"listening": "host:port"}`` on stdout. (The
entry point is ``serve``, not ``main``: ``python -m bench`` runs every ``main``.)
"""

from __future__ import annotations

import argparse
import base64
import json
import signal
import sys
import threading

import grpc
from etchguard.server.app import ServerConfig, grpc_server

SERVICE = "etchguard.v1.AntennaService"
METHODS = ("LoadDeck", "GetDeck", "OpenNet", "Commit", "Remove", "CloseNet", "Score", "ScoreBatch",
           "Headroom", "CheckNet", "GetStats")


def _raw(data: bytes) -> bytes:
    return data


class Canned:
    def __init__(self, cases: dict[str, dict[str, list[bytes]]]) -> None:
        self.cases = cases
        self.current: dict[str, list[bytes]] = {}
        self.next: dict[str, int] = {}

    def select(self, request: bytes, _context) -> bytes:
        self.current = self.cases[request.decode()]
        self.next = {path: 0 for path in self.current}
        return b""

    def reply(self, path: str) -> bytes:
        replies = self.current[path]
        i = self.next[path]
        self.next[path] = i + 1
        return replies[i % len(replies)]

    def unary(self, path: str):
        def handler(_request: bytes, _context) -> bytes:
            return self.reply(path)
        return handler

    def stream(self, path: str):
        def handler(requests, _context):
            for _ in requests:
                yield self.reply(path)
        return handler


def build(cases: dict[str, dict[str, list[bytes]]], listen: str) -> tuple[grpc.Server, str]:
    canned = Canned(cases)
    handlers = {m: grpc.unary_unary_rpc_method_handler(canned.unary(f"/{SERVICE}/{m}"), _raw, _raw)
                for m in METHODS}
    handlers["Session"] = grpc.stream_stream_rpc_method_handler(canned.stream(f"/{SERVICE}/Session"),
                                                                _raw, _raw)
    server = grpc_server(ServerConfig(listen=[listen]))
    server.add_generic_rpc_handlers((
        grpc.method_handlers_generic_handler(SERVICE, handlers),
        grpc.method_handlers_generic_handler(
            "bench.Echo", {"Select": grpc.unary_unary_rpc_method_handler(canned.select, _raw, _raw)}),
    ))
    port = server.add_insecure_port(listen)
    return server, f"{listen.rsplit(':', 1)[0]}:{port}"


def serve(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.echo_server", description=__doc__.split("\n")[0])
    parser.add_argument("--replies", required=True, help="JSON file of canned replies")
    parser.add_argument("--listen", default="127.0.0.1:0")
    args = parser.parse_args(argv)
    with open(args.replies, encoding="utf-8") as f:
        raw = json.load(f)
    cases = {case: {path: [base64.b64decode(r) for r in replies] for path, replies in methods.items()}
             for case, methods in raw.items()}
    server, address = build(cases, args.listen)
    server.start()
    print(json.dumps({"listening": address}), flush=True)
    done = threading.Event()
    for s in (signal.SIGTERM, signal.SIGINT):
        signal.signal(s, lambda *_: done.set())
    while not done.wait(0.5):
        pass
    server.stop(1).wait()
    return 0


if __name__ == "__main__":
    sys.exit(serve())
