"""The compiled core's binding under malformed input: a clear Python exception (never a
crash), and the net it was asked about unchanged.

The engine validates everything at its edge first; these calls go straight to
``etchguard._core``, as a program that skipped the engine would, so the binding and
the core's own checks are what stand between bad input and the net's state.
"""

from __future__ import annotations

import numpy as np
import pytest

import etchguard as eg
from etchguard import _core
from etchguard._corenet import CoreNet, compile_deck
from bench.netgen import bench_deck, generate_net

COSTS = eg.CostModel().as_tuple()


@pytest.fixture()
def held():
    deck = bench_deck()
    net = generate_net(deck, 30, seed=4)
    core = CoreNet(compile_deck(deck), net.pins)
    core.add(list(range(1, len(net.shapes) + 1)), net.shapes)
    return deck, core


def _figures(core: CoreNet):
    return core.net.check(), core.shape_rows()


def test_bad_shapes_and_rectangles_are_refused(held) -> None:
    deck, core = held
    before = _figures(core)
    raw = core.net
    bad = [
        [eg.Shape(0, (10, 10, 5, 20))],                    # inverted
        [eg.Shape(0, (0, 0, 1 << 62, 10))],                # outside +-2^62
        [eg.Shape(len(deck.layers), (0, 0, 10, 10))],      # no such layer
        [eg.Shape(-1, (0, 0, 10, 10))],
    ]
    for shapes in bad:
        with pytest.raises(ValueError):
            raw.score(shapes, False, COSTS, [])
    for shapes in ([eg.Shape(0, (0.5, 0, 10, 10))],        # a float coordinate
                   [eg.Shape(0, [0, 0, 10, 10])],          # not a tuple
                   [eg.Shape(0, (0, 0, 10))],              # three coordinates
                   [object()]):                            # not a shape at all
        with pytest.raises((TypeError, AttributeError)):
            raw.score(shapes, False, COSTS, [])
    with pytest.raises(ValueError):
        raw.score([eg.Shape(0, (0, 0, 1 << 70, 10))], False, COSTS, [])  # beyond int64
    with pytest.raises(ValueError):
        raw.score([], False, COSTS, [])  # nothing to score
    assert _figures(core) == before


def test_bad_adds_and_removals_change_nothing(held) -> None:
    deck, core = held
    before = _figures(core)
    raw = core.net
    with pytest.raises(ValueError):  # an id held already
        raw.add_shapes([(1, 0, 0, 0, 10, 10)])
    with pytest.raises(ValueError):  # the second of two rows is bad: neither lands
        raw.add_shapes([(900, 0, 0, 0, 10, 10), (901, 0, 10, 10, 0, 0)])
    with pytest.raises(ValueError):
        raw.remove([1, 99_999])  # one unknown id: none removed
    with pytest.raises(ValueError):
        raw.remove([2, 2])  # listed twice
    with pytest.raises(TypeError):
        raw.add_shapes([(902, 0, 0.0, 0, 10, 10)])
    assert _figures(core) == before


def test_bad_batch_columns_are_refused(held) -> None:
    deck, core = held
    before = _figures(core)
    rects = np.array([[0, 0, 100, 100], [0, 0, 200, 100]], dtype=np.int64)
    layers = np.zeros(2, dtype=np.int32)
    out = [np.empty(2), np.empty(2), np.empty(2, dtype=np.uint8), np.empty(2, dtype=np.uint8),
           np.empty(2), np.empty(2)]
    with pytest.raises(ValueError):  # counts that do not add up to the rows
        core.net.score_batch(layers, rects, np.array([3], dtype=np.int64), COSTS, *out)
    with pytest.raises(ValueError):  # a count of zero
        core.net.score_batch(layers, rects, np.array([0, 2], dtype=np.int64), COSTS, *out)
    with pytest.raises(ValueError):  # one layer for two rows
        core.net.score_batch(np.zeros(1, dtype=np.int32), rects, None, COSTS, *out)
    with pytest.raises(ValueError):  # result columns of the wrong length
        core.net.score_batch(layers, rects, None, COSTS, *[a[:1] for a in out])
    with pytest.raises(TypeError):  # float coordinates
        core.net.score_batch(layers, rects.astype(float), None, COSTS, *out)
    with pytest.raises(TypeError):  # rows of three
        core.net.score_batch(layers, np.zeros((2, 3), dtype=np.int64), None, COSTS, *out)
    assert _figures(core) == before


def test_bad_pins_and_queries_are_refused(held) -> None:
    deck, core = held
    model = core.compiled.model
    with pytest.raises(ValueError):  # a pin on no layer
        _core.Net(model, [(len(deck.layers), [(0, 0, 10, 10)], [0.1], -1.0, 0.0, [], [], [], [])])
    with pytest.raises(ValueError):  # a pin without a rectangle
        _core.Net(model, [(0, [], [0.1], -1.0, 0.0, [], [], [], [])])
    with pytest.raises(ValueError):
        core.net.headroom(len(deck.layers), 0, 0)
    with pytest.raises(ValueError):
        core.net.touching(-1, (0, 0, 1, 1))
    with pytest.raises(ValueError):
        core.net.element(10_000_000)
    with pytest.raises(ValueError):
        core.net.pin_diffusion(len(core.pins))
