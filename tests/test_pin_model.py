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

import pytest

import etchguard as eg
from reference import analyze, ref_deck, report_disagreements
from test_handworked import PLAIN_RULES, approx, deck_text, run, shape
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


def refusal(rules: str, net: dict[str, Any]) -> eg.InputError:
    with pytest.raises(eg.InputError) as caught:
        eg.parse_net_file(eg.loads_deck(deck_text(rules), "<pin-demo>"), {"nets": [net]})
    return caught.value


def test_side_wall_on_a_cut_layer_is_refused() -> None:
    err = refusal(SIDE_RULES, side_net({"V1": 0.01}))
    assert err.field.endswith("pins[0].cell_side_area.V1") and "cut layer" in err.message


# -- a block's accumulated cumulative ratios ------------------------------------------------

# PLAIN_RULES, the demo rules of test_handworked: area rules on M1, V1, M2 (partial and
# cumulative, limits 100 / 300 on metal, 10 / 40 on V1).

def block_net(block_car: list[dict[str, Any]], plain_pin: bool = False) -> dict[str, Any]:
    pins = [{"name": "blk.in", "layer": "M1", "rects": [[0, 0, 100, 100]], "gate_area": 0.1,
             "block_car": block_car}]
    if plain_pin:
        pins.append({"name": "u1.a", "layer": "M1", "rects": [[1900, 0, 2000, 100]], "gate_area": 0.1})
    return {"name": "b", "pins": pins,
            "shapes": [shape("M1", [0, 0, 2000, 100]), shape("V1", [1900, 0, 2000, 100]),
                       shape("M2", [1900, 0, 2000, 5000])]}


def test_block_ratio_is_added_at_its_step_and_carried_not_summed() -> None:
    # Terms (G = 0.1): M1 2 um x 0.1 = 0.2 um^2 -> 2; V1 0.1 x 0.1 = 0.01 -> 0.1;
    # M2 0.1 x 5 um = 0.5 -> 5.
    net = block_net([{"layer": "M1", "ratio": 30.0}, {"layer": "V1", "ratio": 5.0}])
    checks = run(PLAIN_RULES, net)
    # CAR_M1 = 2 + the block's 30 = 32; V1 (cuts chain with cuts) 0.1 + 5 = 5.1.
    assert checks[("M1", "area", "cumulative", "thin")].ratio == approx(32.0)
    assert checks[("V1", "area", "cumulative", "thin")].ratio == approx(5.1)
    # M2 is fed by M1: chain 2 + 5 = 7; the block gives no M2 value, so its M1 sum (which
    # covers the block's metal at and below M1) serves M2 too, once: 7 + 30 = 37.
    assert checks[("M2", "area", "cumulative", "thin")].ratio == approx(37.0)
    # The partial ratios do not see it: PAR_M2 = 5.
    assert checks[("M2", "area", "partial", "thin")].ratio == approx(5.0)
    # A value on M2 replaces M1's there (it already holds the block's M1 metal): 7 + 60.
    with_m2 = run(PLAIN_RULES, block_net([{"layer": "M1", "ratio": 30.0}, {"layer": "M2", "ratio": 60.0}]))
    assert with_m2[("M2", "area", "cumulative", "thin")].ratio == approx(67.0)


def test_block_ratio_through_cuts_and_only_for_the_pins_own_gates() -> None:
    # cumulative_includes_cuts: M2 is fed by V1, V1 by M1: chain 5 + 0.1 + 2 = 7.1, and the
    # highest step of that chain with a block value is V1: 7.1 + 5 = 12.1.
    net = block_net([{"layer": "M1", "ratio": 30.0}, {"layer": "V1", "ratio": 5.0}])
    assert run(PLAIN_RULES, net, includes_cuts=True)[("M2", "area", "cumulative", "thin")].ratio == approx(12.1)
    # A plain gate beside the block pin: G = 0.2 halves every term (M1 1, V1 0.05, M2 2.5);
    # the block pin's CAR_M1 = 1 + 30 = 31 is the worst, the plain gate's is 1.
    both = run(PLAIN_RULES, block_net([{"layer": "M1", "ratio": 30.0}], plain_pin=True))
    assert both[("M1", "area", "cumulative", "thin")].ratio == approx(31.0)
    assert both[("M1", "area", "cumulative", "thin")].gate == "blk.in"


