"""Hand-worked nets for the contract's cumulative chain and its area reduction.

The contract (the antenna model, "Ratios and limits" and "Quantities"):
* ``CAR_s(g) = PAR_s(C_s(g)) + CAR_p(g)``, p the step that feeds s: the nearest lower
  step of the same kind; the step directly below, of either kind, where layer s sets
  ``cumulative_plus_cut`` (every layer, when the process sets
  ``cumulative_includes_cuts``); for the side measure always the nearest lower routing
  step. A step before g's pin exists adds 0; below the first step the sum is 0.
* ``A_eff = max(0, f * r(D) * A - k_credit * D)``, r the rule's
  ``diode_area_reduction`` table at D (piecewise linear, held beyond the ends; 1 where
  the rule has none).

Every figure is derived by hand in a comment and checked twice, in separate tests:
against the independent reference (tests/reference.py: shapely and networkx, written
from the contract) and against the Engine (check, score, score_columns, headroom).
Headroom figures are brute-forced on the reference as well: the conductor it names,
added as geometry, brings the binding ratio exactly to its limit.

All decks are demo decks of this file (invented values); dbu_per_micron = 1000, so a
100 x 100 DBU square is 0.01 um^2 and a run 100 DBU wide and L um long is 0.1 L um^2.
"""

from __future__ import annotations

import tomllib
from typing import Any

import numpy as np
import pytest

import etchguard as eg
from reference import RefAnalysis, analyze, ref_deck, report_disagreements
from test_handworked import approx, pin, shape

STEPS = ("M1", "V1", "M2", "V2", "M3")


def layers_text(plus_cut: frozenset[str]) -> str:
    """M1..M3 (thickness 0.1, 0.2, 0.3 um) with V1, V2 between; ``plus_cut`` names the
    layers that set cumulative_plus_cut."""
    out = []
    for name in STEPS:
        flag = f"cumulative_plus_cut = {str(name in plus_cut).lower()}\n"
        if name.startswith("V"):
            out.append(f'\n[[layers]]\nname = "{name}"\nkind = "cut"\ncut_size = 100\n{flag}')
        else:
            level = int(name[1])
            direction = "horizontal" if level % 2 else "vertical"
            out.append(f'\n[[layers]]\nname = "{name}"\nkind = "routing"\ndirection = "{direction}"\n'
                       f"thickness_um = {level / 10}\nwire_width = 100\n{flag}")
    return "".join(out)


def deck_text(rules: str, plus_cut: frozenset[str] = frozenset(), includes_cuts: bool = False) -> str:
    return (f'[process]\nname = "chain-demo"\ndbu_per_micron = 1000\n'
            f"cumulative_includes_cuts = {str(includes_cuts).lower()}\n" + layers_text(plus_cut) + rules)


def reference_of(text: str, net: dict[str, Any]) -> RefAnalysis:
    return analyze(ref_deck(tomllib.loads(text)), net)


def ref_checks(analysis: RefAnalysis) -> dict[tuple[str, str, str, str], dict[str, Any]]:
    return {(c["layer"], c["measure"], c["kind"], c["oxide"]): c for c in analysis.report["checks"]}


def engine_of(text: str, net: dict[str, Any]) -> eg.Engine:
    deck = eg.loads_deck(text, "<chain-demo>")
    engine = eg.Engine(deck)
    spec = eg.parse_net_file(deck, {"nets": [net]})[0]
    engine.open_net(spec.name, spec.pins, spec.layer_range, spec.shapes)
    return engine


def engine_checks(engine: eg.Engine, name: str = "n") -> dict[tuple[str, str, str, str], eg.CheckResult]:
    return {(c.layer, c.measure, c.kind, c.oxide): c for c in engine.check(name).checks}


# -- the feeding step itself ---------------------------------------------------------------

