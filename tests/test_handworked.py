"""Hand-worked nets: every expected figure is derived by hand in a comment beside it.

Sources: the formulas are the contract's (the antenna model: A, G, D, A_eff, G_eff, PAR,
CAR, limits); areas and perimeters are worked out by hand and, where a union is not a
plain rectangle, confirmed with shapely; every net is also run through the
independent reference (tests/reference.py) as a second opinion.

All decks here are demo decks of this file (invented values); dbu_per_micron = 1000,
so 100 DBU = 0.1 um and a 100 x 100 DBU square is 0.01 um^2.
"""

from __future__ import annotations

import tomllib
from typing import Any

import pytest
from shapely.geometry import box
from shapely.ops import unary_union

import etchguard as eg
from reference import analyze, close, ref_deck, report_disagreements

LAYERS = """
[[layers]]
name = "M1"
kind = "routing"
direction = "horizontal"
thickness_um = 0.1
wire_width = 100

[[layers]]
name = "V1"
kind = "cut"
cut_size = 100

[[layers]]
name = "M2"
kind = "routing"
direction = "vertical"
thickness_um = 0.2
wire_width = 100

[[layers]]
name = "V2"
kind = "cut"
cut_size = 100

[[layers]]
name = "M3"
kind = "routing"
direction = "horizontal"
thickness_um = 0.3
wire_width = 100
"""

# Plain demo rules: thin and thick area rules on M1, M2 and V1, no factors, no tables.
PLAIN_RULES = """
[[rules]]
layer = "M1"
partial_max = 100.0
cumulative_max = 300.0

[[rules]]
layer = "V1"
partial_max = 10.0
cumulative_max = 40.0

[[rules]]
layer = "M2"
partial_max = 100.0
cumulative_max = 300.0

[[rules]]
layer = "M1"
oxide = "thick"
partial_max = 200.0
cumulative_max = 600.0

[[rules]]
layer = "M2"
oxide = "thick"
partial_max = 200.0
cumulative_max = 600.0
"""


def deck_text(rules: str, includes_cuts: bool = False) -> str:
    return (f'[process]\nname = "hand-demo"\ndbu_per_micron = 1000\n'
            f'cumulative_includes_cuts = {str(includes_cuts).lower()}\n' + LAYERS + rules)


def run(rules: str, net: dict[str, Any], includes_cuts: bool = False) -> dict[tuple[str, str, str, str], eg.CheckResult]:
    """Check the net with the engine, confirm it against the reference, and return the
    engine's checks keyed by (layer, measure, kind, oxide)."""
    text = deck_text(rules, includes_cuts)
    deck = eg.loads_deck(text, "<hand-demo>")
    engine = eg.Engine(deck)
    spec = eg.parse_net_file(deck, {"nets": [net]})[0]
    engine.open_net(spec.name, spec.pins, spec.layer_range, spec.shapes)
    report = engine.check(spec.name)
    problems = report_disagreements(report, analyze(ref_deck(tomllib.loads(text)), net))
    assert not problems, "\n".join(problems)
    return {(c.layer, c.measure, c.kind, c.oxide): c for c in report.checks}


def pin(name: str, layer: str, rect: list[int], gate: Any = 0.0, diff: float = 0.0,
        cell: dict[str, float] | None = None) -> dict[str, Any]:
    return {"name": name, "layer": layer, "rects": [rect], "gate_area": gate, "diff_area": diff,
            "cell_area": cell or {}}


def shape(layer: str, rect: list[int]) -> dict[str, Any]:
    return {"layer": layer, "rect": rect}


def approx(value: float) -> Any:
    return pytest.approx(value, rel=1e-9)


# -- (a) a jumper near the gate ------------------------------------------------------------

