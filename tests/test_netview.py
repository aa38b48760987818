"""The per-net view advice and the report read nets through (``_netview``), as the
core implements it (``_coreview``), held to the independent shapely +
networkx reading of the contract (tests/reference.py) on seeded random nets:

* a what-if with a trial diode pin: verdict and worst utilization equal the
  reference's full check of the net with the run and the diode; every listed change
  is a reference figure of a component holding a new element, and every figure of
  the diode's component that differs from the net as held is listed;
* a pin's diffusion after candidate shapes: the reference component's D;
* nearby rectangles: shapely's closed-box ``intersects`` over the net's rectangles;
* contacts: the reference's contact predicates (shapely), with the step they start;
* whether an element reaches a gate: the reference component's G > 0.
"""

from __future__ import annotations

import dataclasses
import random
import tomllib

import pytest
from shapely.geometry import box

from etchguard import InputError, Pin, Shape, run_rect
from etchguard._coreview import spec_views
from etchguard._netview import trial_diode
from test_advice import net_json
from test_advice_closed_form import far_side_case

import reference

CASES = 10
REL = 1e-9  # float sums in a different order (the reference sums plainly)


def reference_of(toml: str, net: dict) -> reference.RefAnalysis:
    return reference.analyze(reference.ref_deck(tomllib.loads(toml)), net)


def case(seed: int):
    """A far-side net on a random deck, its view, a run from the gate and a trial diode."""
    toml, deck, engine, far_x = far_side_case(seed)
    rng = random.Random(seed)
    spec = engine.spec("n")
    view = spec_views(deck)(spec)
    run = [Shape(0, run_rect(50, 50, far_x - rng.randrange(0, 20000, 10), 50, 100))]
    gate = spec.pins[0]
    diode = Pin("diode", gate.layer, gate.rects, {}, rng.choice([1e-12, 0.003, 0.05, 0.4, 7.0]), {})
    return toml, deck, engine, view, run, diode


def key(step: int, measure: str, kind: str, oxide: str) -> tuple[int, str, str, str]:
    return (step, measure, kind, oxide)


@pytest.mark.parametrize("seed", range(CASES))
def test_score_with_a_trial_diode_is_a_full_check_after(seed):
    toml, deck, engine, view, run, diode = case(seed)
    got = view.score(run, True, [diode])
    before = reference_of(toml, net_json(deck, engine, "n"))
    after = reference_of(toml, net_json(deck, engine, "n", run, [diode]))
    assert got.legal == after.report["legal"]
    assert got.worst_utilization == pytest.approx(after.report["worst_utilization"], rel=REL)
    diode_node = ("pin", len(view.pins), 0)
    new_nodes = {diode_node} | {("shape", len(engine.spec("n").shapes) + k) for k in range(len(run))}
    listed = {}
    for c in got.changes:
        matches = [e for e in after.entries
                   if key(e.step, e.measure, e.kind, e.oxide) == key(c.step, c.measure, c.kind, c.oxide)
                   and e.nodes & new_nodes and e.ratio == pytest.approx(c.ratio, rel=REL)
                   and e.limit == pytest.approx(c.limit, rel=REL)]
        assert matches, f"{c} is no figure of a component holding a new element"
        listed.setdefault(key(c.step, c.measure, c.kind, c.oxide), []).append((c.ratio, c.limit))
    held = {}
    for e in before.entries:
        held.setdefault(key(e.step, e.measure, e.kind, e.oxide), []).append((e.ratio, e.limit))
    for e in after.entries:
        if diode_node not in e.nodes:
            continue
        k = key(e.step, e.measure, e.kind, e.oxide)
        if any(r == pytest.approx(e.ratio, rel=REL) and l == pytest.approx(e.limit, rel=REL)
               for r, l in held.get(k, [])):
            continue  # as held: a change need not be listed
        assert any(r == pytest.approx(e.ratio, rel=REL) and l == pytest.approx(e.limit, rel=REL)
                   for r, l in listed.get(k, [])), f"the diode's {k} is not listed"


def test_score_needs_a_shape_or_a_pin():
    _toml, _deck, _engine, view, _run, diode = case(0)
    with pytest.raises(InputError) as e:
        view.score([], True, [])
    assert e.value.field == "shapes"
    alone = view.score([], True, [diode])  # a diode alone is a what-if as well
    assert alone.added_area_um2 == {}


@pytest.mark.parametrize("seed", range(CASES))
def test_pin_diffusion_after_the_run(seed):
    toml, deck, engine, view, run, _diode = case(seed)
    after = reference_of(toml, net_json(deck, engine, "n", run))
    for p, pin in enumerate(view.pins):
        got = view.pin_diffusion(p, run)
        for s, d in enumerate(got):
            if s < pin.layer:
                assert d is None
                continue
            comp = next(c for c in after.components[s] if c.holds_pin(p))
            assert d == pytest.approx(comp.diff, rel=REL, abs=0.0)