def test_block_ratio_what_if_equals_check_after_commit() -> None:
    for plain_pin in (False, True):
        net = block_net([{"layer": "M1", "ratio": 30.0}, {"layer": "V1", "ratio": 5.0},
                         {"layer": "M2", "ratio": 60.0}], plain_pin)
        engine = engine_of(PLAIN_RULES, net)
        m1, v1, m2 = (engine.deck.layer_index[n] for n in ("M1", "V1", "M2"))
        assert_exact(engine, "b", [[eg.Shape(m1, (2000, 0, 9000, 100))], [eg.Shape(m2, (1900, 5000, 2000, 9000))],
                                   [eg.Shape(m1, (5000, 0, 6000, 100))],  # apart: no gate
                                   [eg.Shape(v1, (0, 0, 100, 100)), eg.Shape(m2, (0, 0, 100, 3000))]])
        agrees_with_reference(PLAIN_RULES, engine, net)


def test_block_ratio_needs_gate_area_of_its_class() -> None:
    err = refusal(PLAIN_RULES, block_net([{"layer": "M1", "oxide": "thick", "ratio": 30.0}]))
    assert err.field.endswith("pins[0].block_car[0].oxide") and "no gate area" in err.message


# -- pins with shapes on several layers -------------------------------------------------------

def layered_net(pin_layer: str = "M1") -> dict[str, Any]:
    m1_rect, m2_rect = [0, 0, 100, 100], [5000, 0, 5100, 100]
    rects: list[Any] = ([m1_rect, {"layer": "M2", "rect": m2_rect}] if pin_layer == "M1"
                        else [m2_rect, {"layer": "M1", "rect": m1_rect}])
    return {"name": "l", "pins": [{"name": "u.a", "layer": pin_layer, "rects": rects, "gate_area": 0.1}],
            "shapes": [shape("M1", [0, 0, 2000, 100]), shape("M2", [5000, 0, 5100, 3000])]}


def test_pin_on_two_layers_joins_at_the_lowest_and_connects_at_each() -> None:
    # M1: the pin's M1 shape touches the M1 run 2 um x 0.1 = 0.2 um^2: PAR_M1 = 0.2 / 0.1 = 2.
    # The pin's M2 shape does not exist at M1. At M2 it does, and it joins the pin (one
    # conductor inside the cell) to the M2 run 0.1 x 3 um = 0.3 um^2, which touches no other
    # metal of the net: PAR_M2 = 3, CAR_M2 = 2 + 3 = 5 (M2 is fed by M1).
    for pin_layer in ("M1", "M2"):  # the pin's "layer" names its plain rectangles; it joins at M1 either way
        checks = run(PLAIN_RULES, layered_net(pin_layer))
        assert checks[("M1", "area", "partial", "thin")].ratio == approx(2.0)
        assert checks[("M2", "area", "partial", "thin")].ratio == approx(3.0)
        assert checks[("M2", "area", "cumulative", "thin")].ratio == approx(5.0)
    deck = eg.loads_deck(deck_text(PLAIN_RULES), "<pin-demo>")
    (pin,) = eg.parse_net_file(deck, {"nets": [layered_net("M2")]})[0].pins
    assert pin.layer == deck.layer_index["M1"] and pin.lowest_rects() == ((0, 0, 100, 100),)
    # On one layer, the M2 run would float apart from the gate: its component at M2 has
    # no M2 metal, PAR_M2 = 0, CAR_M2 = 2.
    one_layer = layered_net()
    one_layer["pins"][0]["rects"] = [[0, 0, 100, 100]]
    alone = run(PLAIN_RULES, one_layer)
    assert alone[("M2", "area", "partial", "thin")].ratio == 0.0
    assert alone[("M2", "area", "cumulative", "thin")].ratio == approx(2.0)