def test_jumper_near_gate_lowers_lower_layer_partial_ratio() -> None:
    gate = pin("g.a", "M1", [0, 0, 100, 100], gate=0.1)
    # Without a jumper: one M1 run 0..53000 x 0..100 = 53 um x 0.1 um = 5.3 um^2;
    # PAR_M1 = 5.3 / 0.1 = 53 (contract: A / G).
    straight = run(PLAIN_RULES, {"name": "n", "pins": [gate], "shapes": [shape("M1", [0, 0, 53000, 100])]})
    assert straight[("M1", "area", "partial", "thin")].ratio == approx(53.0)

    # With a jumper: M1 stub 0..2000 (0.2 um^2), up a V1 at 1900..2000, across M2
    # 1900..3100 (1.2 um x 0.1 um = 0.12 um^2), down a V1 at 3000..3100 onto the long
    # M1 run 3000..53000 (5.0 um^2). At step M1 the gate sees only its stub:
    # PAR_M1 = 0.2 / 0.1 = 2. At V1 its component has the first cut only (the far
    # cut hangs on the run, which the gate does not reach yet): 0.01 / 0.1 = 0.1.
    # At M2 all is one: PAR_M2 = 0.12 / 0.1 = 1.2; CAR_M2 = 2 + 1.2 = 3.2 (routing
    # steps only, cumulative_includes_cuts = false).
    jumped = run(PLAIN_RULES, {"name": "n", "pins": [gate], "shapes": [
        shape("M1", [0, 0, 2000, 100]), shape("V1", [1900, 0, 2000, 100]),
        shape("M2", [1900, 0, 3100, 100]), shape("V1", [3000, 0, 3100, 100]),
        shape("M1", [3000, 0, 53000, 100])]})
    assert jumped[("M1", "area", "partial", "thin")].ratio == approx(2.0)
    assert jumped[("V1", "area", "partial", "thin")].ratio == approx(0.1)
    assert jumped[("M2", "area", "partial", "thin")].ratio == approx(1.2)
    assert jumped[("M2", "area", "cumulative", "thin")].ratio == approx(3.2)
    # Limits: thin M1 partial 100, so utilization = 2 / 100.
    assert jumped[("M1", "area", "partial", "thin")].utilization == approx(0.02)


# -- (b) a gate reached only through a higher layer ----------------------------------------

def net_through_m2() -> dict[str, Any]:
    # Gate pin on M1 (in-cell M1 area 0.02 um^2); a long M1 wire 1000..51000 (5 um^2)
    # that does not touch the pin; the two are joined only on M2 (0..1100, 0.11 um^2)
    # through V1 cuts on the pin and on the wire.
    return {"name": "n", "pins": [pin("g.a", "M1", [0, 0, 100, 100], gate=0.1, cell={"M1": 0.02})],
            "shapes": [shape("M1", [1000, 0, 51000, 100]), shape("V1", [0, 0, 100, 100]),
                       shape("V1", [1000, 0, 1100, 100]), shape("M2", [0, 0, 1100, 100])]}


def test_gate_reached_only_through_higher_layer_sees_no_lower_metal() -> None:
    checks = run(PLAIN_RULES, net_through_m2())
    # At M1 the gate's component is its pin alone: A = cell_area 0.02 (pin rectangles
    # add no area), PAR_M1 = 0.02 / 0.1 = 0.2; the 5 um^2 wire has no gate, no check.
    assert checks[("M1", "area", "partial", "thin")].ratio == approx(0.2)
    # At V1: the cut on the pin, 0.01 um^2: 0.01 / 0.1 = 0.1.
    assert checks[("V1", "area", "partial", "thin")].ratio == approx(0.1)
    # At M2: 0.11 / 0.1 = 1.1; CAR_M2 = PAR_M1 + PAR_M2 = 0.2 + 1.1 = 1.3: the M1
    # wire never enters a sum of this gate (C_M1(g) is the pin alone).
    assert checks[("M2", "area", "partial", "thin")].ratio == approx(1.1)
    assert checks[("M2", "area", "cumulative", "thin")].ratio == approx(1.3)


# -- (c) two gates merging at a higher step ------------------------------------------------

def two_gates(oxide_b: str) -> dict[str, Any]:
    # Gate A (thin, 0.1 um^2) with M1 0..1000 (0.1 um^2); gate B (0.2 um^2) with M1
    # 5000..9000 (0.4 um^2); cuts on both; M2 900..5100 joins them (4.2 um x 0.1 um
    # = 0.42 um^2).
    return {"name": "n", "pins": [pin("A", "M1", [0, 0, 100, 100], gate={"thin": 0.1}),
                                  pin("B", "M1", [5000, 0, 5100, 100], gate={oxide_b: 0.2})],
            "shapes": [shape("M1", [0, 0, 1000, 100]), shape("M1", [5000, 0, 9000, 100]),
                       shape("V1", [900, 0, 1000, 100]), shape("V1", [5000, 0, 5100, 100]),
                       shape("M2", [900, 0, 5100, 100])]}


