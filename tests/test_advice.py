"""Advice: layer hops, jumper point and diode, by hand-worked cases and a reference.

The hand-worked cases use a small invented deck (``ADVICE_DECK``, demo values) with
round numbers: 1000 DBU per um, every wire 100 DBU wide, every via a 100 x 100 cut
with 100 x 100 pads (no enclosure), area rules only, partial limit 400 without
diffusion and a diode table [[0, 400], [0.1, 4000]] (linear in D, held beyond 0.1).

The scenario ("far-side driver"): a gate pin g (0.01 um^2, thin) on M1 at
[0, 0, 100, 100]; a driver pin d (diffusion 0.5 um^2) on M1 at x = 100000; the net
already reaches from the driver up to M3 and along M3 back to x = 50000, where a
stack comes down to M1 at F = (50050, 50). The router now asks for an M1 run from
P = (50, 50), on the gate, to F: it connects the gate to the far stack on M1, but
the driver only joins on M3, so at step M1 the gate sees the whole run undefended.

Every verdict is also checked by the independent shapely + networkx reference of the
contract (tests/reference.py), on the net as plain JSON.
"""

from __future__ import annotations

import sys
import tomllib
from pathlib import Path

import pytest

from etchguard import Engine, InputError, NotFoundError, Shape, loads_deck, make_pin
from etchguard._advice import via_stack

sys.path.insert(0, str(Path(__file__).resolve().parent))
import reference  # noqa: E402  (the independent reading of the contract)

ADVICE_DECK = """
[process]
name = "lumen-advice-test"   # demo
dbu_per_micron = 1000

[[layers]]
name = "M1"
kind = "routing"
direction = "horizontal"
thickness_um = 0.1
wire_width = 100
spacing = 100
[[layers]]
name = "V1"
kind = "cut"
cut_size = 100
[[layers]]
name = "M2"
kind = "routing"
direction = "vertical"
thickness_um = 0.1
wire_width = 100
spacing = 100
[[layers]]
name = "V2"
kind = "cut"
cut_size = 100
[[layers]]
name = "M3"
kind = "routing"
direction = "horizontal"
thickness_um = 0.1
wire_width = 100
spacing = 100
[[layers]]
name = "V3"
kind = "cut"
cut_size = 100
[[layers]]
name = "M4"
kind = "routing"
direction = "vertical"
thickness_um = 0.1
wire_width = 100
spacing = 100
[[layers]]
name = "V4"
kind = "cut"
cut_size = 100
[[layers]]
name = "M5"
kind = "routing"
direction = "horizontal"
thickness_um = 0.1
wire_width = 100
spacing = 100
""" + "".join(f"""
[[rules]]
layer = "{m}"
measure = "area"
partial_max = 400.0
diode_partial_max = [[0.0, 400.0], [0.1, {{top}}]]
""" for m in ("M1", "M2", "M3", "M4", "M5"))


def deck_text(top: float = 4000.0) -> str:
    return ADVICE_DECK.replace("{top}", repr(top))


@pytest.fixture()
def deck():
    return loads_deck(deck_text(), "advice-test")


def far_side_net(deck, layer_range=None, far_x: int = 50050):
    """The scenario of the module docstring; returns (pins, shapes)."""
    L = deck.layer_index
    gate = make_pin(deck, "g", "M1", [[0, 0, 100, 100]], {"thin": 0.01})
    driver = make_pin(deck, "d", "M1", [[99950, 0, 100050, 100]], None, 0.5)
    shapes = via_stack(deck, far_x, 50, L["M1"], L["M3"])  # the far stack down to M1
    shapes += [Shape(L["M3"], (far_x - 50, 0, 100100, 100))]  # M3 back to the driver
    shapes += via_stack(deck, 100000, 50, L["M1"], L["M3"])  # and down onto it
    return [gate, driver], shapes


