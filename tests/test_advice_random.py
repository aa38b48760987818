"""Advice on seeded random variants of the far-side-driver scenario, held to the
independent shapely + networkx reference (tests/reference.py) and to the engine's
full check: every suggested alternative that is called legal is legal, every one
called illegal is illegal, every blocked one really conflicts (shapely distance),
the jumper length is tight to the DBU and the diode area to 1e-6 relative."""

from __future__ import annotations

import random

import pytest
from shapely.geometry import box

from etchguard import Engine, Shape, loads_deck, make_pin, run_rect
from etchguard._advice import via_stack
from test_advice import deck_text, engine_legal_after, net_json, reference_legal

CASES = 8


def jumper_at(deck, adv, kept: int, target: int) -> list[Shape]:
    """The documented jumper of length ``kept`` (see _advice's docstring), rebuilt here."""
    (px, py), (fx, fy) = adv.join_end, adv.far_end
    step = 1 if fx >= px else -1
    qx, qy = px + step * kept, py
    L = deck.layer_index[adv.layer]
    w2 = max(adv.width, deck.layers[target].wire_width)
    return ([Shape(L, run_rect(px, py, qx, qy, adv.width))] + via_stack(deck, qx, qy, L, target)
            + [Shape(target, run_rect(qx, qy, fx, fy, w2))] + via_stack(deck, fx, fy, target, L))


@pytest.mark.parametrize("seed", range(CASES))
def test_random_far_side(seed):
    rng = random.Random(seed)
    top = rng.choice([4000.0, 1500.0, 700.0, 450.0])
    toml = deck_text(top)
    deck = loads_deck(toml, f"advice-random-{seed}")
    L = deck.layer_index
    gate_area = rng.choice([0.006, 0.01, 0.013])
    far_x = rng.randrange(30000, 90000, 10) + 50
    gate = make_pin(deck, "g", "M1", [[0, 0, 100, 100]], {"thin": gate_area})
    driver = make_pin(deck, "d", "M1", [[119950, 0, 120050, 100]], None, rng.choice([0.05, 0.5]))
    shapes = via_stack(deck, far_x, 50, L["M1"], L["M3"]) + [Shape(L["M3"], (far_x - 50, 0, 120100, 100))]
    shapes += via_stack(deck, 120000, 50, L["M1"], L["M3"])
    engine = Engine(deck)
    engine.open_net("n", [gate, driver], None, shapes)
    if rng.random() < 0.5:  # another net's wire near a track
        layer = rng.choice(["M3", "M5"])
        y = rng.choice([150, 190, 260, 400])
        x0 = rng.randrange(1000, far_x - 2000)
        other = make_pin(engine.deck, "x", "M1", [[x0, 9000, x0 + 100, 9100]], {"thin": 1.0})
        engine.open_net("other", [other], None, [Shape(L[layer], (x0, y, x0 + 1000, y + 100))])
    adv = engine.advise("n", L["M1"], 50, 50, far_x, 50)
    if adv.legal_as_is:
        assert reference_legal(toml, net_json(deck, engine, "n", [Shape(0, adv.rect)]))
        return
    assert not reference_legal(toml, net_json(deck, engine, "n", [Shape(0, adv.rect)]))
    others = [Shape(s.layer, s.rect) for s in engine.spec("other").shapes] if "other" in engine.net_names() else []
    for opt in adv.options:
        got = [Shape(L[p.layer], p.rect) for p in opt.shapes]
        assert reference_legal(toml, net_json(deck, engine, "n", got)) == opt.legal
        assert engine_legal_after(deck, engine, "n", got) == opt.legal
        # blocked if and only if a shape comes closer than the layer's spacing to the
        # other net's metal (shapely distance, independent of the rtree index)
        near = any(o.layer == s.layer and box(*s.rect).distance(box(*o.rect)) < 100
                   for s in got for o in others)
        assert opt.blocked == near
    j = adv.jumper
    if j.kept_length is not None and j.hop_layer is not None:
        target = L[j.hop_layer]
        kept = jumper_at(deck, adv, j.kept_length, target)
        assert sorted(kept, key=repr) == sorted((Shape(L[p.layer], p.rect) for p in j.shapes), key=repr)
        assert reference_legal(toml, net_json(deck, engine, "n", kept))
        if j.limited_by == "limit" and j.kept_length + 1 < j.run_length:
            more = jumper_at(deck, adv, j.kept_length + 1, target)
            assert not reference_legal(toml, net_json(deck, engine, "n", more))
    d = adv.diode
    run = [Shape(0, adv.rect)]
    if d.found:
        rects = [list(r) for r in d.rects]
        ok = make_pin(deck, "diode", "M1", rects, None, d.diff_area_um2)
        less = make_pin(deck, "diode", "M1", rects, None, d.diff_area_um2 * (1 - 1e-6))
        assert reference_legal(toml, net_json(deck, engine, "n", run, [ok]))
        assert not reference_legal(toml, net_json(deck, engine, "n", run, [less]))
    else:
        huge = make_pin(deck, "diode", "M1", [[0, 0, 100, 100]], None, 1.0e6)
        assert not reference_legal(toml, net_json(deck, engine, "n", run, [huge]))