def test_two_gates_merging_keep_their_own_cumulative_ratios() -> None:
    checks = run(PLAIN_RULES, two_gates("thin"))
    # M1: PAR(A) = 0.1 / 0.1 = 1, PAR(B) = 0.4 / 0.2 = 2; the worst is B's 2.
    assert checks[("M1", "area", "partial", "thin")].ratio == approx(2.0)
    # V1 (cut lane): A 0.01 / 0.1 = 0.1, B 0.01 / 0.2 = 0.05; worst 0.1 (gate A).
    assert checks[("V1", "area", "cumulative", "thin")].ratio == approx(0.1)
    assert checks[("V1", "area", "cumulative", "thin")].gate == "A"
    # M2: one component, G = 0.3: PAR = 0.42 / 0.3 = 1.4; CAR(A) = 1 + 1.4 = 2.4,
    # CAR(B) = 2 + 1.4 = 3.4; the check reports the worst gate, B.
    assert checks[("M2", "area", "partial", "thin")].ratio == approx(1.4)
    assert checks[("M2", "area", "cumulative", "thin")].ratio == approx(3.4)
    assert checks[("M2", "area", "cumulative", "thin")].gate == "B"


def test_two_gates_of_different_oxides_checked_per_class() -> None:
    checks = run(PLAIN_RULES, two_gates("thick"))
    # Same figures; each class sees its own gate: thin -> A (CAR 2.4), thick -> B
    # (CAR 3.4). G of the merged component sums both classes (0.3), so PAR_M2 = 1.4
    # for both. At M1 thin sees only A's component (1.0), thick only B's (2.0).
    assert checks[("M1", "area", "partial", "thin")].ratio == approx(1.0)
    assert checks[("M1", "area", "partial", "thick")].ratio == approx(2.0)
    assert checks[("M2", "area", "partial", "thick")].ratio == approx(1.4)
    assert checks[("M2", "area", "cumulative", "thin")].ratio == approx(2.4)
    assert checks[("M2", "area", "cumulative", "thick")].ratio == approx(3.4)
    # Utilization of thick cumulative: 3.4 / 600.
    assert checks[("M2", "area", "cumulative", "thick")].utilization == approx(3.4 / 600.0)
    # No thick rule on V1: the thick gate is not limited there (no entry).
    assert ("V1", "area", "partial", "thick") not in checks


# -- (d) corner contact vs edge contact ----------------------------------------------------

def test_corner_contact_does_not_connect_edge_contact_does() -> None:
    gate = pin("g.a", "M1", [0, 0, 100, 100], gate=0.1)
    # shapely names the two cases: a Point for the corner, a LineString for the edge.
    assert box(0, 0, 100, 100).intersection(box(100, 100, 1100, 200)).geom_type == "Point"
    assert box(0, 0, 100, 100).intersection(box(100, 0, 1100, 100)).geom_type == "LineString"
    # Corner: wire 100..1100 x 100..200 meets the pin only at (100, 100): the gate's
    # component is the pin alone, A = 0, PAR = 0.
    corner = run(PLAIN_RULES, {"name": "n", "pins": [gate], "shapes": [shape("M1", [100, 100, 1100, 200])]})
    assert corner[("M1", "area", "partial", "thin")].ratio == 0.0
    # Edge: wire 100..1100 x 0..100 shares the pin's edge x = 100: A = 1 um x 0.1 um =
    # 0.1 um^2, PAR = 0.1 / 0.1 = 1.
    edge = run(PLAIN_RULES, {"name": "n", "pins": [gate], "shapes": [shape("M1", [100, 0, 1100, 100])]})
    assert edge[("M1", "area", "partial", "thin")].ratio == approx(1.0)
    # Two M1 wires meeting at a corner, the far one touching nothing else: it stays out.
    chain = run(PLAIN_RULES, {"name": "n", "pins": [gate], "shapes": [
        shape("M1", [100, 0, 1100, 100]), shape("M1", [1100, 100, 2100, 200])]})
    assert chain[("M1", "area", "partial", "thin")].ratio == approx(1.0)
    # A cut abutting the wire's end (edge only, no area in common) does not hang on it:
    # V1 at 1100..1200 beside the wire ending at 1100; the gate's V1 area stays 0.
    cut = run(PLAIN_RULES, {"name": "n", "pins": [gate], "shapes": [
        shape("M1", [100, 0, 1100, 100]), shape("V1", [1100, 0, 1200, 100])]})
    assert cut[("V1", "area", "partial", "thin")].ratio == 0.0