def open_far_side(engine, deck, name="n", layer_range=None, far_x=50050):
    pins, shapes = far_side_net(deck, far_x=far_x)
    engine.open_net(name, pins, layer_range, shapes)
    return pins, shapes


# -- the reference ----------------------------------------------------------------------

def net_json(deck, engine: Engine, name: str, extra_shapes=(), extra_pins=()) -> dict:
    """The net as the contract's JSON, plus shapes/pins (engine objects) added."""
    spec = engine.spec(name)
    pins = list(spec.pins) + list(extra_pins)
    layers = deck.layers
    return {"name": name,
            "pins": [{"name": p.name, "layer": layers[p.layer].name, "rects": [list(r) for r in p.rects],
                      "gate_area": dict(p.gate_area), "diff_area": p.diff_area,
                      "cell_area": {layers[s].name: a for s, a in p.cell_area.items()}} for p in pins],
            "shapes": [{"layer": layers[s.layer].name, "rect": list(s.rect)}
                       for s in list(spec.shapes) + list(extra_shapes)]}


def reference_legal(deck_toml: str, net: dict) -> bool:
    rdeck = reference.ref_deck(tomllib.loads(deck_toml))
    return reference.analyze(rdeck, net).report["legal"]


def engine_legal_after(deck, engine: Engine, name: str, shapes) -> bool:
    """Commit into a copy of the net in a fresh engine and run the full check."""
    spec = engine.spec(name)
    fresh = Engine(deck)
    fresh.open_net(name, spec.pins, spec.layer_range, list(spec.shapes) + list(shapes))
    return fresh.check(name).legal


def as_shapes(deck, placed) -> list[Shape]:
    return [Shape(deck.layer_index[p.layer], p.rect) for p in placed]


# -- hand-worked: the far-side driver ------------------------------------------------------

def test_violation_and_nearest_same_direction_layer_two_up(deck):
    engine = Engine(deck)
    open_far_side(engine, deck)
    M1 = deck.layer_index["M1"]
    adv = engine.advise("n", M1, 50, 50, 50050, 50)
    # As is: the run is [0, 0, 50100, 100] (50 DBU past each end): 50100 x 100 DBU^2
    # = 5.01 um^2 on M1 with the gate (0.01 um^2) and no diffusion at step M1:
    # 5.01 / 0.01 = 501 of 400.
    assert not adv.legal_as_is
    assert adv.join_end == (50, 50) and adv.far_end == (50050, 50)
    assert "M1 would reach 501 of 400" in adv.explanation[0] and "gate side of g" in adv.explanation[0]
    # The layers of M1's direction are M3 and M5; M3 (two routing layers up) comes first.
    assert [o.layer for o in adv.options] == ["M3", "M5"]
    m3 = adv.options[0]
    # On M3 at step M3 the gate joins the driver (D = 0.5, table held at 4000); M3 then
    # holds the new run [0, 50100] and the old wire [50000, 100100]: the union is
    # 100100 x 100 DBU^2 = 10.01 um^2, ratio 1001, 1001 / 4000 = 25.025 %. At M1 and M2
    # the gate sees one 100 x 100 pad: ratio 1 of 400.
    assert m3.status == "legal" and m3.legal and not m3.blocked
    assert m3.score.worst_utilization == pytest.approx(1001 / 4000, rel=1e-12)
    assert m3.cuts == 4  # V1 and V2 at both ends
    assert adv.best is m3
    assert "M3 is free and legal at 25%" in adv.explanation[1]
    # every via stack has a landing pad on each layer it crosses
    layers_at_p = sorted(p.layer for p in m3.shapes if p.rect == (0, 0, 100, 100))
    assert layers_at_p == ["M1", "M2", "M2", "M3", "V1", "V2"]


