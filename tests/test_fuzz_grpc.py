"""Fuzz the gRPC surface: malformed and extreme requests against a live server.

Hypothesis builds requests for every mutating and questioning call (unary and on the
session stream) from values chosen to hurt: int64 extremes, coordinates past +-2^62,
inverted and empty rectangles, NaN and infinities, unknown layers, empty and long
names, column tables that disagree, batches past the server's limit; plus raw bytes
that are no message at all. Each answer must be OK or a proper refusal: a status
other than INTERNAL/UNKNOWN whose message begins with the field it names (and, for
INVALID_ARGUMENT, a BadRequest detail naming it). A refused call must leave the
state checksum (stats and every net's full report) as it was. The server must
still answer at the end. ETCHGUARD_EXAMPLES sets the number of examples.
"""

from __future__ import annotations

import hashlib
import math
import os

import grpc
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from etchguard.client import ServiceError, pb, service_error
from grpc_fixtures import DRIVER, GATE, start_server

EXAMPLES = int(os.environ.get("ETCHGUARD_EXAMPLES", "150"))
MAX_CANDIDATES = 32
NETS = ["fz/a", "fz/b"]
REFUSALS = {grpc.StatusCode.INVALID_ARGUMENT, grpc.StatusCode.NOT_FOUND,
            grpc.StatusCode.RESOURCE_EXHAUSTED, grpc.StatusCode.ALREADY_EXISTS,
            grpc.StatusCode.FAILED_PRECONDITION}

I64 = st.one_of(st.sampled_from([0, 1, -1, 2**62 - 1, 2**62, -(2**62), 2**63 - 1, -(2**63)]),
                st.integers(-(2**63), 2**63 - 1), st.integers(-5000, 25_000))
FLOATS = st.one_of(st.sampled_from([math.nan, math.inf, -math.inf, -0.0, -1.0, 1e308, 5e-324]),
                   st.floats(allow_nan=True, allow_infinity=True))
NAMES = st.one_of(st.sampled_from(["", "M1", "M2", "V1", "m1", "M7", "\x00", "M1 "]),
                  st.text(max_size=40))
NET = st.one_of(st.sampled_from(NETS + ["", "fz/none", "x" * 5000]), st.text(max_size=20))


@st.composite
def rects(draw):
    if draw(st.booleans()):  # near the nets, sometimes inverted or empty
        x, y = draw(st.integers(-100, 20_000)), draw(st.integers(-100, 3000))
        return pb.Rect(xlo=x, ylo=y, xhi=x + draw(st.integers(-200, 3000)),
                       yhi=y + draw(st.integers(-200, 3000)))
    return pb.Rect(xlo=draw(I64), ylo=draw(I64), xhi=draw(I64), yhi=draw(I64))


@st.composite
def shapes(draw):
    layer = draw(NAMES)
    if draw(st.integers(0, 4)) == 0:
        return pb.Shape(layer=layer)  # no geometry
    if draw(st.booleans()):
        return pb.Shape(layer=layer, rect=draw(rects()))
    run = pb.Run(x1=draw(I64), y1=draw(I64), x2=draw(I64), y2=draw(I64), width=draw(I64))
    if draw(st.booleans()):
        run.extension = draw(I64)
    return pb.Shape(layer=layer, run=run)


@st.composite
def pins(draw):
    return pb.Pin(name=draw(NAMES), layer=draw(NAMES), rects=draw(st.lists(rects(), max_size=3)),
                  gate_area=draw(st.dictionaries(NAMES, FLOATS, max_size=2)), diff_area=draw(FLOATS),
                  cell_area=draw(st.dictionaries(NAMES, FLOATS, max_size=2)))


@st.composite
def columns(draw):
    n = draw(st.one_of(st.integers(0, 4), st.just(MAX_CANDIDATES + 1)))
    cols = pb.CandidateColumns(layers=draw(st.lists(NAMES, max_size=3)))
    cols.shape_count.extend(draw(st.lists(st.integers(0, 3), max_size=n + 1)) or [1] * n)
    cols.layer.extend(draw(st.lists(st.integers(0, 4), min_size=n, max_size=n + 1)))
    for name in ("xlo", "ylo", "xhi", "yhi"):
        getattr(cols, name).extend(draw(st.lists(I64, min_size=n, max_size=n + 1)))
    return cols


