"""Budgets evaluated locally (etchguard.client.LocalBudget) against the service's score.

For random nets on random and bundled decks (the generators of
test_reference_agreement), random shapes taken as common (a partial path), a point on
a random element and random candidate extensions: whenever the local evaluation covers
a candidate, its figures equal ``Engine.score(common + candidate)`` to 1e-9 relative
(the contract's tolerance; 1e-12 absolute beside it for figures that are 0 on one side
and a rounding residue on the other). Whether a candidate really extends the one
component and merges nothing is decided here independently of the engine: the
contract's contact rules (antenna-model.md, "Connectivity at a step") on the
rectangles, components by networkx. Every candidate that does not is declined. The
budget travels as the service's BudgetReply (server.convert.budget_into), as over gRPC.
"""

from __future__ import annotations

import math
import random
import sys
from pathlib import Path

import networkx as nx
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import etchguard as eg
from etchguard.client import LocalBudget, pb
from etchguard.server import convert

from test_reference_agreement import GRID, SPAN, decks, engine_with, pins_for, shapes_on

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))
from bench.netgen import bench_deck, generate_net  # noqa: E402

REL, ABS = 1e-9, 1e-12
SETTINGS = settings(max_examples=80, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


# -- an independent verdict: does X extend the point's component and merge nothing? ----------

def _edge_touch(a, b) -> bool:  # same routing layer: positive-area overlap or a shared edge
    ix = min(a[2], b[2]) - max(a[0], b[0])
    iy = min(a[3], b[3]) - max(a[1], b[1])
    return ix >= 0 and iy >= 0 and (ix > 0 or iy > 0)


def _overlap(a, b) -> bool:  # a cut on a metal: positive-area overlap
    return min(a[2], b[2]) > max(a[0], b[0]) and min(a[3], b[3]) > max(a[1], b[1])


def _components(deck: eg.Deck, elements: list[tuple[int, tuple, int]], step: int) -> list[set[int]]:
    """Components at ``step`` of (layer, rect, pin or -1) elements, by index."""
    g = nx.Graph()
    present = [i for i, (layer, _, _) in enumerate(elements) if layer <= step]
    g.add_nodes_from(present)
    cut = [l.kind == "cut" for l in deck.layers]
    for i in present:
        li, ri, pi = elements[i]
        for j in present:
            if j <= i:
                continue
            lj, rj, pj = elements[j]
            if pi >= 0 and pi == pj:  # one pin: one conductor once all its rectangles are there
                g.add_edge(i, j)
            elif li == lj and _edge_touch(ri, rj):
                g.add_edge(i, j)
            elif abs(li - lj) == 1 and cut[li] != cut[lj] and _overlap(ri, rj):
                g.add_edge(i, j)
    return [set(c) for c in nx.connected_components(g)]


def extends_only(deck: eg.Deck, elements: list, hit: int, extension: list[tuple[int, tuple]]) -> bool:
    """True when the extension, on the point's layer, joins the component of element
    ``hit`` at every step from its layer on and merges nothing else into it."""
    layer = elements[hit][0]
    if any(l != layer for l, _ in extension):
        return False
    extra = [(l, r, -1) for l, r in extension]
    for step in range(layer, len(deck.layers)):
        before = next(c for c in _components(deck, elements, step) if hit in c)
        after = next(c for c in _components(deck, elements + extra, step) if hit in c)
        if after != before | set(range(len(elements), len(elements) + len(extra))):
            return False
    return True


# -- the comparison -------------------------------------------------------------------------

def local_budget(engine: eg.Engine, name: str, layer: int, x: int, y: int, common) -> LocalBudget:
    reply = pb.BudgetReply()
    convert.budget_into(reply, engine.budget(name, layer, x, y, common), engine.deck)
    return LocalBudget(reply)


def close(a: float, b: float) -> bool:
    return a == b or math.isclose(a, b, rel_tol=REL, abs_tol=ABS)


def assert_equals_score(engine: eg.Engine, name: str, common, budget: LocalBudget, extension) -> bool:
    """Compare one candidate; returns whether the budget covered it."""
    names = [l.name for l in engine.deck.layers]
    got = budget.evaluate([(names[l], r) for l, r in extension])
    if got is None:
        return False
    want = engine.score(name, list(common) + [eg.Shape(l, r) for l, r in extension], detail=False)
    where = (extension, got, want)
    assert close(got.worst_change_utilization, want.worst_change_utilization), where
    assert close(got.worst_utilization, want.worst_utilization), where
    assert got.legal == want.legal and got.breaks_limit == want.breaks_limit, where
    assert close(got.cost, want.cost), where
    assert close(got.added_area_um2, sum(want.added_area_um2.values())), where
    return True


@st.composite
def budget_cases(draw: st.DrawFn):
    deck = draw(decks)
    # pins with every feature: in-cell side walls, block ratios, rectangles on several layers
    net = {"name": "n1", "pins": draw(pins_for(deck, block_pins=True)), "shapes": draw(shapes_on(deck, True, 0, 10))}
    common = draw(shapes_on(deck, True, 0, 4))
    return deck, net, common, draw(st.randoms(use_true_random=False))


def _extensions(rng: random.Random, layer: int, anchor: tuple, layers: int) -> list[list[tuple[int, tuple]]]:
    """Candidate extensions around an anchor rectangle: continuations to each side,
    rectangles inside it, stubs across it, floating and far ones, pairs, and some on
    other layers."""
    x0, y0, x1, y1 = anchor
    out = []
    for _ in range(14):
        d = rng.randint(1, 5) * GRID
        kind = rng.randrange(7)
        if kind == 0:
            r = rng.choice([(x1, y0, x1 + d, y1), (x0 - d, y0, x0, y1), (x0, y1, x1, y1 + d), (x0, y0 - d, x1, y0)])
        elif kind == 1:
            r = (x0, y0, max(x0 + 1, x1 - GRID // 2), y1)
        elif kind == 2:
            r = (x0 + GRID // 2, y0 - d, x0 + GRID // 2 + GRID, y1 + d)
        elif kind == 3:
            x, y = rng.randint(0, SPAN) * GRID, rng.randint(0, SPAN) * GRID
            r = (x, y, x + rng.randint(1, 4) * GRID, y + rng.randint(1, 4) * GRID)
        elif kind == 4:
            r = (x1 + 3 * GRID, y1 + 3 * GRID, x1 + 5 * GRID, y1 + 4 * GRID)
        elif kind == 5:
            r = (x1, y0, x1 + d, y1)
            out.append([(layer, r), (layer, (r[2], r[1], r[2] + GRID, r[3] + GRID))])
            continue
        else:
            other = rng.choice([l for l in range(layers) if l != layer] or [layer])
            r = (x0, y0, x1 + d, y1)
            out.append([(other, r)] if rng.random() < 0.5 else [(layer, r), (other, r)])
            continue
        out.append([(layer, r)])
    return out


@SETTINGS
@given(budget_cases())
def test_local_budget_equals_score_on_random_nets(case) -> None:
    deck_data, net, common_data, rng = case
    engine = engine_with(deck_data, net)
    deck = engine.deck
    common = [eg.make_shape(deck, c["layer"], c["rect"]) for c in common_data]
    spec = engine.spec("n1")
    elements = ([(layer, r, i) for i, p in enumerate(spec.pins) for layer, r in p.layered_rects()]
                + [(s.layer, s.rect, -1) for s in spec.shapes] + [(s.layer, s.rect, -1) for s in common])
    hit = rng.randrange(len(elements))
    layer, anchor, _ = elements[hit]
    # a point inside the anchor: any element of its layer holding it overlaps the anchor
    # with positive area, so it is of the same component (a corner point may be shared by
    # two components that touch only there, and the engine would pick either)
    x, y = (anchor[0] + anchor[2]) // 2, (anchor[1] + anchor[3]) // 2
    budget = local_budget(engine, "n1", layer, x, y, common)
    before = engine.check("n1")
    for ext in _extensions(rng, layer, anchor, len(deck.layers)):
        truth = extends_only(deck, elements, hit, ext)
        covered = assert_equals_score(engine, "n1", common, budget, ext)
        assert truth or not covered, ("covered a candidate that merges or leaves the layer", ext)
    assert engine.check("n1") == before  # nothing was committed


def test_declines_merges_other_layers_and_vias() -> None:
    """Hand-made: a gate on M1 with a wire, another M1 wire of the net apart from it, a
    via up on the first. Extending the first wire is covered and equals the score;
    touching the other wire (a merge), a shape on M2 and a via stack are declined."""
    deck = bench_deck()
    at = {l.name: l.index for l in deck.layers}
    pins = [eg.Pin("g", at["M1"], ((0, 0, 200, 200),), {"thin": 0.02}, 0.0, {}),
            eg.Pin("d", at["M1"], ((6000, 0, 6200, 200),), {}, 0.2, {})]
    engine = eg.Engine(deck)
    engine.open_net("h", pins, None, [eg.Shape(at["M1"], (0, 0, 3000, 200)),
                                      eg.Shape(at["M1"], (4000, 0, 6200, 200))])
    budget = local_budget(engine, "h", at["M1"], 100, 100, [])
    assert assert_equals_score(engine, "h", [], budget, [(at["M1"], (3000, 0, 3500, 200))])
    assert budget.evaluate([("M1", (3000, 0, 4000, 200))]) is None  # joins the driver's wire
    assert budget.evaluate([("M2", (2800, 0, 3000, 900))]) is None  # another layer
    stack = [("M1", (2800, 0, 3000, 200)), ("V1", (2850, 50, 2950, 150)), ("M2", (2800, 0, 3000, 900))]
    assert budget.evaluate(stack) is None  # a via
    assert budget.evaluate([("M1", (5000, 1000, 5200, 1200))]) is None  # floating: a new component


def test_counts_a_step_only_when_its_best_ratio_moves() -> None:
    """Hand-made, the smallest net found where counting "a term feeding the step moved"
    disagreed with the score: gate a on M1 (large gate, short wire), gate b on M1 (tiny
    gate, long wire), joined on M2. Extending a's wire moves a's M1 term, which feeds
    M2's cumulative ratio, but M2's ratio belongs to b, whose sum the extension does not
    reach: the score (held to the check after commit) counts no change at M2, so the
    budget must not count b's ratio among the changes either."""
    deck = bench_deck()
    at = {l.name: l.index for l in deck.layers}
    pins = [eg.Pin("a", at["M1"], ((0, 0, 200, 200),), {"thin": 0.5}, 0.0, {}),
            eg.Pin("b", at["M1"], ((20000, 0, 20200, 200),), {"thin": 0.01}, 0.0, {})]
    shapes = [eg.Shape(at["M1"], (0, 0, 1000, 200)), eg.Shape(at["M1"], (16000, 0, 20200, 200)),
              eg.Shape(at["V1"], (800, 30, 940, 170)), eg.Shape(at["V1"], (16030, 30, 16170, 170)),
              eg.Shape(at["M2"], (780, 0, 16200, 200))]
    engine = eg.Engine(deck)
    engine.open_net("h", pins, None, shapes)
    budget = local_budget(engine, "h", at["M1"], 100, 100, [])
    ext = [(at["M1"], (-300, 0, 0, 200))]
    assert assert_equals_score(engine, "h", [], budget, ext)
    got = budget.evaluate([("M1", ext[0][1])])
    assert got is not None and got.worst_change_utilization < got.worst_utilization  # b's ratio: not a change


@pytest.mark.parametrize("size,seed", [(10, 0), (40, 1), (100, 2)])
def test_covered_share_on_bench_nets(size: int, seed: int) -> None:
    """On bench-like nets, budgets at random points of random wires with a random run
    as common: most extensions along the wire are covered, and each equals the score."""
    deck = bench_deck()
    net = generate_net(deck, size, seed=seed)
    engine = eg.Engine(deck)
    engine.open_net(net.name, net.pins, None, net.shapes)
    rng = random.Random(seed)
    covered = tried = 0
    for _ in range(12):
        run = rng.choice(net.runs)
        (shape,) = eg.run_shapes(deck, run.layer, run.x2, run.y2, run.x2 + (rng.choice((-1, 1)) * 2000
                                                                              if run.y1 == run.y2 else 0),
                                 run.y2 + (0 if run.y1 == run.y2 else rng.choice((-1, 1)) * 2000))
        common = [shape]
        r = shape.rect
        budget = local_budget(engine, net.name, shape.layer, r[0], r[1], common)
        for step in (200, 600, 1500, 4000):
            ext = [(shape.layer, (r[2], r[1], r[2] + step, r[3]) if r[2] - r[0] > r[3] - r[1]
                    else (r[0], r[3], r[2], r[3] + step))]
            tried += 1
            covered += assert_equals_score(engine, net.name, common, budget, ext)
    assert covered >= tried // 3, (covered, tried)