def test_alternatives_are_legal_by_engine_and_reference(deck):
    engine = Engine(deck)
    open_far_side(engine, deck)
    adv = engine.advise("n", deck.layer_index["M1"], 50, 50, 50050, 50)
    toml = deck_text()
    assert adv.options
    for opt in adv.options:
        shapes = as_shapes(deck, opt.shapes)
        assert engine_legal_after(deck, engine, "n", shapes) == opt.legal
        assert reference_legal(toml, net_json(deck, engine, "n", shapes)) == opt.legal
    # and the run as is really is illegal, by the reference too
    as_is = [Shape(deck.layer_index["M1"], adv.rect)]
    assert not reference_legal(toml, net_json(deck, engine, "n", as_is))


def test_jumper_point_is_exact_and_tight(deck):
    engine = Engine(deck)
    open_far_side(engine, deck)
    adv = engine.advise("n", deck.layer_index["M1"], 50, 50, 50050, 50)
    j = adv.jumper
    # Kept part from P over l DBU: [0, 0, l + 100, 100] on M1 (the hop stack's M1 pad at
    # Q = (50 + l, 50) lies inside it). Ratio at M1: (l + 100) * 100 DBU^2 / 0.01 um^2
    # = (l + 100) / 100 <= 400  =>  l <= 39900. The rest goes up to M3 at Q.
    assert j is not None and j.applicable
    assert j.kept_length == 39900 and j.limited_by == "limit"
    assert j.hop_layer == "M3" and j.hop_point == (39950, 50)
    assert j.legal and not j.blocked
    assert "keep 39900 DBU (39.9 um) on M1, hop to M3 at (39950, 50)" in adv.explanation[2]
    toml = deck_text()
    advisor_shapes = as_shapes(deck, j.shapes)
    assert engine_legal_after(deck, engine, "n", advisor_shapes)
    assert reference_legal(toml, net_json(deck, engine, "n", advisor_shapes))
    # one DBU more on M1 is illegal (the kept rectangle grows by one DBU)
    longer = [s if s.layer != 0 or s.rect[0] != 0 or s.rect[2] - s.rect[0] <= 100
              else Shape(0, (s.rect[0], s.rect[1], s.rect[2] + 1, s.rect[3])) for s in advisor_shapes]
    assert longer != advisor_shapes
    assert not engine_legal_after(deck, engine, "n", longer)
    assert not reference_legal(toml, net_json(deck, engine, "n", longer))


def test_diode_area_hand_worked_and_tight(deck):
    engine = Engine(deck)
    open_far_side(engine, deck)
    adv = engine.advise("n", deck.layer_index["M1"], 50, 50, 50050, 50)
    d = adv.diode
    # At step M1 the ratio stays 501 (no gate factor, no area credit); the limit with a
    # diode D <= 0.1 is 400 + 3600 * D / 0.1; 400 + 36000 D >= 501  =>  D >= 101 / 36000.
    assert d is not None and d.found and d.gate == "g" and d.layer == "M1"
    assert d.diff_area_um2 == pytest.approx(101 / 36000, rel=1e-6)
    toml = deck_text()
    run = [Shape(0, adv.rect)]
    diode = make_pin(deck, "diode", "M1", [list(r) for r in d.rects], None, d.diff_area_um2)
    smaller = make_pin(deck, "diode", "M1", [list(r) for r in d.rects], None, d.diff_area_um2 * (1 - 1e-6))
    assert reference_legal(toml, net_json(deck, engine, "n", run, [diode]))
    assert not reference_legal(toml, net_json(deck, engine, "n", run, [smaller]))
    spec = engine.spec("n")
    for pin, legal in ((diode, True), (smaller, False)):
        fresh = Engine(deck)
        fresh.open_net("n", list(spec.pins) + [pin], None, list(spec.shapes) + run)
        assert fresh.check("n").legal == legal


