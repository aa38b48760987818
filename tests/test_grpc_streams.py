"""Idle streams and connections cost nothing another caller needs.

Real servers on loopback. Sessions are opened with one request each (so each holds
its worker) and then left idle. Time bounds here are generous upper limits on
"eventually" (the server's own timeouts are 1-2 s); nothing is asserted about how
fast anything is.
"""

from __future__ import annotations

import socket
import time

import grpc
import pytest

from etchguard.client import ServiceError
from grpc_fixtures import start_server

EVENTUALLY_S = 30.0


def _open_idle(client, count: int) -> tuple[list, list[ServiceError]]:
    """``count`` sessions, each answered once (or refused); returns (open, refusals)."""
    admitted, refused = [], []
    for _ in range(count):
        s = client.session()
        try:
            s.check("no-such-net")
        except ServiceError as exc:
            if exc.code == grpc.StatusCode.NOT_FOUND:
                admitted.append(s)  # answered: the stream is open and waits for more
            else:
                refused.append(exc)
                s.close()
    return admitted, refused


def test_idle_sessions_as_many_as_workers_leave_calls_and_health_answered():
    server = start_server("--workers", "4", metrics=False)
    try:
        with server.client(timeout=10) as c:
            admitted, refused = _open_idle(c, 4)
            assert len(admitted) == 3, "default: workers - workers // 4 sessions"
            assert len(refused) == 1 and refused[0].code == grpc.StatusCode.RESOURCE_EXHAUSTED
            assert "--max-sessions" in refused[0].message
            for _ in range(20):  # a client calling one at a time, and the probes, are served
                assert c.health() == "SERVING"
                assert c.stats().deck == "lumen-6m"
            for s in admitted:
                s.close()
    finally:
        assert server.stop() == 0


def test_an_idle_session_is_closed_and_its_slot_freed():
    server = start_server("--workers", "3", "--max-sessions", "1", "--session-idle-s", "1",
                          metrics=False)
    try:
        with server.client(timeout=10) as c:
            (first,), _ = _open_idle(c, 1)
            _, refused = _open_idle(c, 1)
            assert refused and refused[0].code == grpc.StatusCode.RESOURCE_EXHAUSTED
            deadline = time.monotonic() + EVENTUALLY_S
            while True:  # the idle one is closed, so a new one gets in
                admitted, _ = _open_idle(c, 1)
                if admitted or time.monotonic() > deadline:
                    break
                time.sleep(0.2)
            assert admitted, "the idle session was never closed"
            with pytest.raises(ServiceError) as info:
                first.check("no-such-net")
            assert info.value.code == grpc.StatusCode.UNAVAILABLE
            assert "waited more than 1 s" in info.value.message
            with pytest.raises(ServiceError) as info:
                admitted[0].check("no-such-net")
            assert info.value.code == grpc.StatusCode.NOT_FOUND
            admitted[0].close()
    finally:
        assert server.stop() == 0
    closed = [e for e in server.logs if e.get("msg") == "idle stream closed"]
    assert closed and closed[0]["method"].endswith("/Session") and closed[0]["peer"]


def test_a_connection_that_never_calls_is_closed():
    server = start_server("--connection-idle-s", "1", metrics=False)
    try:
        host, port = server.address.rsplit(":", 1)
        with socket.create_connection((host, int(port))) as raw:
            raw.settimeout(EVENTUALLY_S)
            try:
                while raw.recv(4096):  # the server's settings frame, then the close
                    pass
            except socket.timeout:
                pytest.fail("the silent connection is still open")
    finally:
        assert server.stop() == 0


def test_max_sessions_must_leave_a_worker_free():
    from etchguard.server import ServeError, ServerConfig, build_server

    with pytest.raises(ServeError) as info:
        build_server(ServerConfig(listen=["127.0.0.1:0"], workers=4, max_sessions=4))
    assert info.value.field == "max_sessions"
