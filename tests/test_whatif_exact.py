"""What-if scores held to the bit against a check after the commit.

The contract: a what-if "must equal what a full check of the net would say after
committing" the candidate. The core computes a what-if without committing (groups of
candidates joined to components step by step, cumulative sums recomputed along the
feeding chain); a commit updates the net state incrementally and the check rebuilds
every figure from it. Both rest on exact integer areas and exactly rounded pin sums,
so the worst utilization and the verdict must agree exactly (==, not within a
tolerance), and the verdict-only and detailed scores must agree with each other. The
candidates are router-like: one rectangle, runs, via stacks, runs with a via stack at
one end, on random nets of random decks and on the bench's generated nets.
"""

from __future__ import annotations

import dataclasses
import random

from hypothesis import given
from hypothesis import strategies as st

import etchguard as eg
from test_batch import batch_cases, bench_batch
from test_reference_agreement import GRID, SETTINGS, engine_with

from bench.netgen import bench_deck, extension_candidates, generate_net, via_run_candidates


def assert_exact(engine: eg.Engine, name: str, candidates: list[list[eg.Shape]]) -> None:
    held = engine.check(name)
    for shapes in candidates:
        lean = engine.score(name, shapes, detail=False)
        full = engine.score(name, shapes, detail=True)
        # the face builds Score without its __init__: the same object as one built with it
        assert lean == dataclasses.replace(lean) and full == dataclasses.replace(full)
        assert all(c == dataclasses.replace(c) for c in full.changes)
        assert (lean.worst_utilization, lean.worst_change_utilization, lean.legal, lean.cost) == \
            (full.worst_utilization, full.worst_change_utilization, full.legal, full.cost), shapes
        ids = engine.commit(name, shapes)
        after = engine.check(name)
        engine.remove(name, ids)
        assert lean.worst_utilization == after.worst_utilization, (shapes, lean, after)
        assert lean.legal == after.legal, shapes
        for change in full.changes:  # every changed figure is a figure of the net after
            assert change.utilization <= after.worst_utilization, (shapes, change)
    assert engine.check(name) == held  # scoring and commit + remove leave it as it was


@SETTINGS
@given(batch_cases())
def test_one_rectangle_equals_check_after_commit_on_random_nets(case) -> None:
    deck, net, picks = case
    engine = engine_with(deck, net)
    assert_exact(engine, "n1", [[eg.make_shape(engine.deck, p["layer"], p["rect"])] for p in picks])


def test_one_rectangle_equals_check_after_commit_on_bench_nets() -> None:
    deck = bench_deck()
    for size, seed in ((10, 0), (50, 1), (100, 2)):
        net = generate_net(deck, size, seed=seed)
        engine = eg.Engine(deck)
        engine.open_net(net.name, net.pins, None, net.shapes)
        assert_exact(engine, net.name, [[s] for s in bench_batch(deck, net, seed, 60)])


# -- multi-shape candidates ------------------------------------------------------------------

def via_stacks(deck: eg.Deck, shapes: list[eg.Shape], rng: random.Random, count: int) -> list[list[eg.Shape]]:
    """Router-like multi-shape candidates at points of existing shapes: a via stack of
    one or two vias up (or one down), alone or with a run at its top, and a run with a
    via stack at its far end; plus the same stacks without their lowest pad."""
    layers = deck.layers
    routed = [s for s in shapes if layers[s.layer].is_routing]
    out: list[list[eg.Shape]] = []
    for _ in range(count if routed else 0):
        base = rng.choice(routed)
        x0, y0, x1, y1 = base.rect
        x, y = (x0 + x1) // 2, (y0 + y1) // 2
        m = base.layer
        up = m + 1 < len(layers) and bool(layers[m + 1].cut_size)
        down = m - 1 >= 0 and bool(layers[m - 1].cut_size)
        kind = rng.choice(["stack", "stack2", "stack+run", "run+stack", "down"])
        if kind == "down" and down:
            out.append(eg.via_shapes(deck, m - 1, x, y))
            continue
        if not up:
            continue
        stack = eg.via_shapes(deck, m + 1, x, y)
        top = m + 2
        if kind == "stack2" and top + 1 < len(layers) and layers[top + 1].cut_size:
            stack = stack + eg.via_shapes(deck, top + 1, x, y)
            top += 2
        if kind == "run+stack":  # a run on m from the point, the via up at its far end
            length = rng.choice((-1, 1)) * rng.randint(2, 30) * (layers[m].wire_width or GRID)
            horizontal = layers[m].direction == "horizontal"
            end = (x + length, y) if horizontal else (x, y + length)
            out.append(eg.run_shapes(deck, m, x, y, *end) + eg.via_shapes(deck, m + 1, *end))
            continue
        if kind == "stack+run" and layers[top].wire_width:
            length = rng.choice((-1, 1)) * rng.randint(2, 30) * layers[top].wire_width
            horizontal = layers[top].direction == "horizontal"
            end = (x + length, y) if horizontal else (x, y + length)
            stack = stack + eg.run_shapes(deck, top, x, y, *end)
        out.append(stack)
        out.append(stack[1:])  # no lower pad: the cut lands on the shape itself
    return out