def test_no_diode_suffices_when_the_table_flattens_below_the_ratio():
    # The table now tops out at 450 (< 501) and the diode does not lower the ratio.
    deck = loads_deck(deck_text(top=450.0), "advice-flat")
    engine = Engine(deck)
    open_far_side(engine, deck)
    adv = engine.advise("n", deck.layer_index["M1"], 50, 50, 50050, 50)
    assert adv.diode is not None and not adv.diode.found
    assert "501" in adv.diode.reason and "450" in adv.diode.reason
    assert "diode: none suffices" in adv.explanation[3]
    # 1e6 um^2 really is not enough (reference): the limit is held at 450 beyond 0.1
    huge = make_pin(deck, "diode", "M1", [[0, 0, 100, 100]], None, 1.0e6)
    assert not reference_legal(deck_text(top=450.0),
                               net_json(deck, engine, "n", [Shape(0, adv.rect)], [huge]))


def test_no_diode_for_a_side_rule_on_the_gates_own_component():
    # A side (perimeter) rule on M1 without a diode table: its limit is the plain
    # maximum whatever diffusion the component has (the contract). A 30 um M1 stub on
    # the gate, already committed, breaks it: side conductor 2 * (30.1 + 0.1) um * 0.1
    # um = 6.04 um^2 on 0.01 um^2 of gate, 604 of 500 (its area ratio, 301 of 400,
    # holds). The run asked about climbs from the stub's end on M2; no diode at g can
    # help, and the reason must say it is g's own check, not one g never joins.
    text = deck_text() + '\n[[rules]]\nlayer = "M1"\nmeasure = "side"\npartial_max = 500.0\n'
    deck = loads_deck(text, "advice-side")
    L = deck.layer_index
    pins, shapes = far_side_net(deck)
    shapes += [Shape(L["M1"], (0, 0, 30100, 100))] + via_stack(deck, 30050, 50, L["M1"], L["M2"])
    engine = Engine(deck)
    engine.open_net("n", pins, None, shapes)
    adv = engine.advise("n", L["M2"], 30050, 50, 30050, 20050)
    assert adv.diode is not None and not adv.diode.found
    assert "never joins" not in adv.diode.reason
    assert "at step M1" in adv.diode.reason and "partial side" in adv.diode.reason
    assert "pin's own component" in adv.diode.reason and "do not depend on diffusion" in adv.diode.reason
    # the reference agrees that no diode helps: 1e6 um^2 at g leaves the net illegal
    huge = make_pin(deck, "diode", "M1", [[0, 0, 100, 100]], None, 1.0e6)
    assert not reference_legal(text, net_json(deck, engine, "n", [Shape(L["M2"], adv.rect)], [huge]))


def test_blocked_track_is_reported_and_the_next_layer_taken(deck):
    engine = Engine(deck)
    open_far_side(engine, deck)
    M3 = deck.layer_index["M3"]
    # another net with an M3 wire 50 DBU above the track (spacing 100): too close
    other = make_pin(deck, "x", "M1", [[20000, 5000, 20100, 5100]], {"thin": 1.0})
    engine.open_net("other", [other], None, [Shape(M3, (10000, 150, 30000, 250))])
    bid = engine.declare_blockage(M3, (60000, -500, 60100, -400))  # far from the run: harmless
    adv = engine.advise("n", deck.layer_index["M1"], 50, 50, 50050, 50)
    m3, m5 = adv.options
    assert m3.status == "blocked" and m3.blocked and m3.legal  # antenna-legal, but no room
    assert m3.conflicts[0].owner == "net other" and m3.conflicts[0].distance == 50
    assert "M3 is blocked by net other" in adv.explanation[1]
    # M5: at step M5 the run (5.01 um^2) joins the driver: 501 of 4000 = 12.525 %
    assert m5.status == "legal" and adv.best is m5
    assert m5.score.worst_utilization == pytest.approx(501 / 4000, rel=1e-12)
    # the blocked alternative really conflicts: shapely's distance agrees (independent)
    from shapely.geometry import box
    assert any(box(*p.rect).distance(box(10000, 150, 30000, 250)) < 100
               for p in m3.shapes if p.layer == "M3")
    # the jumper hops to the best free layer
    assert adv.jumper.hop_layer == "M5"
    engine.remove_blockage(bid)
    with pytest.raises(NotFoundError):
        engine.remove_blockage(bid)


