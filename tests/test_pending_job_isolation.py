"""Issue 10, item 11: two jobs on one server cannot touch each other's nets, and one
job's LoadDeck does not change the other's figures.

A client names its job with the call metadata ``etchguard-job: <name>`` (``job_client``;
see ``etchguard._jobs``). Each job holds its own deck (the server's start-up deck until
it loads another) and its own nets.
"""

from __future__ import annotations

import grpc
import pytest

from etchguard.client import Client, ServiceError, rect
from grpc_fixtures import DRIVER, GATE, REPO, start_server, trunk

OTHER_DECK = REPO / "service" / "etchguard" / "data" / "lumen-5m.toml"


class _Job(grpc.UnaryUnaryClientInterceptor, grpc.UnaryStreamClientInterceptor,
           grpc.StreamStreamClientInterceptor):
    def __init__(self, job: str) -> None:
        self.header = ("etchguard-job", job)

    def _details(self, d):
        return _Details(d.method, d.timeout, [*(d.metadata or ()), self.header], d.credentials,
                        getattr(d, "wait_for_ready", None), getattr(d, "compression", None))

    def intercept_unary_unary(self, continuation, details, request):
        return continuation(self._details(details), request)

    def intercept_unary_stream(self, continuation, details, request):
        return continuation(self._details(details), request)

    def intercept_stream_stream(self, continuation, details, request_iterator):
        return continuation(self._details(details), request_iterator)


class _Details(grpc.ClientCallDetails):
    def __init__(self, method, timeout, metadata, credentials, wait_for_ready, compression):
        self.method, self.timeout, self.metadata = method, timeout, metadata
        self.credentials, self.wait_for_ready, self.compression = credentials, wait_for_ready, compression


def job_client(server, job: str) -> Client:
    channel = grpc.intercept_channel(grpc.insecure_channel(server.address), _Job(job))
    return Client(server.address, timeout=20, channel=channel)  # closes with the test's server


def _not_found(call) -> None:
    with pytest.raises(ServiceError) as info:
        call()
    assert info.value.code == grpc.StatusCode.NOT_FOUND


def test_one_job_cannot_see_close_or_change_another_jobs_net():
    server = start_server(metrics=False)
    try:
        a, b = job_client(server, "lumen-a"), job_client(server, "lumen-b")
        a.open_net("shared-name", [GATE, DRIVER])
        ids = a.commit("shared-name", trunk(a.deck))
        before = a.check("shared-name")
        _not_found(lambda: b.check("shared-name"))
        _not_found(lambda: b.get_net("shared-name"))
        _not_found(lambda: b.commit("shared-name", [rect("M1", 0, 0, 100, 100)]))
        _not_found(lambda: b.remove("shared-name", ids[:1]))
        _not_found(lambda: b.close_net("shared-name"))
        b.open_net("shared-name", [GATE])  # its own net of the same name
        assert a.check("shared-name") == before
        assert [s.id for s in a.get_net("shared-name").shapes] == ids
        with Client(server.address, timeout=20, job="lumen-a") as same_job:  # the client's own option
            assert same_job.check("shared-name") == before
    finally:
        server.stop()


def test_one_jobs_load_deck_leaves_another_jobs_figures_alone():
    server = start_server(metrics=False)
    try:
        a, b = job_client(server, "lumen-a"), job_client(server, "lumen-b")
        a.open_net("n", [GATE, DRIVER])
        a.commit("n", trunk(a.deck)[:1])
        before = a.check("n")
        b.load_deck(OTHER_DECK)
        assert a.stats().deck == "lumen-6m" and b.stats().deck == "lumen-5m"
        assert a.check("n") == before
    finally:
        server.stop()


def test_a_restart_keeps_each_jobs_nets_and_deck_with_its_owner(tmp_path):
    state = tmp_path / "state"
    server = start_server("--state-dir", str(state), "--sync", "always", metrics=False)
    try:
        a, b = job_client(server, "lumen-a"), job_client(server, "lumen-b")
        a.open_net("n", [GATE, DRIVER])
        a.commit("n", trunk(a.deck)[:1])
        b.load_deck(OTHER_DECK)
        b.open_net("m", [GATE])
        before_a, before_b = a.check("n"), b.check("m")
        server.proc.kill()  # no final snapshot: the jobs' journals are replayed
        server.proc.wait(10)
    finally:
        server.stop()
    server = start_server("--state-dir", str(state), metrics=False)
    try:
        a, b = job_client(server, "lumen-a"), job_client(server, "lumen-b")
        assert a.check("n") == before_a and b.check("m") == before_b
        assert a.stats().deck == "lumen-6m" and b.stats().deck == "lumen-5m"
        _not_found(lambda: b.check("n"))
        _not_found(lambda: a.check("m"))
        with server.client() as anonymous:  # the unnamed job holds none of them
            _not_found(lambda: anonymous.check("n"))
    finally:
        assert server.stop() == 0


def test_a_job_name_that_cannot_be_one_is_refused_naming_the_metadata_key():
    server = start_server(metrics=False)
    try:
        bad = job_client(server, ".hidden")
        with pytest.raises(ServiceError) as info:
            bad.open_net("n", [GATE])
        assert info.value.code == grpc.StatusCode.INVALID_ARGUMENT
        assert "etchguard-job" in str(info.value)
    finally:
        server.stop()
