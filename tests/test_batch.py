"""Columnar batch scores (Engine.score_columns) against the scalar score, per candidate.

Random nets on random and bundled decks (the generators of test_reference_agreement)
and bench-like nets (bench/netgen.py) get batches that mix the column path's common
case with the cases it hands to the scalar path: runs extending a wire, runs crossing
two wires, floating runs, runs over a via, cuts. Every entry must equal
``Engine.score(name, [shape], detail=False)``: utilizations and cost within 1e-12
relative, verdicts and added area equal.
"""

from __future__ import annotations

import math
import random
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import etchguard as eg

from test_reference_agreement import GRID, SPAN, decks, engine_with, pins_for, shapes_on

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))
from bench.batch_bench import frontier_candidates  # noqa: E402
from bench.netgen import bench_deck, extension_candidates, generate_net, via_run_candidates  # noqa: E402

REL = 1e-12
SETTINGS = settings(max_examples=60, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


def same(a: float, b: float) -> bool:
    return a == b or math.isclose(a, b, rel_tol=REL, abs_tol=0.0)


def assert_agrees(engine: eg.Engine, name: str, shapes: list[eg.Shape]) -> eg.BatchScores:
    layers = np.array([s.layer for s in shapes], dtype=np.int64)
    rects = np.array([s.rect for s in shapes], dtype=np.int64).reshape(-1, 4)
    before = engine.check(name)
    got = engine.score_columns(name, layers, rects)
    assert engine.check(name) == before  # scoring changes nothing
    assert len(got) == len(shapes)
    names = [l.name for l in engine.deck.layers]
    for i, shape in enumerate(shapes):
        want = engine.score(name, [shape], detail=False)
        where = f"candidate {i} {shape}"
        assert same(got.worst_change_utilization[i], want.worst_change_utilization), \
            (where, got.worst_change_utilization[i], want.worst_change_utilization)
        assert same(got.worst_utilization[i], want.worst_utilization), \
            (where, got.worst_utilization[i], want.worst_utilization)
        assert bool(got.legal[i]) == want.legal, where
        assert bool(got.breaks_limit[i]) == want.breaks_limit, where
        assert same(got.cost[i], want.cost), (where, got.cost[i], want.cost)
        assert same(got.added_area_um2[i], want.added_area_um2.get(names[shape.layer], 0.0)), \
            (where, got.added_area_um2[i], want.added_area_um2)
    return got


# -- random nets, random decks -------------------------------------------------------------

@st.composite
def batch_cases(draw: st.DrawFn):
    deck = draw(decks)
    net = {"name": "n1", "pins": draw(pins_for(deck)), "shapes": draw(shapes_on(deck, True, 0, 12))}
    names = [l["name"] for l in deck["layers"]]
    picks = []
    for _ in range(draw(st.integers(1, 24))):
        kind = draw(st.sampled_from(["grid", "extend", "inside", "stretch"]))
        if kind != "grid" and net["shapes"]:
            base = draw(st.sampled_from(net["shapes"]))
            x0, y0, x1, y1 = base["rect"]
            if kind == "extend":  # continue the shape to one side, by a few grid cells
                d = draw(st.integers(1, 4)) * GRID
                rect = draw(st.sampled_from([[x1, y0, x1 + d, y1], [x0 - d, y0, x0, y1],
                                             [x0, y1, x1, y1 + d], [x0, y0 - d, x1, y0],
                                             [x0 + GRID // 2, y0, x1 + d, y1]]))
            elif kind == "inside":  # within an existing shape: adds nothing
                rect = [x0, y0, max(x0 + 1, x1 - GRID // 2), y1]
            else:  # a long run across the field through the shape
                rect = draw(st.sampled_from([[-GRID, y0, (SPAN + 2) * GRID, y1],
                                             [x0, -GRID, x1, (SPAN + 2) * GRID]]))
            layer = draw(st.sampled_from([base["layer"]] + names))
        else:
            x, y = draw(st.integers(0, SPAN)), draw(st.integers(0, SPAN))
            w, h = draw(st.integers(1, 5)), draw(st.integers(1, 5))
            rect = [x * GRID, y * GRID, (x + w) * GRID, (y + h) * GRID]
            layer = draw(st.sampled_from(names))
        picks.append({"layer": layer, "rect": rect})
    return deck, net, picks


@SETTINGS
@given(batch_cases())
def test_columns_equal_scalar_on_random_nets(case) -> None:
    deck, net, picks = case
    engine = engine_with(deck, net)
    shapes = [eg.make_shape(engine.deck, p["layer"], p["rect"]) for p in picks]
    assert_agrees(engine, "n1", shapes)


# -- shared parts: candidates that start with shapes sent once -----------------------------

@st.composite
def shared_cases(draw: st.DrawFn):
    """A random net and candidates drawn as in batch_cases, cut into shared parts (runs
    of consecutive picks) and extensions; each candidate takes a random part or none."""
    deck, net, picks = draw(batch_cases())
    parts: list[list[dict]] = []
    rest = list(picks)
    for _ in range(draw(st.integers(1, 3))):
        if len(rest) < 2:
            break
        take = draw(st.integers(1, len(rest) - 1))
        parts.append(rest[:take])
        rest = rest[take:]
    sizes, at = [], 0
    while at < len(rest):
        size = draw(st.integers(1, min(3, len(rest) - at)))
        sizes.append(size)
        at += size
    chosen = [draw(st.integers(-1, len(parts) - 1)) for _ in sizes]
    return deck, net, parts, rest, sizes, chosen


@SETTINGS
@given(shared_cases())
def test_shared_parts_equal_whole_candidates_on_random_nets(case) -> None:
    """Engine.score_columns with common= equals the same candidates sent whole (the
    columns without shared parts) exactly, and each equals Engine.score of its shapes."""
    deck, net, parts, rest, sizes, chosen = case
    engine = engine_with(deck, net)
    to_shape = lambda p: eg.make_shape(engine.deck, p["layer"], p["rect"])  # noqa: E731
    part_shapes = [[to_shape(p) for p in part] for part in parts]
    own = [to_shape(p) for p in rest]
    flat_common = [s for part in part_shapes for s in part]
    common = eg.CommonShapes(np.array([s.layer for s in flat_common], dtype=np.int64),
                             np.array([s.rect for s in flat_common], dtype=np.int64).reshape(-1, 4),
                             np.array([len(p) for p in part_shapes], dtype=np.int64),
                             np.array(chosen, dtype=np.int64))
    got = engine.score_columns("n1", np.array([s.layer for s in own], dtype=np.int64),
                               np.array([s.rect for s in own], dtype=np.int64).reshape(-1, 4),
                               np.array(sizes, dtype=np.int64), common=common)
    whole, at = [], 0
    for size, k in zip(sizes, chosen):
        whole.append((part_shapes[k] if k >= 0 else []) + own[at:at + size])
        at += size
    flat = [s for c in whole for s in c]
    sent_whole = engine.score_columns("n1", np.array([s.layer for s in flat], dtype=np.int64),
                                      np.array([s.rect for s in flat], dtype=np.int64).reshape(-1, 4),
                                      np.array([len(c) for c in whole], dtype=np.int64))
    for column in ("worst_change_utilization", "worst_utilization", "legal", "breaks_limit", "cost",
                   "added_area_um2"):
        assert np.array_equal(getattr(got, column), getattr(sent_whole, column)), column
    for i, c in enumerate(whole):
        want = engine.score("n1", c, detail=False)
        assert same(got.worst_utilization[i], want.worst_utilization), (i, c)
        assert same(got.cost[i], want.cost) and bool(got.legal[i]) == want.legal, (i, c)


def test_shared_part_refusals(small_engine: eg.Engine) -> None:
    """Bad shared parts are refused naming the shared field; nothing is scored."""
    own = np.array([[0, 0, 100, 100]] * 3, dtype=np.int64)
    layers = np.zeros(3, dtype=np.int64)
    part = np.array([[0, 0, 200, 100], [100, 0, 300, 100]], dtype=np.int64)
    cases = ((eg.CommonShapes([0, 0], part, [1, 1], [0, 1, 2]), eg.InputError, "common.part[2]"),
             (eg.CommonShapes([0, 0], part, [2], [0, -2, 0]), eg.InputError, "common.part[1]"),
             (eg.CommonShapes([0, 0], part, [1, 2]), eg.InputError, "common.shape_count"),
             (eg.CommonShapes([0, 0], part, [1, 0, 1]), eg.InputError, "common.shape_count[1]"),
             (eg.CommonShapes([0, 99], part), eg.InputError, "common.layers[1]"),
             (eg.CommonShapes([0, 0], np.array([[0, 0, 200, 100], [5, 0, 5, 9]])), eg.InputError,
              "common.rects[1]"),
             (eg.CommonShapes([0, 0], part, [2], [0, 0]), eg.InputError, "common.part"))
    for common, error, field in cases:
        with pytest.raises(error) as err:
            small_engine.score_columns("v", layers, own, common=common)
        assert err.value.field == field, (common, err.value)
    # limits: a part plus a candidate's own shapes count against the shapes per net
    small = eg.Engine(small_engine.deck, limits=eg.Limits(max_shapes_per_net=3))
    small.open_net("s", [], None, [])
    with pytest.raises(eg.LimitExceededError) as err:
        small.score_columns("s", np.zeros(2, dtype=np.int64), own[:2], [2],
                            common=eg.CommonShapes([0, 0], part))
    assert err.value.field == "common.part[0]"


# -- bench-like nets ------------------------------------------------------------------------

def bench_batch(deck: eg.Deck, net, seed: int, count: int) -> list[eg.Shape]:
    """Frontier runs plus the cases around them: runs crossing two wires (long runs
    across the net's extent), floating runs far away, runs over a via, lone cuts."""
    rng = random.Random(f"test/{seed}")
    shapes = frontier_candidates(deck, net, count, seed=seed, mix=(0.6, 0.2))
    xs = [v for s in net.shapes for v in (s.rect[0], s.rect[2])]
    ys = [v for s in net.shapes for v in (s.rect[1], s.rect[3])]
    for _ in range(count // 8):
        run = rng.choice(net.runs)
        t = rng.random()
        x = round(run.x1 + t * (run.x2 - run.x1))
        y = round(run.y1 + t * (run.y2 - run.y1))
        layer = run.layer
        w = deck.layers[layer].wire_width or 100
        if rng.random() < 0.5:  # across the whole net: crosses several wires
            shapes.append(eg.Shape(layer, (min(xs) - w, y - w // 2, max(xs) + w, y - w // 2 + w)))
        else:
            shapes.append(eg.Shape(layer, (x - w // 2, min(ys) - w, x - w // 2 + w, max(ys) + w)))
        shapes.append(eg.Shape(layer, (max(xs) + 10 * w, y, max(xs) + 30 * w, y + w)))  # floating
    far = 1 << 40  # beyond the column path's +-2^30: always handed to the scalar score
    shapes.append(eg.Shape(net.runs[0].layer, (far, far, far + 1000, far + 200)))
    vias = [s for s in net.shapes if deck.layers[s.layer].kind == "cut"]
    for s in rng.sample(vias, min(len(vias), count // 8)):  # over a via, on the metal above/below
        x, y = (s.rect[0] + s.rect[2]) // 2, (s.rect[1] + s.rect[3]) // 2
        metal = s.layer + rng.choice((-1, 1))
        shapes += eg.run_shapes(deck, metal, x, y, x + rng.choice((-1, 1)) * rng.randint(200, 3000), y)
    return shapes


@pytest.mark.parametrize("size,seed", [(10, 0), (30, 1), (50, 2), (100, 3)])
def test_columns_equal_scalar_on_bench_nets(size: int, seed: int) -> None:
    deck = bench_deck()
    net = generate_net(deck, size, seed=seed)
    engine = eg.Engine(deck)
    engine.open_net(net.name, net.pins, None, net.shapes)
    assert_agrees(engine, net.name, bench_batch(deck, net, seed, 160))


def test_a_run_joining_two_wires_and_a_cut_joining_at_the_next_step() -> None:
    """Hand-made: two M1 wires with a gate each, separate at M1 and V1; an M2 wire over
    both ends stands on a V1 cut of the upper wire only. A run across both M1 wires
    merges them at M1; a cut on the lower wire under the M2 wire merges the two at M2
    (the step after its own). Both equal the scalar score and a check after the commit."""
    deck = bench_deck()
    at = {l.name: l.index for l in deck.layers}
    pins = [eg.Pin("g1", at["M1"], ((0, 0, 200, 200),), {"thin": 0.02}, 0.0, {}),
            eg.Pin("g2", at["M1"], ((0, 3000, 200, 3200),), {"thin": 0.03}, 0.0, {})]
    shapes = [eg.Shape(at["M1"], (0, 0, 4000, 200)), eg.Shape(at["M1"], (0, 3000, 4000, 3200)),
              eg.Shape(at["M2"], (3800, 0, 4000, 3200)), eg.Shape(at["V1"], (3850, 3050, 3950, 3150))]
    engine = eg.Engine(deck)
    engine.open_net("h", pins, None, shapes)
    bridge = eg.Shape(at["M1"], (1000, 0, 1200, 3200))
    cut = eg.Shape(at["V1"], (3850, 50, 3950, 150))
    got = assert_agrees(engine, "h", [bridge, cut])
    for i, shape in enumerate((bridge, cut)):
        ids = engine.commit("h", [shape])
        after = engine.check("h")
        engine.remove("h", ids)
        assert got.worst_utilization[i] == after.worst_utilization, (shape, after)


def test_multi_shape_candidates_equal_scalar() -> None:
    """score_columns with shape_count: runs, run + via stacks (4 shapes) and the
    bench batch's one-rectangle cases, mixed; each equals Engine.score of its shapes."""
    deck = bench_deck()
    for size, seed in ((10, 0), (50, 2), (100, 3)):
        net = generate_net(deck, size, seed=seed)
        engine = eg.Engine(deck)
        engine.open_net(net.name, net.pins, None, net.shapes)
        cands = (extension_candidates(deck, net, 40, seed=seed) + via_run_candidates(deck, net, 40, seed=seed)
                 + [[s] for s in bench_batch(deck, net, seed, 40)])
        random.Random(seed).shuffle(cands)
        flat = [s for c in cands for s in c]
        got = engine.score_columns(net.name, np.array([s.layer for s in flat], dtype=np.int64),
                                   np.array([s.rect for s in flat], dtype=np.int64),
                                   np.array([len(c) for c in cands], dtype=np.int64))
        assert len(got) == len(cands)
        for i, c in enumerate(cands):
            want = engine.score(net.name, c, detail=False)
            where = (size, i, c)
            assert same(got.worst_change_utilization[i], want.worst_change_utilization), where
            assert same(got.worst_utilization[i], want.worst_utilization), where
            assert bool(got.legal[i]) == want.legal and bool(got.breaks_limit[i]) == want.breaks_limit, where
            assert same(got.cost[i], want.cost), where
            assert same(got.added_area_um2[i], sum(want.added_area_um2.values())), where


def test_shape_count_refusals(small_engine: eg.Engine) -> None:
    rects = np.array([[0, 0, 100, 100]] * 4, dtype=np.int64)
    layers = np.zeros(4, dtype=np.int64)
    for counts, field in (([2, 1], "shape_count"), ([2, 0, 2], "shape_count[1]"),
                          ([1.0, 3.0], "shape_count"), ([[2, 2]], "shape_count")):
        with pytest.raises(eg.InputError) as err:
            small_engine.score_columns("v", layers, rects, np.array(counts))
        assert err.value.field == field, counts
    with pytest.raises(eg.LimitExceededError) as err:
        small_engine.score_columns("v", np.zeros(9, dtype=np.int64), np.repeat(rects[:1], 9, axis=0),
                                   np.ones(9, dtype=np.int64))
    assert err.value.field == "shape_count"
    assert len(small_engine.score_columns("v", layers, rects, np.array([3, 1]))) == 2


def test_columns_follow_commits_and_removals() -> None:
    """The per-state tables are rebuilt when the net changes."""
    deck = bench_deck()
    net = generate_net(deck, 30, seed=5)
    engine = eg.Engine(deck)
    engine.open_net(net.name, net.pins, None, net.shapes)
    cands = frontier_candidates(deck, net, 64, seed=5)
    assert_agrees(engine, net.name, cands)
    ids = engine.commit(net.name, cands[:3])
    assert_agrees(engine, net.name, cands)
    engine.remove(net.name, ids[:2])
    assert_agrees(engine, net.name, cands)


# -- validation ------------------------------------------------------------------------------

@pytest.fixture()
def small_engine() -> eg.Engine:
    deck = bench_deck()
    net = generate_net(deck, 10, seed=0, name="v")
    engine = eg.Engine(deck, limits=eg.Limits(max_candidates=8))
    engine.open_net(net.name, net.pins, None, net.shapes)
    return engine


def test_refusals_name_the_first_bad_row(small_engine: eg.Engine) -> None:
    good = np.array([[0, 0, 100, 100]] * 4, dtype=np.int64)
    layers = np.zeros(4, dtype=np.int64)
    bad = good.copy()
    bad[2] = [5, 0, 5, 10]
    bad[3] = [0, 0, -1, 10]
    with pytest.raises(eg.InputError) as err:
        small_engine.score_columns("v", layers, bad)
    assert err.value.field == "rects[2]"
    far = good.copy()
    far[1, 2] = 1 << 62
    with pytest.raises(eg.InputError) as err:
        small_engine.score_columns("v", layers, far)
    assert err.value.field == "rects[1]"
    with pytest.raises(eg.InputError) as err:
        small_engine.score_columns("v", np.array([0, 0, 99, -1]), good)
    assert err.value.field == "layers[2]"
    with pytest.raises(eg.InputError) as err:
        small_engine.score_columns("v", layers, good.astype(np.float64))
    assert err.value.field == "rects"
    with pytest.raises(eg.InputError) as err:
        small_engine.score_columns("v", layers, good[:, :3])
    assert err.value.field == "rects"
    with pytest.raises(eg.InputError) as err:
        small_engine.score_columns("v", layers[:3], good)
    assert err.value.field == "layers"
    with pytest.raises(eg.LimitExceededError):
        small_engine.score_columns("v", np.zeros(9, dtype=np.int64), np.repeat(good[:1], 9, axis=0))
    with pytest.raises(eg.NotFoundError):
        small_engine.score_columns("nope", layers, good)


def test_empty_batch(small_engine: eg.Engine) -> None:
    got = small_engine.score_columns("v", np.zeros(0, dtype=np.int64), np.zeros((0, 4), dtype=np.int64))
    assert len(got) == 0
