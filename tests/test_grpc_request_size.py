"""Oversize requests are refused by their counts before any of them is converted.

The servicer is driven in-process with a stand-in context, so that what a refused
request costs can be measured: tracemalloc counts the Python allocations made while
the call runs (the parsed protobuf message is built before, as grpc would). A request
over a count limit must be refused RESOURCE_EXHAUSTED naming the field, with the
state unchanged, having allocated next to nothing (converting one shape costs
hundreds of bytes, so a refusal after conversion would show as megabytes).
"""

from __future__ import annotations

import tracemalloc

import grpc
import pytest

import etchguard as eg
from etchguard.client import pb, rect
from etchguard.server import convert
from etchguard.server.app import ServerConfig
from etchguard.server.metrics import NullMetrics
from etchguard.server.servicer import AntennaServicer
from etchguard._jobs import Jobs
from grpc_fixtures import DEMO_DECK, DRIVER, GATE

LIMITS = eg.Limits(max_shapes_per_net=1000, max_pins_per_net=50, max_candidates=100)
BIG = 100_000  # shapes in an oversize request: ~100x every limit above


class _Refused(Exception):
    def __init__(self, status) -> None:
        self.status = status


class _Context:
    """What the servicer uses of a grpc.ServicerContext."""

    def abort_with_status(self, status):
        raise _Refused(status)

    def invocation_metadata(self):
        return ()  # no job named: the unnamed job

    def abort(self, code, message):
        raise AssertionError(f"unexpected {code}: {message}")


@pytest.fixture(scope="module")
def servicer():
    deck = eg.load_deck(DEMO_DECK)
    engine = eg.Engine(deck, LIMITS)
    engine.open_net("n", convert.pins(deck, [GATE, DRIVER]))
    return AntennaServicer(Jobs.single(engine), NullMetrics())


def _shapes(count: int) -> list[pb.Shape]:
    return [rect("M1", i, 0, i + 500, 140) for i in range(count)]


def _batch(candidates: int, rows_each: int, details: bool) -> pb.ScoreBatchRequest:
    req = pb.ScoreBatchRequest(net="n", details=details)
    cols = req.candidates
    cols.layers.append("M1")
    cols.shape_count.extend([rows_each] * candidates)
    n = candidates * rows_each
    cols.layer.extend([0] * n)
    cols.xlo.extend(range(n))
    cols.ylo.extend([0] * n)
    cols.xhi.extend(range(500, 500 + n))
    cols.yhi.extend([140] * n)
    return req


OVERSIZE = [
    ("Commit", lambda: pb.CommitRequest(net="n", shapes=_shapes(BIG)), "shapes"),
    ("OpenNet", lambda: pb.OpenNetRequest(net="o", pins=[GATE], shapes=_shapes(BIG)), "shapes"),
    ("OpenNet", lambda: pb.OpenNetRequest(net="o", pins=[GATE] * 5000), "pins"),
    ("OpenNet", lambda: pb.OpenNetRequest(
        net="o", pins=[pb.Pin(name="p", layer="M1", rects=[pb.Rect(xlo=i, ylo=0, xhi=i + 9, yhi=9)
                                                           for i in range(BIG)])]), "pins[0].rects"),
    ("Score", lambda: pb.ScoreRequest(net="n", candidate=_shapes(BIG)), "candidate"),
    ("Remove", lambda: pb.RemoveRequest(net="n", shape_ids=range(1, BIG)), "shape_ids"),
    ("ScoreBatch", lambda: _batch(BIG, 1, details=False), "candidates"),
    ("ScoreBatch", lambda: _batch(50, 2000, details=True), "candidates"),
]


@pytest.mark.parametrize("method,make,field", OVERSIZE,
                         ids=[f"{m}-{f}" for m, _, f in OVERSIZE])
def test_an_oversize_request_is_refused_before_conversion(servicer, method, make, field):
    request = make()
    before = servicer.engine.spec_with_ids("n")
    tracemalloc.start()
    try:
        with pytest.raises(_Refused) as info:
            getattr(servicer, method)(request, _Context())
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    status = info.value.status
    assert status.code == grpc.StatusCode.RESOURCE_EXHAUSTED, status.details
    assert status.details.startswith(f"{field}: "), status.details
    assert peak < 256 * 1024, f"{peak} bytes allocated: the request was converted before it was refused"
    assert servicer.engine.spec_with_ids("n") == before
    assert servicer.engine.net_names() == ["n"]


def test_the_default_message_size_holds_every_request_the_default_limits_accept():
    """The largest commit the default limits allow, at the widest coordinates, fits the
    default receive size; a request past it never reaches conversion at all."""
    limits, config = eg.Limits(), ServerConfig()
    wide = 2 ** 62 - 1  # the coordinate bound of etchguard.v1 Rect
    largest = pb.CommitRequest(net="n" * 200, shapes=[rect("M1", -wide, -wide, wide, wide)] * 1)
    per_shape = len(largest.SerializeToString()) - len(pb.CommitRequest(net="n" * 200).SerializeToString())
    assert per_shape * limits.max_shapes_per_net < config.max_message_bytes
    assert config.max_message_bytes <= 16 * 1024 * 1024, "parsing alone costs ~6x the bytes (upb)"