def test_pin_on_two_layers_what_if_equals_check_after_commit() -> None:
    net = layered_net()
    engine = engine_of(PLAIN_RULES, net)
    m1, v1, m2 = (engine.deck.layer_index[n] for n in ("M1", "V1", "M2"))
    assert_exact(engine, "l", [[eg.Shape(m2, (5000, 3000, 5100, 8000))], [eg.Shape(m1, (5000, 0, 9000, 100))],
                               [eg.Shape(m2, (5100, 0, 6000, 100))],  # touches the pin's M2 shape only
                               [eg.Shape(v1, (1900, 0, 2000, 100)), eg.Shape(m2, (1900, 0, 2000, 4000))]])
    agrees_with_reference(PLAIN_RULES, engine, net)


def test_trial_pin_on_two_layers_equals_the_net_holding_it() -> None:
    """A trial pin (what advice scores as extra pins) on M1 and M2, with a block ratio,
    scored against the core net equals a net that holds it, to the bit."""
    from etchguard._corenet import CoreNet, compile_deck

    net = layered_net()
    engine = engine_of(PLAIN_RULES, net)
    deck = engine.deck
    m1, m2 = deck.layer_index["M1"], deck.layer_index["M2"]
    spec = engine.spec("l")
    trial = eg.Pin("t.a", m1, ((1900, 0, 2000, 100), (5000, 2900, 5100, 3000)), {"thin": 0.05},
                   block_car={("area", m1, "thin"): 7.0}, rect_layers=(m1, m2))
    compiled = compile_deck(deck)
    held = CoreNet(compiled, spec.pins)
    held.add(list(range(len(spec.shapes))), spec.shapes)
    both = CoreNet(compiled, spec.pins + (trial,))
    both.add(list(range(len(spec.shapes))), spec.shapes)
    extra = [eg.Shape(m2, (5000, 3000, 5100, 6000))]
    for detail in (False, True):
        score = held.score(extra, detail, [trial])
        after = both.score(extra, detail)
        assert (score.worst_utilization, score.legal) == (after.worst_utilization, after.legal)


# -- the new fields through the gRPC messages and the journal ---------------------------------

def test_side_walls_block_ratios_and_layers_survive_proto_and_journal() -> None:
    from etchguard import _journal, client
    from etchguard.server import convert
    from etchguard.v1 import etchguard_pb2 as pb
    from etchguard.v1 import journal_pb2 as jpb

    deck = eg.loads_deck(deck_text(PLAIN_RULES), "<pin-demo>")
    msg = client.pin("blk.in", "M1", [(0, 0, 100, 100)], {"thin": 0.1, "thick": 0.2}, 0.0, {"M1": 0.05},
                     cell_side_area={"M2": 0.02},
                     block_car=[("M1", "area", "thin", 30.0), ("M2", "side", "thick", 4.5), ("V1", "area", "thin", 5.0)],
                     other_rects=[("M2", (0, 0, 100, 300))])
    (pin,) = convert.pins(deck, [msg])
    at = deck.layer_index
    assert pin.layered_rects() == ((at["M1"], (0, 0, 100, 100)), (at["M2"], (0, 0, 100, 300)))
    assert pin.cell_side_area == {at["M2"]: 0.02}
    assert pin.block_car == {("area", at["M1"], "thin"): 30.0, ("side", at["M2"], "thick"): 4.5,
                             ("area", at["V1"], "thin"): 5.0}
    out = pb.NetContent()
    convert.net_into(out, eg.NetSpec("b", (pin,)), [], deck)
    assert convert.pins(deck, list(out.pins)) == [pin]
    image = jpb.PinImage()
    _journal._pin_into(image, pin)
    assert _journal._pin_of(jpb.PinImage.FromString(image.SerializeToString())) == pin