def test_blockage_declared_on_the_track(deck):
    engine = Engine(deck)
    open_far_side(engine, deck)
    M3 = deck.layer_index["M3"]
    bid = engine.declare_blockage(M3, (20000, 0, 21000, 100))
    adv = engine.advise("n", 0, 50, 50, 50050, 50)
    assert adv.options[0].status == "blocked"
    assert adv.options[0].conflicts[0].owner == f"blockage {bid}"
    engine.remove_blockage(bid)
    adv = engine.advise("n", 0, 50, 50, 50050, 50)
    assert adv.options[0].status == "legal"


def test_range_leaves_no_legal_layer(deck):
    engine = Engine(deck)
    pins, shapes = far_side_net(deck)
    engine.open_net("n", pins, (deck.layer_index["M1"], deck.layer_index["M2"]), shapes)
    adv = engine.advise("n", 0, 50, 50, 50050, 50)
    assert adv.options == () and adv.best is None
    assert "no other routing layer" in adv.explanation[1]
    # the jumper keeps what it can with no layer to go to: l <= 39900 as before
    assert adv.jumper.hop_layer is None and adv.jumper.kept_length == 39900
    # non-preferred use of M2 is allowed on request; still illegal: at step M2 the run
    # (5.01 um^2 on M2) joins the gate before the driver joins (on M3): 501 of 400
    adv2 = engine.advise("n", 0, 50, 50, 50050, 50, allow_non_preferred=True)
    assert [o.layer for o in adv2.options] == ["M2"]
    assert adv2.options[0].status == "illegal" and adv2.best is None
    assert adv2.options[0].score.worst_utilization == pytest.approx(501 / 400, rel=1e-12)
    shapes2 = as_shapes(deck, adv2.options[0].shapes)
    assert not reference_legal(deck_text(), net_json(deck, engine, "n", shapes2))
    assert "no layer in range is both free and legal" in adv2.explanation[1]


def test_legal_run_needs_no_advice(deck):
    engine = Engine(deck)
    open_far_side(engine, deck)
    adv = engine.advise("n", 0, 50, 50, 10050, 50)  # 10100 x 100 -> 101 of 400
    assert adv.legal_as_is and adv.found and adv.options == ()
    assert "legal as is" in adv.explanation[0]


def test_join_end_found_from_either_end(deck):
    engine = Engine(deck)
    open_far_side(engine, deck)
    a = engine.advise("n", 0, 50, 50, 50050, 50)
    b = engine.advise("n", 0, 50050, 50, 50, 50)
    # both ends touch the net; the gate end is preferred either way round
    assert a.join_end == b.join_end == (50, 50)
    assert a.jumper.kept_length == b.jumper.kept_length == 39900


def test_bad_input_is_refused_and_state_kept(deck):
    engine = Engine(deck)
    open_far_side(engine, deck)
    before = engine.check("n")
    with pytest.raises(InputError) as e:
        engine.advise("n", 1, 0, 0, 10, 0)
    assert e.value.field == "layer"
    with pytest.raises(InputError) as e:
        engine.advise("n", 0, 0, 0, 10, 10)
    assert e.value.field == "run"
    with pytest.raises(InputError) as e:
        engine.advise("n", 0, 0, 0, 10, 0, width=0)
    assert e.value.field == "width"
    with pytest.raises(InputError) as e:
        engine.advise("n", 0, 0.5, 0, 10, 0)
    assert e.value.field == "x1"
    with pytest.raises(NotFoundError):
        engine.advise("nope", 0, 0, 0, 10, 0)
    with pytest.raises(InputError) as e:
        engine.declare_blockage(0, (5, 5, 5, 9))
    assert e.value.field == "rect"
    assert engine.check("n") == before