# Steps 0..4 are M1, V1, M2, V2, M3. By hand from the contract's wording:
FEEDING = [
    # (flags, includes_cuts, measure, feeding step of M1, V1, M2, V2, M3)
    # default: nearest lower step of the same kind; none below M1 and below V1.
    (frozenset(), False, "area", (None, None, 0, 1, 2)),
    # M2 flagged: M2 is fed by the step directly below, V1; the rest as by default.
    (frozenset({"M2"}), False, "area", (None, None, 1, 1, 2)),
    # V1 flagged: V1 is fed by M1 (directly below), V2 still by V1.
    (frozenset({"V1"}), False, "area", (None, 0, 0, 1, 2)),
    # the process flag sets it on every layer: each step is fed by the one below.
    (frozenset(), True, "area", (None, 0, 1, 2, 3)),
    (frozenset(STEPS), False, "area", (None, 0, 1, 2, 3)),
    # side: always the nearest lower routing step, whatever the flags.
    (frozenset(), False, "side", (None, 0, 0, 2, 2)),
    (frozenset(STEPS), True, "side", (None, 0, 0, 2, 2)),
]


@pytest.mark.parametrize(("flags", "includes_cuts", "measure", "expected"), FEEDING)
def test_feeding_step(flags: frozenset[str], includes_cuts: bool, measure: str,
                      expected: tuple[int | None, ...]) -> None:
    text = deck_text('\n[[rules]]\nlayer = "M1"\npartial_max = 1.0\n', flags, includes_cuts)
    deck = eg.loads_deck(text, "<chain-demo>")
    assert tuple(deck.feeding_step(s, measure) for s in range(len(STEPS))) == expected
    reference = ref_deck(tomllib.loads(text))
    assert tuple(reference.feeding_step(s, measure) for s in range(len(STEPS))) == expected


# -- the area chain on a five-step stack ---------------------------------------------------

CHAIN_RULES = """
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
layer = "V2"
partial_max = 10.0
cumulative_max = 40.0

[[rules]]
layer = "M3"
partial_max = 100.0
cumulative_max = 36.0
"""

M3_RUN = shape("M3", [6700, 0, 36700, 100])


def stack(with_m3: bool = True) -> dict[str, Any]:
    """Gate g.a (0.1 um^2, thin) on M1; every term is A / 0.1 (no factors in CHAIN_RULES):
    M1 0..2000 x 0..100      = 0.2 um^2  -> PAR_M1 = 2
    V1 one cut 100 x 100     = 0.01 um^2 -> PAR_V1 = 0.1
    M2 1900..6900 x 0..100   = 0.5 um^2  -> PAR_M2 = 5
    V2 two abutting cuts     = 0.02 um^2 -> PAR_V2 = 0.2
    M3 6700..36700 x 0..100  = 3.0 um^2  -> PAR_M3 = 30
    Each step's conductor is one piece, so at every step g's component holds all of it."""
    shapes = [shape("M1", [0, 0, 2000, 100]), shape("V1", [1900, 0, 2000, 100]),
              shape("M2", [1900, 0, 6900, 100]), shape("V2", [6700, 0, 6800, 100]),
              shape("V2", [6800, 0, 6900, 100])]
    return {"name": "n", "pins": [pin("g.a", "M1", [0, 0, 100, 100], gate=0.1)],
            "shapes": shapes + ([M3_RUN] if with_m3 else [])}


