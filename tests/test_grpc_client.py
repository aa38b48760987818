"""The client's request helpers build exactly what the engine's own helpers build."""

from __future__ import annotations

import random

import grpc

import numpy as np
import pytest

import etchguard as eg
from etchguard.client import candidate_columns, path, pb, pin, rect, run, runs_to_rects, via
from etchguard.server import convert
from grpc_fixtures import DEMO_DECK


@pytest.fixture(scope="module")
def deck():
    return eg.load_deck(DEMO_DECK)


@pytest.fixture(scope="module")
def info(deck):
    out = pb.DeckInfo()
    convert.deck_into(out, deck)
    return out


def test_runs_to_rects_is_run_rect():
    rng = random.Random(3)
    rows = []
    for _ in range(500):
        x, y, length = rng.randrange(-10**6, 10**6), rng.randrange(-10**6, 10**6), rng.randrange(0, 10**5)
        width = rng.randrange(1, 901)
        ext = rng.choice([None, 0, rng.randrange(0, 500)])
        horizontal = rng.random() < 0.5
        end = (x + length, y) if horizontal else (x, y + length)
        if rng.random() < 0.5:  # either end first
            rows.append((end[0], end[1], x, y, width, ext))
        else:
            rows.append((x, y, end[0], end[1], width, ext))
    for ext_kind in (None, "given"):
        subset = [r for r in rows if (r[5] is None) == (ext_kind is None)]
        cols = [np.array([r[i] for r in subset]) for i in range(5)]
        exts = None if ext_kind is None else np.array([r[5] for r in subset])
        got = runs_to_rects(*cols, extension=exts)
        want = [eg.run_rect(*r[:5], r[5]) for r in subset]
        assert [tuple(map(int, g)) for g in got] == want


def test_runs_to_rects_refuses_what_run_rect_refuses():
    for args in ((0, 0, 5, 5, 100), (0, 0, 0, 5, 0), (0, 0, 0, 5, -2)):
        with pytest.raises(ValueError):
            runs_to_rects(*args)
    with pytest.raises(ValueError):
        runs_to_rects(0, 0, 0, 5, 100, extension=-1)


def test_run_and_via_helpers_match_the_engine(deck, info):
    shape = convert.shape(deck, run("M2", 100, 100, 100, 5000), "s")
    assert shape == eg.run_shapes(deck, 2, 100, 100, 100, 5000)[0]
    assert convert.shapes(deck, via(info, "V1", 300, 400), "s") == eg.via_shapes(deck, 1, 300, 400)
    assert convert.shapes(deck, path("M1", [(0, 0), (900, 0)]), "s") == eg.run_shapes(deck, 0, 0, 0, 900, 0)
    with pytest.raises(ValueError):
        via(info, "M2", 0, 0)


def test_pin_helper(deck):
    (p,) = convert.pins(deck, [pin("u1.a", "M1", [(0, 0, 10, 10)], 0.05, 0.1, {"M1": 0.02})])
    assert p == eg.make_pin(deck, "u1.a", "M1", [(0, 0, 10, 10)], 0.05, 0.1, {"M1": 0.02})


def test_candidate_columns_convert_to_engine_shapes(deck):
    rects = np.array([[0, 0, 10, 10], [5, 5, 20, 20], [1, 2, 3, 4]])
    cols = candidate_columns(rects, ["M2", "M1", "M2"], counts=[1, 2])
    got = convert.candidate_columns(deck, cols)
    assert got == [[eg.make_shape(deck, "M2", rects[0].tolist())],
                   [eg.make_shape(deck, "M1", rects[1].tolist()), eg.make_shape(deck, "M2", rects[2].tolist())]]
    assert convert.shapes(deck, [rect("M1", 0, 0, 10, 10)], "s") == [eg.make_shape(deck, "M1", [0, 0, 10, 10])]


def test_client_names_are_the_packages():
    """A client's refusal is in the package's one error tree (one ``except
    EtchguardError`` catches a local refusal and a server's alike), and a server's batch
    scores are the engine's ``BatchScores``: one record, one name."""
    import etchguard
    from etchguard.client import BatchScores, ServiceError

    assert issubclass(ServiceError, etchguard.EtchguardError)
    assert BatchScores is etchguard.BatchScores
    err = ServiceError(grpc.StatusCode.NOT_FOUND, "unknown net 'x'", "net")
    assert (str(err), err.message, err.field, err.code) == (
        "NOT_FOUND: unknown net 'x'", "unknown net 'x'", "net", grpc.StatusCode.NOT_FOUND)