@SETTINGS
@given(batch_cases(), st.randoms(use_true_random=False))
def test_multi_shape_candidates_equal_check_after_commit_on_random_nets(case, rng: random.Random) -> None:
    deck, net, picks = case
    engine = engine_with(deck, net)
    picked = [eg.make_shape(engine.deck, p["layer"], p["rect"]) for p in picks]
    existing = list(engine.shapes("n1").values())
    candidates = via_stacks(engine.deck, existing + picked, rng, 12)
    # arbitrary groups of picks: mostly not one group, sometimes one
    for size in (2, 3):
        candidates += [picked[i:i + size] for i in range(0, len(picked) - size + 1, size)]
    # a pick with a via stack where it is: a run extended and a via on it
    for p in rng.sample(picked, min(4, len(picked))):
        candidates += [[p] + stack for stack in via_stacks(engine.deck, [p], rng, 1)]
    assert_exact(engine, "n1", candidates)


def test_multi_shape_candidates_equal_check_after_commit_on_bench_nets() -> None:
    deck = bench_deck()
    for size, seed in ((10, 0), (50, 1), (100, 2), (50, 3)):
        net = generate_net(deck, size, seed=seed)
        engine = eg.Engine(deck)
        engine.open_net(net.name, net.pins, None, net.shapes)
        rng = random.Random(f"multi/{seed}")
        stacks = via_stacks(deck, list(net.shapes), rng, 30)
        runs = [c + eg.via_shapes(deck, c[0].layer + 1, *_end_point(c[0]))
                for c in extension_candidates(deck, net, 20, seed=seed)
                if c[0].layer + 1 < len(deck.layers)]
        assert_exact(engine, net.name, via_run_candidates(deck, net, 40, seed=seed) + stacks + runs)


def _end_point(run: eg.Shape) -> tuple[int, int]:
    """A point inside the right (or upper) end of a run: its far end or the end at
    the net, as the run's direction has it; either way a via at one end of the run."""
    x0, y0, x1, y1 = run.rect
    w, h = x1 - x0, y1 - y0
    return ((x1 - h // 2, (y0 + y1) // 2) if w >= h else ((x0 + x1) // 2, y1 - w // 2))


def test_a_gate_joining_the_chain_later_keeps_its_own_sum() -> None:
    """A hand-built net where a gate joining the chain above the candidate's lowest step
    holds the worst cumulative ratio, so adding the candidate's M1 change to it (a
    gate that was not yet connected at M1) would show in the figures.

    Gate A (1 um^2) sits on a short M1 stub with a via up to an M2 wire; gate B
    (0.01 um^2) sits on a 10 um M1 run whose via lands on the far end of that M2 wire,
    so B meets A only from step M2 on. B's cumulative M1+M2 sum is then about
    0.14 * 10 / 0.01 = 140 against A's 0.28 (area / gate, the contract's ratio). The
    candidate is a via from A's stub with an M2 run: its M1 pad changes A's M1 term,
    which B's sum must not carry.
    """
    deck = bench_deck()
    m1, v1, m2 = (deck.layer_index[n] for n in ("M1", "V1", "M2"))
    pins = (eg.Pin("A", m1, ((0, 0, 140, 140),), {"thin": 1.0}),
            eg.Pin("B", m1, ((1830, 5000, 1970, 5140),), {"thin": 0.01}))
    shapes = (eg.run_shapes(deck, m1, 70, 70, 2000, 70)  # A's stub
              + eg.via_shapes(deck, v1, 1900, 70)
              + eg.run_shapes(deck, m2, 1900, 70, 1900, 5070)
              + eg.via_shapes(deck, v1, 1900, 5070)
              + eg.run_shapes(deck, m1, 1900, 5070, 11900, 5070))  # B's long run
    engine = eg.Engine(deck)
    engine.open_net("late", pins, None, shapes)
    candidate = eg.via_shapes(deck, v1, 1000, 70) + eg.run_shapes(deck, m2, 1000, 70, 1000, -3000)
    detailed = engine.score("late", candidate, detail=True)
    worst = max(detailed.changes, key=lambda c: c.utilization)
    assert (worst.gate, worst.kind) == ("B", "cumulative")  # the case aims where it should
    assert worst.utilization == detailed.worst_change_utilization
    assert_exact(engine, "late", [candidate])