CHAIN_CASES = [
    # (id, flagged layers, cumulative_includes_cuts, CAR of g at M1, V1, M2, V2, M3)
    # Default chain: M1 2; V1 0.1 (no lower cut); M2 5 + CAR_M1 = 7; V2 0.2 + CAR_V1 =
    # 0.3; M3 30 + CAR_M2 = 37 (over M3's 36).
    ("default", frozenset(), False, (2.0, 0.1, 7.0, 0.3, 37.0)),
    # M2 flagged: CAR_M2 = 5 + CAR_V1 = 5 + 0.1 = 5.1 (V1 is fed by lower cuts only:
    # none, so M1's 2 is not in it); M3 keeps the metal chain: 30 + CAR_M2 = 35.1
    # (legal under 36); V2 = 0.2 + 0.1 = 0.3 as by default.
    ("M2", frozenset({"M2"}), False, (2.0, 0.1, 5.1, 0.3, 35.1)),
    # V1 and M2 flagged: CAR_V1 = 0.1 + CAR_M1 = 2.1; CAR_M2 = 5 + 2.1 = 7.1;
    # V2 (not flagged) = 0.2 + CAR_V1 = 2.3; M3 = 30 + CAR_M2 = 37.1.
    ("V1+M2", frozenset({"V1", "M2"}), False, (2.0, 2.1, 7.1, 2.3, 37.1)),
    # M3 flagged alone: CAR_M3 = 30 + CAR_V2 = 30 + 0.3 = 30.3 (the metals below
    # reach M3 only through M2, which is not on V2's chain); M2 = 7 as by default.
    ("M3", frozenset({"M3"}), False, (2.0, 0.1, 7.0, 0.3, 30.3)),
    # cumulative_includes_cuts: each step fed by the one below: 2, 2.1, 7.1, 7.3, 37.3.
    ("includes_cuts", frozenset(), True, (2.0, 2.1, 7.1, 7.3, 37.3)),
    # Every layer flagged is the same as the process flag (the contract: the process
    # flag "sets it on every layer").
    ("all_layers", frozenset(STEPS), False, (2.0, 2.1, 7.1, 7.3, 37.3)),
]
CHAIN_IDS = [c[0] for c in CHAIN_CASES]


@pytest.mark.parametrize(("case", "flags", "includes_cuts", "cars"), CHAIN_CASES, ids=CHAIN_IDS)
def test_chain_reference(case: str, flags: frozenset[str], includes_cuts: bool,
                         cars: tuple[float, ...]) -> None:
    analysis = reference_of(deck_text(CHAIN_RULES, flags, includes_cuts), stack())
    assert analysis.cars[(0, "area", "thin")] == approx(list(cars))
    checks = ref_checks(analysis)
    for step, car in zip(STEPS, cars):
        assert checks[(step, "area", "cumulative", "thin")]["ratio"] == approx(car)
    # M3's limit is 36: legal exactly when CAR_M3 <= 36.
    assert analysis.report["legal"] == (cars[-1] <= 36.0)


@pytest.mark.parametrize(("case", "flags", "includes_cuts", "cars"), CHAIN_CASES, ids=CHAIN_IDS)
def test_chain_engine(case: str, flags: frozenset[str], includes_cuts: bool,
                      cars: tuple[float, ...]) -> None:
    text = deck_text(CHAIN_RULES, flags, includes_cuts)
    report = engine_of(text, stack()).check("n")
    got = {c.layer: c.ratio for c in report.checks if c.kind == "cumulative"}
    assert [got[s] for s in STEPS] == approx(list(cars))
    assert report.legal == (cars[-1] <= 36.0)
    assert report_disagreements(report, reference_of(text, stack())) == []


# A gate whose pin is on M2 joins the chain at M2: with M2 flagged, CAR_M2(h) =
# PAR_M2 + CAR_V1(h), and CAR_V1(h) = 0 (V1 is a step before h's pin exists), though
# at V1 the cut below h already hangs on the M1 wire.
# M1 0..2000 (no gate), V1 1900..2000, M2 1900..6900 (0.5 um^2), h.a (0.1 um^2) on M2
# at 6800..6900: PAR_M2 = 0.5 / 0.1 = 5; CAR_M2(h) = 5 + 0 = 5, not 5 + 0.01 / 0.1.
LATE_PIN = {"name": "n", "pins": [pin("h.a", "M2", [6800, 0, 6900, 100], gate=0.1)],
            "shapes": [shape("M1", [0, 0, 2000, 100]), shape("V1", [1900, 0, 2000, 100]),
                       shape("M2", [1900, 0, 6900, 100])]}


def test_late_pin_reference() -> None:
    analysis = reference_of(deck_text(CHAIN_RULES, frozenset({"M2"})), LATE_PIN)
    assert analysis.cars[(0, "area", "thin")][:3] == [0.0, 0.0, approx(5.0)]
    assert ref_checks(analysis)[("M2", "area", "cumulative", "thin")]["ratio"] == approx(5.0)
    assert ("V1", "area", "cumulative", "thin") not in ref_checks(analysis)  # no gate at V1


