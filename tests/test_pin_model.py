"""What a pin carries beyond its gate and diffusion: in-cell side walls, cumulative ratios
accumulated inside a block, and shapes on several layers.

Each is worked by hand from the contract's formulas (the antenna model: A, G, PAR, CAR,
limits) in the comments, run through the independent reference (tests/reference.py) as
a second opinion, and its what-if held to the check after the commit, to the bit. The
decks are the hand-worked demo decks of test_handworked.py (invented values;
dbu_per_micron = 1000, so 1000 DBU = 1 um).
"""

from __future__ import annotations

import tomllib
from typing import Any

import etchguard as eg
from reference import analyze, ref_deck, report_disagreements
from test_handworked import approx, deck_text, run, shape
from test_whatif_exact import assert_exact

# Side rules on M1 and M2 (thickness 0.1 and 0.2 um in the demo layers), an area rule on M1.
SIDE_RULES = """
[[rules]]
layer = "M1"
measure = "side"
partial_max = 2000.0
cumulative_max = 4000.0

[[rules]]
layer = "M2"
measure = "side"
partial_max = 2000.0
cumulative_max = 4000.0

[[rules]]
layer = "M1"
partial_max = 1000.0
"""


def engine_of(rules: str, net: dict[str, Any]) -> eg.Engine:
    deck = eg.loads_deck(deck_text(rules), "<pin-demo>")
    engine = eg.Engine(deck)
    spec = eg.parse_net_file(deck, {"nets": [net]})[0]
    engine.open_net(spec.name, spec.pins, spec.layer_range, spec.shapes)
    return engine


def agrees_with_reference(rules: str, engine: eg.Engine, net: dict[str, Any]) -> None:
    problems = report_disagreements(engine.check(net["name"]), analyze(ref_deck(tomllib.loads(deck_text(rules))), net))
    assert not problems, "\n".join(problems)


# -- in-cell side walls ----------------------------------------------------------------------

def side_net(cell_side: dict[str, float]) -> dict[str, Any]:
    return {"name": "s", "pins": [{"name": "g.a", "layer": "M1", "rects": [[0, 0, 100, 100]],
                                   "gate_area": 0.01, "cell_area": {"M1": 0.05}, "cell_side_area": cell_side}],
            "shapes": [shape("M1", [0, 0, 1000, 100]), shape("V1", [900, 0, 1000, 100]),
                       shape("M2", [900, 0, 1000, 2000])]}


def test_in_cell_side_wall_adds_to_the_side_measure_as_given() -> None:
    net = side_net({"M1": 0.03, "M2": 0.02})
    checks = run(SIDE_RULES, net)
    # M1: the run 1 um x 0.1 um has perimeter 2.2 um; x thickness 0.1 um = 0.22 um^2 of
    # side wall, plus the pin's in-cell side wall 0.03 (as given: LEF's
    # ANTENNAPARTIALMETALSIDEAREA is a side-wall area) = 0.25; PAR = 0.25 / 0.01 = 25.
    assert checks[("M1", "side", "partial", "thin")].ratio == approx(25.0)
    # The area measure takes cell_area, not the side wall: (0.1 + 0.05) / 0.01 = 15.
    assert checks[("M1", "area", "partial", "thin")].ratio == approx(15.0)
    # M2: 0.1 x 2 um, perimeter 4.2 um x 0.2 um = 0.84, + 0.02 = 0.86; PAR = 86; CAR (side
    # sums chain routing steps) = 25 + 86 = 111, utilization 111 / 4000.
    assert checks[("M2", "side", "partial", "thin")].ratio == approx(86.0)
    assert checks[("M2", "side", "cumulative", "thin")].ratio == approx(111.0)
    assert checks[("M2", "side", "cumulative", "thin")].utilization == approx(111.0 / 4000.0)
    # Without the side walls the same net reads 22 and 22 + 84 = 106: the field is used.
    without = run(SIDE_RULES, side_net({}))
    assert without[("M2", "side", "cumulative", "thin")].ratio == approx(106.0)


def test_in_cell_side_wall_what_if_equals_check_after_commit() -> None:
    net = side_net({"M1": 0.03, "M2": 0.02})
    engine = engine_of(SIDE_RULES, net)
    deck = engine.deck
    m1, v1, m2 = (deck.layer_index[n] for n in ("M1", "V1", "M2"))
    assert_exact(engine, "s", [[eg.Shape(m1, (1000, 0, 3000, 100))], [eg.Shape(m2, (900, 2000, 1000, 5000))],
                               [eg.Shape(v1, (0, 0, 100, 100)), eg.Shape(m2, (0, 0, 100, 4000))]])


def test_side_wall_on_a_cut_layer_is_refused() -> None:
    deck = eg.loads_deck(deck_text(SIDE_RULES), "<pin-demo>")
    net = side_net({"V1": 0.01})
    try:
        eg.parse_net_file(deck, {"nets": [net]})
    except eg.InputError as err:
        assert err.field.endswith("pins[0].cell_side_area.V1") and "cut layer" in err.message
    else:
        raise AssertionError("a side wall on a cut layer was accepted")