# -- (e) diode table interpolation ---------------------------------------------------------

DIODE_RULES = """
[[rules]]
layer = "M1"
partial_max = 100.0
diode_partial_max = [[0.1, 200.0], [0.5, 1000.0]]
cumulative_max = 300.0
"""


@pytest.mark.parametrize(("diff", "limit"), [
    (0.0, 100.0),  # D = 0: the plain partial_max
    (0.05, 200.0),  # 0 < D below the first point: held at the first point's 200
    (0.1, 200.0),  # at the first point
    (0.3, 600.0),  # between: 200 + (1000 - 200) * (0.3 - 0.1) / (0.5 - 0.1) = 600
    (0.5, 1000.0),  # at the last point
    (2.0, 1000.0),  # beyond the last point: held at 1000
])
def test_diode_table_interpolation(diff: float, limit: float) -> None:
    # Gate 0.1 um^2 on M1 with 1 um^2 of M1 (10 um x 0.1 um); a driver pin with
    # diffusion D on the same wire. PAR = 1 / 0.1 = 10 (no factors in this rule);
    # the partial limit is the table at D; the cumulative one has no table: 300.
    net = {"name": "n", "pins": [pin("g.a", "M1", [0, 0, 100, 100], gate=0.1),
                                 pin("drv.z", "M1", [9900, 0, 10000, 100], diff=diff)],
           "shapes": [shape("M1", [0, 0, 10000, 100])]}
    checks = run(DIODE_RULES, net)
    partial = checks[("M1", "area", "partial", "thin")]
    assert partial.ratio == approx(10.0)
    assert partial.limit == approx(limit)
    assert partial.utilization == approx(10.0 / limit)
    assert checks[("M1", "area", "cumulative", "thin")].limit == approx(300.0)


# -- (f) side-wall ratio with a hole -------------------------------------------------------

SIDE_RULES = """
[[rules]]
layer = "M1"
measure = "side"
partial_max = 100.0
"""


def test_side_wall_ratio_counts_the_hole() -> None:
    # A ring on M1: outer 3 um x 3 um, hole 1 um x 1 um in the middle, from four rects.
    ring = [[0, 0, 3000, 1000], [0, 2000, 3000, 3000], [0, 1000, 1000, 2000], [2000, 1000, 3000, 2000]]
    union = unary_union([box(*r) for r in ring])
    # shapely: one polygon with one interior ring; length = outer 12 um + hole 4 um.
    assert union.geom_type == "Polygon" and len(union.interiors) == 1
    assert union.length == 16000.0 and union.area == 8_000_000.0
    assert eg.union_measures([tuple(r) for r in ring]) == (8_000_000, 16_000)
    # Side-wall area = perimeter 16 um x thickness 0.1 um = 1.6 um^2; gate 0.1 um^2:
    # PAR_side = 1.6 / 0.1 = 16 (the contract: "perimeter of that union, holes
    # included, times the layer's thickness_um"). The in-cell area does not enter a
    # side-wall figure.
    net = {"name": "n", "pins": [pin("g.a", "M1", [0, 0, 100, 100], gate=0.1, cell={"M1": 0.5})],
           "shapes": [shape("M1", r) for r in ring]}
    checks = run(SIDE_RULES, net)
    assert checks[("M1", "side", "partial", "thin")].ratio == approx(16.0)


def test_cumulative_side_sum_takes_plain_terms_from_steps_without_a_side_rule() -> None:
    # Side rule (cumulative) on M2 only. Gate 0.1 um^2; M1 wire 0..1000 x 0..100:
    # perimeter 2.2 um x 0.1 um = 0.22 um^2, plain term 0.22 / 0.1 = 2.2 (the contract:
    # "plain A / G where step t has none"); V1 adds 0 to a side sum (a cut has no side
    # wall); M2 0..1000 x 0..100: 2.2 um x 0.2 um = 0.44 um^2, 0.44 / 0.1 = 4.4.
    # CAR_side at M2 = 2.2 + 4.4 = 6.6, with or without cuts in the sum.
    rules = """
[[rules]]
layer = "M2"
measure = "side"
cumulative_max = 100.0
"""
    net = {"name": "n", "pins": [pin("g.a", "M1", [0, 0, 100, 100], gate=0.1)],
           "shapes": [shape("M1", [0, 0, 1000, 100]), shape("V1", [900, 0, 1000, 100]),
                      shape("M2", [0, 0, 1000, 100])]}
    for includes_cuts in (False, True):
        checks = run(rules, net, includes_cuts)
        assert checks[("M2", "side", "cumulative", "thin")].ratio == approx(6.6)