def test_late_pin_engine() -> None:
    text = deck_text(CHAIN_RULES, frozenset({"M2"}))
    engine = engine_of(text, LATE_PIN)
    assert engine_checks(engine)[("M2", "area", "cumulative", "thin")].ratio == approx(5.0)
    assert report_disagreements(engine.check("n"), reference_of(text, LATE_PIN)) == []


# -- a what-if and a headroom on the M2-flagged chain --------------------------------------
# The deck of case "M2". The project's headroom (_results: RatioChange.headroom_um2,
# Headroom.area_um2) is the conductor A' on the layer at which the binding ratio reaches
# its limit, minus what is there: with plain terms (f = r = 1, no diode) a term is
# A / G, so A' = (limit - rest of the sum) * G.
#
# Candidate: the M3 run on the stack without it. After it CAR_M3 = 30 + 5.1 = 35.1, the
# net's worst utilization 35.1 / 36 = 0.975 (the next is M3 partial, 30 / 100), legal.
# M3 cumulative headroom: the rest of the sum is 5.1, A' = (36 - 5.1) * 0.1 = 3.09 um^2,
# minus the run's 3.0 = 0.09 um^2, i.e. 0.9 um more of the 0.1 um wide run.
M2_FLAG = frozenset({"M2"})


def test_m3_candidate_reference() -> None:
    text = deck_text(CHAIN_RULES, M2_FLAG)
    after = reference_of(text, stack())
    assert after.report["worst_utilization"] == approx(35.1 / 36.0)
    assert after.report["legal"]
    # Brute force of the headroom: the run 0.9 um longer (36700 -> 37600) brings CAR_M3
    # to 30.9 + 5.1 = 36.0, utilization 1 (legal within the contract's tolerance); 0.1 um
    # further it is 36.1, over.
    longer = {**stack(False), "shapes": stack(False)["shapes"] + [shape("M3", [6700, 0, 37600, 100])]}
    at_limit = reference_of(text, longer).report
    assert at_limit["worst_utilization"] == approx(1.0) and at_limit["legal"]
    longer["shapes"][-1] = shape("M3", [6700, 0, 37700, 100])
    assert not reference_of(text, longer).report["legal"]


def test_m3_candidate_engine_score() -> None:
    engine = engine_of(deck_text(CHAIN_RULES, M2_FLAG), stack(with_m3=False))
    candidate = [eg.make_shape(engine.deck, M3_RUN["layer"], M3_RUN["rect"])]
    score = engine.score("n", candidate)
    assert score.worst_utilization == approx(35.1 / 36.0)
    assert score.legal
    change = next(c for c in score.changes if (c.layer, c.kind) == ("M3", "cumulative"))
    # before: the gate's component at step M3 holds no M3 metal yet, so its CAR_M3 is
    # 0 + CAR_M2 = 5.1 (a component exists there: the ratio is reported, not None)
    assert change.ratio == approx(35.1) and change.before_ratio == approx(5.1)
    assert change.headroom_um2 == approx(0.09)
    assert change.headroom_length_um == approx(0.9)
    quick = engine.score("n", candidate, detail=False)
    assert quick.worst_utilization == approx(35.1 / 36.0) and quick.legal


def test_m3_candidate_engine_columns() -> None:
    engine = engine_of(deck_text(CHAIN_RULES, M2_FLAG), stack(with_m3=False))
    batch = engine.score_columns("n", [STEPS.index("M3")], np.array([M3_RUN["rect"]], dtype=np.int64))
    assert batch.worst_utilization[0] == approx(35.1 / 36.0)
    assert bool(batch.legal[0])


# Headroom on V1 of the full stack: V1's term is in every sum whose chain passes V1:
# CAR_V1 (0.1, limit 40), CAR_V2 (0.3, 40), and through M2 (flagged) CAR_M2 (5.1, 300)
# and CAR_M3 (35.1, 36). With G = 0.1 and V1's 0.01 um^2 now, each allows:
#   V1 partial     10 * 0.1 - 0.01                 = 0.99
#   V1 cumulative  (40 - 0) * 0.1 - 0.01           = 3.99
#   V2 cumulative  (40 - 0.2) * 0.1 - 0.01         = 3.97
#   M2 cumulative  (300 - 5) * 0.1 - 0.01          = 29.49
#   M3 cumulative  (36 - 35) * 0.1 - 0.01          = 0.09   <- binds
# (By the default chain V1 would reach the cut sums only, and 0.99 would bind.)


