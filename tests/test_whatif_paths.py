"""The what-if's shortcut for one rectangle that extends one component
(_whatif.score_joining) against the general path (_whatif.score, detail=False): the
same figures to the bit, on random nets and decks and on bench-like nets. The general
path itself is held to the independent shapely/networkx reference in
test_reference_agreement.py, so this closes the loop for the shortcut."""

from __future__ import annotations

from hypothesis import given

import etchguard as eg
from etchguard._whatif import score, score_joining
from test_batch import batch_cases, bench_batch
from test_reference_agreement import SETTINGS, engine_with

from bench.netgen import bench_deck, generate_net

TAKEN = {"random": [0, 0], "bench": [0, 0]}  # [shortcut answers, candidates]


def _held(engine: eg.Engine, name: str):
    net = engine._nets[name]
    with net.lock:
        state = engine._state(net)
        return state, engine._assessment(net, state)


def assert_same(engine: eg.Engine, name: str, shapes: list[eg.Shape], tally: str) -> None:
    state, assessment = _held(engine, name)
    for shape in shapes:
        quick = score_joining(state, assessment, shape, engine.costs)
        full = score(state, assessment, [shape], engine.costs, detail=False)
        TAKEN[tally][1] += 1
        if quick is None:
            continue
        TAKEN[tally][0] += 1
        assert quick == full, (shape, quick, full)


@SETTINGS
@given(batch_cases())
def test_shortcut_equals_general_path_on_random_nets(case) -> None:
    deck, net, picks = case
    engine = engine_with(deck, net)
    assert_same(engine, "n1", [eg.make_shape(engine.deck, p["layer"], p["rect"]) for p in picks], "random")


def test_shortcut_equals_general_path_on_bench_nets() -> None:
    deck = bench_deck()
    for size, seed in ((10, 0), (50, 1), (100, 2)):
        net = generate_net(deck, size, seed=seed)
        engine = eg.Engine(deck)
        engine.open_net(net.name, net.pins, None, net.shapes)
        assert_same(engine, net.name, bench_batch(deck, net, seed, 120), "bench")
    taken, total = TAKEN["bench"]
    print(f"\nshortcut answered {taken} of {total} bench candidates")
    assert taken > total // 3  # the shortcut is really exercised on realistic candidates
    assert taken < total  # and so is the general path