def _elements(view, deck, engine):
    spec = engine.spec("n")
    out = [(pin.layer, r) for pin in spec.pins for r in pin.rects]
    return out + [(s.layer, s.rect) for s in spec.shapes]


@pytest.mark.parametrize("seed", range(CASES))
def test_near_touching_and_gates_against_shapely(seed):
    toml, deck, engine, view, _run, _diode = case(seed)
    rng = random.Random(50 + seed)
    elements = _elements(view, deck, engine)
    analysis = reference_of(toml, net_json(deck, engine, "n"))
    queries = []
    for _ in range(40):
        x, y = rng.randrange(-500, 130000), rng.randrange(-500, 800)
        queries.append((rng.randrange(len(deck.layers)),
                        (x, y, x + rng.randrange(0, 3000), y + rng.randrange(0, 300))))
    for layer, r in elements:  # on an element's edge or corner, and one DBU off it
        for gap in (0, 1):
            queries.append((layer, (r[2] + gap, r[1], r[2] + gap + 50, r[3])))
            queries.append((layer, (r[0] - gap - 50, r[1], r[0] - gap, r[3])))
            queries.append((layer, (r[2] + gap, r[3] + gap, r[2] + gap + 50, r[3] + gap + 50)))
            queries.append((layer + 1 if layer + 1 < len(deck.layers) else layer - 1,
                            (r[0] - 50, r[3] + gap - 50, r[0] + 50, r[3] + gap + 50)))
    for layer, q in queries:
        # near: the closed boxes meet (shapely's intersects includes the boundary)
        want = sorted(r for l, r in elements if l == layer and box(*r).intersects(box(*q)))
        assert sorted(view.near(layer, q)) == want
        # touching: the contract's contacts, with the step from which each exists
        got = sorted(view.element(e)[:2] + (step,) for e, step in view.touching(layer, q))
        expect = []
        for l, r in elements:
            if l == layer and reference.same_layer_contact(q, r):
                expect.append((l, r, layer))
            elif (abs(l - layer) == 1 and deck.layers[l].kind != deck.layers[layer].kind
                  and reference.cut_contact(q, r)):
                expect.append((l, r, max(l, layer)))
        assert got == sorted(expect)
        for e, step in view.touching(layer, q):
            for s in range(max(step, view.element(e)[0]), len(deck.layers)):
                comp = next(c for c in analysis.components[s]
                            if _node_of(view, e) in c.nodes)
                assert view.reaches_gate(e, s) == (comp.gate > 0)


def _node_of(view, element: int):
    """The reference's node for an element of the view (shape ids are 1..n in spec
    order; a pin rectangle is named by its pin and its place among the pin's rects)."""
    _layer, rect, sid = view.element(element)
    if sid > 0:
        return ("shape", sid - 1)
    p = -1 - sid
    return ("pin", p, view.pins[p].rects.index(rect))


def test_worst_at_and_check_agree_with_the_reference():
    toml, deck, engine, view, _run, _diode = case(3)
    analysis = reference_of(toml, net_json(deck, engine, "n"))
    for s in range(len(deck.layers)):
        at = [e.utilization for e in analysis.entries if e.step == s]
        assert view.worst_at(s) == pytest.approx(max(at, default=0.0), rel=REL)
    report = view.check()
    assert report.legal == analysis.report["legal"]
    assert report == engine.check("n")


@pytest.mark.parametrize("seed", range(4))
def test_a_kept_build_with_another_diffusion_equals_a_fresh_one(seed):
    """The Python view keeps its last build and patches the trial pin's diffusion; each
    score must equal, bit for bit, the score of a view that never saw another D."""
    _toml, deck, engine, view, run, diode = case(seed)
    rng = random.Random(seed)
    for area in [rng.choice([1e-12, 0.001, 0.02, 0.3, 5.0, 1e6]) for _ in range(6)]:
        trial = Pin(diode.name, diode.layer, diode.rects, {}, area, {})
        fresh = spec_views(deck)(engine.spec("n"))
        assert view.score(run, True, [trial]) == fresh.score(run, True, [trial])


@pytest.mark.parametrize("seed", range(CASES))
def test_diode_excess_is_the_excess_of_the_trial_diode(seed):
    # the diode search's question, answered by the core in one number, equals the most
    # ratio - limit over the changes of the detailed score with that trial diode
    _toml, _deck, _engine, view, run, diode = case(seed)
    gate = 0
    for D in (1e-12, diode.diff_area, 0.2, 1e6):
        got = view.diode_excess(run, gate, D)
        full = view.score(run, True, [trial_diode(view.pins[gate], D)])
        assert got == (max((c.ratio - c.limit for c in full.changes), default=-float("inf")),
                       dataclasses.replace(full, changes=()))
        assert got[0] == max((c.ratio - c.limit for c in full.changes), default=-float("inf"))
        assert got[1].worst_utilization == full.worst_utilization and got[1].changes == ()
    with pytest.raises(InputError) as e:
        view.diode_excess([], gate, 0.1)
    assert e.value.field == "shapes"