def test_v1_headroom_reference() -> None:
    text = deck_text(CHAIN_RULES, M2_FLAG)
    net = stack()
    # A V1 pad of 300 x 300 DBU over the start of the M1 run (on g's component, away
    # from M2) adds exactly 0.09 um^2: PAR_V1 = 0.1 / 0.1 = 1, CAR_M3 = 30 + 5 + 1 = 36.
    net["shapes"] = net["shapes"] + [shape("V1", [0, 0, 300, 300])]
    analysis = reference_of(text, net)
    assert ref_checks(analysis)[("M3", "area", "cumulative", "thin")]["ratio"] == approx(36.0)
    assert analysis.report["legal"]
    net["shapes"][-1] = shape("V1", [0, 0, 400, 300])  # 0.12 um^2: CAR_M3 = 36.3, over
    assert not reference_of(text, net).report["legal"]


def test_v1_headroom_engine() -> None:
    engine = engine_of(deck_text(CHAIN_RULES, M2_FLAG), stack())
    room = engine.headroom("n", STEPS.index("V1"), 1950, 50)
    assert room.found
    assert room.area_um2 == approx(0.09)
    assert room.binding.startswith("M3 cumulative area thin")


# -- the side measure: cuts never enter ----------------------------------------------------

SIDE_RULES = "".join(f"""
[[rules]]
layer = "{m}"
measure = "side"
partial_max = 1000.0
cumulative_max = 300.0
""" for m in ("M1", "M2", "M3"))

# Side conductor = perimeter of the union x thickness (M1 0.1, M2 0.2, M3 0.3 um), G = 0.1:
#   M1 2.0 x 0.1 um run: perimeter 4.2 um x 0.1  = 0.42 um^2  -> 4.2
#   M2 5.0 x 0.1 um run: perimeter 10.2 um x 0.2 = 2.04 um^2  -> 20.4
#   M3 30 x 0.1 um run:  perimeter 60.2 um x 0.3 = 18.06 um^2 -> 180.6
# The side chain runs M3 -> M2 -> M1 whatever the flags: CAR 4.2, 24.6, 205.2. Had a
# flagged M2 been fed by V1 in a side sum, CAR_M2 would be 20.4 + 0 (V1 has no side
# wall and no lower cut) = 20.4, losing M1's 4.2.
SIDE_CASES = [("M2", frozenset({"M2"}), False), ("all_layers", frozenset(STEPS), False),
              ("includes_cuts", frozenset(), True)]


@pytest.mark.parametrize(("case", "flags", "includes_cuts"), SIDE_CASES, ids=[c[0] for c in SIDE_CASES])
def test_side_chain_reference(case: str, flags: frozenset[str], includes_cuts: bool) -> None:
    checks = ref_checks(reference_of(deck_text(SIDE_RULES, flags, includes_cuts), stack()))
    for step, car in (("M1", 4.2), ("M2", 24.6), ("M3", 205.2)):
        assert checks[(step, "side", "cumulative", "thin")]["ratio"] == approx(car)


@pytest.mark.parametrize(("case", "flags", "includes_cuts"), SIDE_CASES, ids=[c[0] for c in SIDE_CASES])
def test_side_chain_engine(case: str, flags: frozenset[str], includes_cuts: bool) -> None:
    text = deck_text(SIDE_RULES, flags, includes_cuts)
    engine = engine_of(text, stack())
    checks = engine_checks(engine)
    for step, car in (("M1", 4.2), ("M2", 24.6), ("M3", 205.2)):
        assert checks[(step, "side", "cumulative", "thin")].ratio == approx(car)
    assert report_disagreements(engine.check("n"), reference_of(text, stack())) == []


# -- area reduction by diffusion -----------------------------------------------------------