# (method name, request strategy, session op or None)
CALLS = [
    ("Commit", st.builds(pb.CommitRequest, net=NET, shapes=st.lists(shapes(), max_size=4)), "commit"),
    ("Remove", st.builds(pb.RemoveRequest, net=NET,
                         shape_ids=st.lists(st.integers(0, 2**64 - 1), max_size=4)), "remove"),
    ("OpenNet", st.builds(pb.OpenNetRequest, net=NET, pins=st.lists(pins(), max_size=3),
                          shapes=st.lists(shapes(), max_size=2)), "open_net"),
    ("CloseNet", st.builds(pb.CloseNetRequest, net=st.sampled_from(["", "fz/none"])), "close_net"),
    ("Score", st.builds(pb.ScoreRequest, net=NET, candidate=st.lists(shapes(), max_size=MAX_CANDIDATES + 2),
                        without_changes=st.booleans()), "score"),
    ("ScoreBatch", st.builds(pb.ScoreBatchRequest, net=NET, candidates=columns(),
                             details=st.booleans()), "score_batch"),
    ("Headroom", st.builds(pb.HeadroomRequest, net=NET, layer=NAMES, x=I64, y=I64), "headroom"),
    ("CheckNet", st.builds(pb.CheckNetRequest, net=NET), "check"),
    ("LoadDeck", st.builds(pb.LoadDeckRequest, toml=st.one_of(
        st.text(max_size=60), st.just('[process]\nname = "x"\ndbu_per_micron = -1\n'))), None),
]


@pytest.fixture(scope="module")
def fuzz_server(tmp_path_factory):
    state = tmp_path_factory.mktemp("fuzz-state")
    s = start_server("--max-candidates", str(MAX_CANDIDATES), "--max-shapes-per-net", "300",
                     "--max-pins-per-net", "8", "--state-dir", str(state), "--sync", "none",
                     metrics=False)
    with s.client(timeout=20) as c:
        for net in NETS:
            c.open_net(net, [GATE, DRIVER])
    yield s
    assert s.stop() == 0


def checksum(c) -> str:
    stats = c.stats()
    h = hashlib.sha256(f"{stats.nets} {stats.shapes} {stats.deck}".encode())
    for report in sorted(c.check_all(), key=lambda r: r.net):
        h.update(report.SerializeToString(deterministic=True))
    return h.hexdigest()


def assert_proper(error: ServiceError) -> None:
    assert error.code in REFUSALS, f"{error.code.name}: {error.message}"
    assert error.field, f"no field named: {error.message}"
    assert error.message.startswith(error.field.split("[")[0].split(".")[0]), error.message


@settings(max_examples=EXAMPLES, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow,
                                 HealthCheck.data_too_large])
@given(data=st.data())
def test_malformed_requests_are_refused_properly_and_change_nothing(fuzz_server, data):
    method, strategy, op = data.draw(st.sampled_from(CALLS))
    request = data.draw(strategy)
    on_session = op is not None and data.draw(st.booleans())
    with fuzz_server.client(timeout=20) as c:
        before = checksum(c)
        try:
            if on_session:
                with c.session() as s:
                    s.ask(op, request)
            else:
                c._call(getattr(c.stub, method), request)
        except ServiceError as error:
            assert_proper(error)
            assert checksum(c) == before, f"{method}: a refused call changed the state"
        else:  # accepted (valid after all): the state may have changed; keep the nets open
            if method == "CloseNet" or method == "LoadDeck":
                pytest.fail(f"{method} accepted {request!r}")


@settings(max_examples=max(20, EXAMPLES // 5), deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(method=st.sampled_from([m for m, _, _ in CALLS] + ["Session"]), raw=st.binary(max_size=64))
def test_bytes_that_are_no_message_are_refused_as_the_request(fuzz_server, method, raw):
    with fuzz_server.client(timeout=20) as c:
        before = checksum(c)
        path = f"/etchguard.v1.AntennaService/{method}"
        try:
            if method == "Session":
                call = c.channel.stream_stream(path, request_serializer=None, response_deserializer=None)
                list(call(iter([raw]), timeout=10))
            else:
                c.channel.unary_unary(path, request_serializer=None, response_deserializer=None)(raw, timeout=10)
        except grpc.RpcError as exc:
            error = service_error(exc)
            assert_proper(error)
        assert checksum(c) == before


def test_the_server_is_well_after_the_fuzzing(fuzz_server):
    with fuzz_server.client() as c:
        assert c.health() == "SERVING"
        assert set(NETS) <= {r.net for r in c.check_all()}