# -- (g) area_factor, diode_area_credit, diode_gate_factor ---------------------------------

def factor_rules(factor: float, credit: float, gate_factor: float, diode_only: bool) -> str:
    return f"""
[[rules]]
layer = "M1"
partial_max = 100.0
area_factor = {factor}
diode_area_credit = {credit}
diode_gate_factor = {gate_factor}
factor_with_diode_only = {str(diode_only).lower()}
"""


def factor_net(diff: float) -> dict[str, Any]:
    # Gate 0.1 um^2 on a 10 um x 0.1 um M1 wire: A = 1.0 um^2; D = diff on the gate pin.
    return {"name": "n", "pins": [pin("g.a", "M1", [0, 0, 100, 100], gate=0.1, diff=diff)],
            "shapes": [shape("M1", [0, 0, 10000, 100])]}


@pytest.mark.parametrize(("factor", "credit", "gate_factor", "diode_only", "diff", "ratio"), [
    # A_eff = max(0, f*A - k_credit*D), G_eff = G + k_gate*D (the contract):
    (2.0, 0.0, 0.0, False, 0.0, 20.0),  # 2*1 / 0.1
    (2.0, 1.0, 0.0, False, 0.2, 18.0),  # (2 - 0.2) / 0.1
    (2.0, 1.0, 0.5, False, 0.2, 9.0),  # (2 - 0.2) / (0.1 + 0.1)
    (1.0, 0.0, 4.5, False, 0.2, 1.0),  # 1 / (0.1 + 0.9)
    (2.0, 20.0, 0.0, False, 0.2, 0.0),  # 2 - 4 < 0 -> A_eff = 0
    (2.0, 0.0, 0.0, True, 0.0, 10.0),  # factor only with a diode; D = 0: 1 / 0.1
    (2.0, 0.0, 0.0, True, 0.2, 20.0),  # D > 0: 2 / 0.1
])
def test_factors(factor: float, credit: float, gate_factor: float, diode_only: bool,
                 diff: float, ratio: float) -> None:
    checks = run(factor_rules(factor, credit, gate_factor, diode_only), factor_net(diff))
    assert checks[("M1", "area", "partial", "thin")].ratio == approx(ratio)


# -- (h) cumulative_includes_cuts ----------------------------------------------------------

def test_cumulative_includes_cuts() -> None:
    # The net of (b): PAR_M1 = 0.2, PAR_V1 = 0.1, PAR_M2 = 1.1.
    separate = run(PLAIN_RULES, net_through_m2(), includes_cuts=False)
    # false: routing with routing, cut with cut: CAR_M2 = 0.2 + 1.1 = 1.3, CAR_V1 = 0.1.
    assert separate[("M2", "area", "cumulative", "thin")].ratio == approx(1.3)
    assert separate[("V1", "area", "cumulative", "thin")].ratio == approx(0.1)
    together = run(PLAIN_RULES, net_through_m2(), includes_cuts=True)
    # true: every step: CAR_V1 = 0.2 + 0.1 = 0.3, CAR_M2 = 0.2 + 0.1 + 1.1 = 1.4.
    assert together[("V1", "area", "cumulative", "thin")].ratio == approx(0.3)
    assert together[("M2", "area", "cumulative", "thin")].ratio == approx(1.4)
    # Limits 40 (V1) and 300 (M2): utilizations 0.3 / 40 and 1.4 / 300.
    assert together[("V1", "area", "cumulative", "thin")].utilization == approx(0.3 / 40.0)
    assert together[("M2", "area", "cumulative", "thin")].utilization == approx(1.4 / 300.0)
    assert close(together[("M2", "area", "cumulative", "thin")].limit, 300.0)