def reduction_rules(factor: float = 1.0, credit: float = 0.0, gate_factor: float = 0.0,
                    diode_only: bool = False) -> str:
    # Demo table: r = 0.8 up to D = 0.1 um^2, falling linearly to 0.4 at D = 0.5, held
    # at 0.4 beyond. M2 has no table: r = 1 there.
    return f"""
[[rules]]
layer = "M1"
partial_max = 60.0
cumulative_max = 300.0
area_factor = {factor}
diode_area_credit = {credit}
diode_gate_factor = {gate_factor}
factor_with_diode_only = {str(diode_only).lower()}
diode_area_reduction = [[0.1, 0.8], [0.5, 0.4]]

[[rules]]
layer = "M2"
partial_max = 100.0
cumulative_max = 300.0
"""


def reduction_net(diff: float, m1_end: int = 10000, upper: bool = False) -> dict[str, Any]:
    # Gate 0.1 um^2 on an M1 run 0..m1_end (10 um x 0.1 um = 1.0 um^2 by default); a
    # driver pin with diffusion D at the far end. With ``upper``: a V1 cut at the start
    # and an M2 run 0..5000 (0.5 um^2) above it.
    shapes = [shape("M1", [0, 0, m1_end, 100])]
    if upper:
        shapes += [shape("V1", [0, 0, 100, 100]), shape("M2", [0, 0, 5000, 100])]
    return {"name": "n", "pins": [pin("g.a", "M1", [0, 0, 100, 100], gate=0.1),
                                  pin("drv.z", "M1", [9900, 0, 10000, 100], diff=diff)],
            "shapes": shapes}


REDUCTION_CASES = [
    # (f, k_credit, k_gate, factor_with_diode_only, D, PAR_M1); A = 1.0, G = 0.1.
    # PAR = max(0, f * r(D) * A - k_credit * D) / (G + k_gate * D):
    (1.0, 0.0, 0.0, False, 0.0, 8.0),  # r(0) = 0.8, held before the first point: 0.8 / 0.1
    (1.0, 0.0, 0.0, False, 0.05, 8.0),  # before the first point: 0.8
    (1.0, 0.0, 0.0, False, 0.1, 8.0),  # at the first point: 0.8
    (1.0, 0.0, 0.0, False, 0.3, 6.0),  # between: 0.8 + (0.4 - 0.8) * 0.2 / 0.4 = 0.6
    (1.0, 0.0, 0.0, False, 0.5, 4.0),  # at the last point: 0.4
    (1.0, 0.0, 0.0, False, 2.0, 4.0),  # beyond the last point: held at 0.4
    (2.0, 1.0, 0.0, False, 0.3, 9.0),  # (2 * 0.6 * 1 - 1 * 0.3) / 0.1 = 0.9 / 0.1
    (2.0, 0.0, 0.5, False, 0.3, 4.8),  # 2 * 0.6 / (0.1 + 0.5 * 0.3) = 1.2 / 0.25
    (2.0, 5.0, 0.0, False, 0.3, 0.0),  # 1.2 - 1.5 < 0 -> A_eff = 0
    (2.0, 0.0, 0.0, True, 0.0, 8.0),  # D = 0: f = 1 (diode only), r(0) still 0.8
    (2.0, 0.0, 0.0, True, 0.3, 12.0),  # D > 0: 2 * 0.6 / 0.1
]


@pytest.mark.parametrize(("factor", "credit", "gate_factor", "diode_only", "diff", "ratio"), REDUCTION_CASES)
def test_reduction_reference(factor: float, credit: float, gate_factor: float, diode_only: bool,
                             diff: float, ratio: float) -> None:
    analysis = reference_of(deck_text(reduction_rules(factor, credit, gate_factor, diode_only)),
                            reduction_net(diff))
    assert ref_checks(analysis)[("M1", "area", "partial", "thin")]["ratio"] == approx(ratio)


@pytest.mark.parametrize(("factor", "credit", "gate_factor", "diode_only", "diff", "ratio"), REDUCTION_CASES)
def test_reduction_engine(factor: float, credit: float, gate_factor: float, diode_only: bool,
                          diff: float, ratio: float) -> None:
    text = deck_text(reduction_rules(factor, credit, gate_factor, diode_only))
    engine = engine_of(text, reduction_net(diff))
    assert engine_checks(engine)[("M1", "area", "partial", "thin")].ratio == approx(ratio)
    assert report_disagreements(engine.check("n"), reference_of(text, reduction_net(diff))) == []


# Cumulative: D = 0.3 on the gate's component at every step. M1's term is reduced by
# M1's table (r = 0.6): 0.6 / 0.1 = 6; M2's rule has no table (r = 1): 0.5 / 0.1 = 5;
# CAR_M2 = 6 + 5 = 11 (default chain; V1 is not on it).
def test_reduced_term_in_a_cumulative_sum_reference() -> None:
    checks = ref_checks(reference_of(deck_text(reduction_rules()), reduction_net(0.3, upper=True)))
    assert checks[("M2", "area", "partial", "thin")]["ratio"] == approx(5.0)
    assert checks[("M2", "area", "cumulative", "thin")]["ratio"] == approx(11.0)


def test_reduced_term_in_a_cumulative_sum_engine() -> None:
    text = deck_text(reduction_rules())
    engine = engine_of(text, reduction_net(0.3, upper=True))
    assert engine_checks(engine)[("M2", "area", "cumulative", "thin")].ratio == approx(11.0)
    assert report_disagreements(engine.check("n"), reference_of(text, reduction_net(0.3, upper=True))) == []


# What-if with a reduction, D = 0.3 (r = 0.6): the candidate M1 10000..11000 (0.1 um^2)
# makes A = 1.1, PAR_M1 = 0.6 * 1.1 / 0.1 = 6.6 = CAR_M1; worst utilization 6.6 / 60 =
# 0.11. Headroom: 0.6 * A' / 0.1 reaches 60 at A' = 10 um^2, so 10 - 1.1 = 8.9 um^2 for
# the partial check; 300 at A' = 50, so 48.9 for the cumulative one. (Without r the
# partial headroom would read 60 * 0.1 - 1.1 = 4.9.)
REDUCTION_CANDIDATE = shape("M1", [10000, 0, 11000, 100])


def test_reduction_candidate_reference() -> None:
    text = deck_text(reduction_rules())
    net = reduction_net(0.3)
    net["shapes"] = net["shapes"] + [REDUCTION_CANDIDATE]
    assert reference_of(text, net).report["worst_utilization"] == approx(0.11)
    # Brute force of the partial headroom: A = 10 um^2 (a 100 um run) is exactly at 60.
    at_limit = reference_of(text, reduction_net(0.3, m1_end=100000)).report
    assert at_limit["worst_utilization"] == approx(1.0) and at_limit["legal"]
    assert not reference_of(text, reduction_net(0.3, m1_end=100100)).report["legal"]


def test_reduction_candidate_engine_score() -> None:
    engine = engine_of(deck_text(reduction_rules()), reduction_net(0.3))
    candidate = [eg.make_shape(engine.deck, "M1", REDUCTION_CANDIDATE["rect"])]
    score = engine.score("n", candidate)
    assert score.worst_utilization == approx(0.11)
    changes = {c.kind: c for c in score.changes if c.layer == "M1"}
    assert changes["partial"].ratio == approx(6.6)
    assert changes["partial"].headroom_um2 == approx(8.9)
    assert changes["cumulative"].headroom_um2 == approx(48.9)
    assert engine.score("n", candidate, detail=False).worst_utilization == approx(0.11)


def test_reduction_candidate_engine_columns() -> None:
    engine = engine_of(deck_text(reduction_rules()), reduction_net(0.3))
    batch = engine.score_columns("n", [0], np.array([REDUCTION_CANDIDATE["rect"]], dtype=np.int64))
    assert batch.worst_utilization[0] == approx(0.11)


def test_reduction_headroom_engine() -> None:
    # The same figure by the headroom question on the net as it stands (A = 1.0):
    # partial 10 - 1.0 = 9.0 um^2, cumulative 50 - 1.0 = 49.0; the partial binds.
    engine = engine_of(deck_text(reduction_rules()), reduction_net(0.3))
    room = engine.headroom("n", 0, 5000, 50)
    assert room.area_um2 == approx(9.0)
    assert room.length_um == approx(90.0)  # 9.0 um^2 / 0.1 um of default width
