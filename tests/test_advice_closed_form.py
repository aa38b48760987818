"""The fast path of the advice against the search it replaces, and the answers held to
the reference, on seeded random cases.

* Jumper: the secant steps from the far end (``_last_legal_by_tangents``) give the same
  kept length as the bisection search alone, on every case; and the kept length is
  tight by the independent shapely + networkx reference (tests/reference.py): legal,
  and one DBU more illegal when the limit binds.
* Diode (the search on exact scores with a trial diode pin; the closed form it once
  had is gone, so there is no second path to compare): the area found is legal by the
  reference and 1e-6 relative less is not, on decks whose tables rise, or rise then
  fall, some with a gate factor or an area credit; on the generated nets the same
  holds by the engine's full check of the net with the diode committed as a pin.
* ``want``: asking for some answers gives those answers exactly as a full advice does.
* The per-layer obstacle query finds what one query per rectangle finds.
"""

from __future__ import annotations

import random

import pytest

from etchguard import Engine, InputError, Shape, loads_deck, make_pin
from etchguard._advice import _Advisor
from etchguard._obstacles import ObstacleIndex
from test_advice import ADVICE_DECK, net_json, reference_legal
from test_advice_random import jumper_at
from etchguard._advice import via_stack

CASES = 16


def random_deck_text(rng: random.Random) -> str:
    """The advice test deck's layers with random area rules per metal: a diode table
    rising, or rising then falling, and on some cases a gate factor or an area credit
    (the ratios then move with D). Demo values."""
    text = ADVICE_DECK.split("[[rules]]")[0]
    factored = rng.random() < 0.25  # a deck with factors on some metals
    for m in ("M1", "M2", "M3", "M4", "M5"):
        mid = rng.choice([0.02, 0.05, 0.2])
        table = [[0.0, 400.0], [mid, rng.choice([500.0, 900.0, 2000.0])],
                 [mid * 3, rng.choice([450.0, 1500.0, 6000.0])]]
        extra = rng.choice(["", "diode_gate_factor = 0.5", "diode_area_credit = 2.0"]) if factored else ""
        text += (f'\n[[rules]]\nlayer = "{m}"\nmeasure = "area"\npartial_max = 400.0\n'
                 f"diode_partial_max = {table!r}\n{extra}\n")
    return text


def far_side_case(seed: int):
    rng = random.Random(1000 + seed)
    toml = random_deck_text(rng)
    deck = loads_deck(toml, f"closed-form-{seed}")
    L = deck.layer_index
    gate = make_pin(deck, "g", "M1", [[0, 0, 100, 100]], {"thin": rng.choice([0.006, 0.01, 0.013])})
    driver = make_pin(deck, "d", "M1", [[119950, 0, 120050, 100]], None, rng.choice([0.05, 0.5]))
    far_x = rng.randrange(30000, 90000, 10) + 50
    shapes = via_stack(deck, far_x, 50, L["M1"], L["M3"]) + [Shape(L["M3"], (far_x - 50, 0, 120100, 100))]
    shapes += via_stack(deck, 120000, 50, L["M1"], L["M3"])
    # some of the net's own metal near the run: events for the jumper search
    for _ in range(rng.randrange(0, 4)):
        x = rng.randrange(2000, far_x - 2000)
        shapes.append(Shape(L["M1"], (x, rng.choice([100, 150, -400]), x + rng.randrange(100, 3000),
                                      rng.choice([300, 600]))))
    engine = Engine(deck)
    engine.open_net("n", [gate, driver], None, shapes)
    return toml, deck, engine, far_x


def advise_both(engine: Engine, *args, **kwargs):
    """The advice with the jumper's secant steps and with its bisection search alone."""
    fast = engine.advise(*args, **kwargs)
    try:
        _Advisor.tangent_search = False
        slow = engine.advise(*args, **kwargs)
    finally:
        _Advisor.tangent_search = True
    return fast, slow


def diode_is_tight(deck, engine: Engine, name: str, run: list[Shape], diode) -> tuple[bool, bool]:
    """(legal with the diode, legal with 1e-6 relative less), by the engine's full check
    of the net with the run committed and the diode added as a pin."""
    spec = engine.spec(name)
    rects = [list(r) for r in diode.rects]
    out = []
    for area in (diode.diff_area_um2, diode.diff_area_um2 * (1 - 1e-6)):
        fresh = Engine(deck)
        pin = make_pin(deck, "diode", diode.layer, rects, None, area)
        fresh.open_net(name, list(spec.pins) + [pin], None, list(spec.shapes) + run)
        out.append(fresh.check(name).legal)
    return out[0], out[1]


@pytest.mark.parametrize("seed", range(CASES))
def test_tangent_steps_equal_the_search_and_answers_are_tight(seed):
    toml, deck, engine, far_x = far_side_case(seed)
    fast, slow = advise_both(engine, "n", 0, 50, 50, far_x, 50)
    assert fast.legal_as_is == slow.legal_as_is
    if fast.legal_as_is:
        return
    assert fast.options == slow.options
    jf, js = fast.jumper, slow.jumper
    assert (jf.kept_length, jf.limited_by, jf.hop_layer, jf.legal) == (js.kept_length, js.limited_by,
                                                                      js.hop_layer, js.legal)
    assert jf.shapes == js.shapes and jf.score == js.score
    if jf.kept_length is not None and jf.hop_layer is not None:
        target = deck.layer_index[jf.hop_layer]
        assert reference_legal(toml, net_json(deck, engine, "n", jumper_at(deck, fast, jf.kept_length, target)))
        if jf.limited_by == "limit" and jf.kept_length + 1 < jf.run_length:
            more = jumper_at(deck, fast, jf.kept_length + 1, target)
            assert not reference_legal(toml, net_json(deck, engine, "n", more))
    df, ds = fast.diode, slow.diode
    assert df == ds  # the jumper's search does not touch the diode's
    if df.found:
        run = [Shape(0, fast.rect)]
        rects = [list(r) for r in df.rects]
        ok = make_pin(deck, "diode", "M1", rects, None, df.diff_area_um2)
        less = make_pin(deck, "diode", "M1", rects, None, df.diff_area_um2 * (1 - 1e-6))
        assert reference_legal(toml, net_json(deck, engine, "n", run, [ok]))
        assert not reference_legal(toml, net_json(deck, engine, "n", run, [less]))
    else:  # none: not even the largest diode the search tries (reference)
        huge = make_pin(deck, "diode", "M1", [[0, 0, 100, 100]], None, 1.0e6)
        assert not reference_legal(toml, net_json(deck, engine, "n", [Shape(0, fast.rect)], [huge]))
    # the secant steps take fewer exact scores, never more
    assert fast.exact_scores <= slow.exact_scores


def test_searches_on_generated_nets():
    from bench.netgen import generate_net
    from bench.advice_bench import DECK, RUN_UM
    from etchguard import load_deck
    deck = load_deck(DECK)
    engine = Engine(deck)
    m1 = deck.layer_index["M1"]
    for i in range(6):
        net = generate_net(deck, 50, seed=11 + i, name=f"g{i}", origin=(i * 400_000, 0))
        engine.open_net(net.name, net.pins, None, net.shapes)
        gate = next(p for p in net.pins if p.gate_area)
        r = gate.rects[0]
        x, y = (r[0] + r[2]) // 2, (r[1] + r[3]) // 2
        for length in (RUN_UM * 1000, RUN_UM * 400):
            fast, slow = advise_both(engine, net.name, m1, x, y, x - length, y)
            if fast.jumper is not None:
                assert fast.jumper.kept_length == slow.jumper.kept_length
                assert fast.jumper.score == slow.jumper.score
            if fast.diode is not None and fast.diode.found:
                assert diode_is_tight(deck, engine, net.name, [Shape(m1, fast.rect)], fast.diode) == (
                    True, False)


def test_want_gives_the_same_answers_as_a_full_advice():
    toml, deck, engine, far_x = far_side_case(3)
    full = engine.advise("n", 0, 50, 50, far_x, 50)
    assert not full.legal_as_is
    hop = engine.advise("n", 0, 50, 50, far_x, 50, want=("hop",))
    assert hop.options == full.options and hop.best == full.best
    assert hop.jumper is None and hop.diode is None
    assert hop.exact_scores == 1 + len(full.options)
    jumper = engine.advise("n", 0, 50, 50, far_x, 50, want=["jumper"])
    assert jumper.jumper == full.jumper and jumper.options == () and jumper.diode is None
    diode = engine.advise("n", 0, 50, 50, far_x, 50, want={"diode"})
    assert diode.diode == full.diode and diode.jumper is None and diode.options == ()
    # each part costs what it costs alone: the run as is once, the options (for the
    # jumper alone only up to the first legal free one), the jumper, the diode
    lazy = next((k + 1 for k, o in enumerate(full.options) if o.status == "legal"), len(full.options))
    assert diode.exact_scores > 1
    assert full.exact_scores == (1 + len(full.options) + (jumper.exact_scores - 1 - lazy)
                                 + (diode.exact_scores - 1))
    for bad in ("hop", ("hop", "via"), 3):
        with pytest.raises(InputError) as e:
            engine.advise("n", 0, 50, 50, far_x, 50, want=bad)
        assert e.value.field == "want"


def test_one_query_per_layer_finds_what_one_query_per_rect_finds():
    rng = random.Random(5)
    index = ObstacleIndex(2)
    index.rebuild(2, [(rng.randrange(2), (x, y, x + rng.randrange(1, 300), y + rng.randrange(1, 300)),
                       rng.choice(["a", "b", None]), ("shape", i))
                      for i, (x, y) in enumerate((rng.randrange(0, 5000), rng.randrange(0, 5000))
                                                 for _ in range(400))],
                  {1: (0, (100, 100, 400, 400))})
    for _ in range(200):
        layer = rng.randrange(2)
        rects = []
        for _ in range(rng.randrange(1, 6)):
            x, y = rng.randrange(0, 5000), rng.randrange(0, 5000)
            rects.append((x, y, x + rng.randrange(1, 400), y + rng.randrange(1, 400)))
        spacing = rng.choice([0, 50, 120])
        assert index.conflicts_many("a", layer, rects, spacing) == [
            index.conflicts("a", layer, r, spacing) for r in rects]


def test_a_window_finds_what_the_index_finds():
    # one tree query per layer over a region, then the exact test: the same conflicts in
    # the same order as the index's own query, inside the region and (asked of the index)
    # outside it; entries of the asking net never appear
    rng = random.Random(8)
    index = ObstacleIndex(2)
    index.rebuild(2, [(rng.randrange(2), (x, y, x + rng.randrange(1, 300), y + rng.randrange(1, 300)),
                       rng.choice(["a", "b", "c", None]), ("shape", i))
                      for i, (x, y) in enumerate((rng.randrange(0, 5000), rng.randrange(0, 5000))
                                                 for _ in range(400))],
                  {1: (0, (100, 100, 400, 400)), 2: (1, (2000, 2000, 2100, 2600))})
    for _ in range(40):
        x, y = rng.randrange(0, 4000), rng.randrange(0, 4000)
        region = (x, y, x + rng.randrange(1, 1500), y + rng.randrange(1, 1500))
        window = index.window("a", region)
        for _ in range(5):
            layer, spacing = rng.randrange(3), rng.choice([0, 50, 120])
            rects = []
            for _ in range(rng.randrange(1, 5)):
                rx = rng.randrange(region[0] - 200, region[2])
                ry = rng.randrange(region[1] - 200, region[3])
                rects.append((rx, ry, rx + rng.randrange(1, 300), ry + rng.randrange(1, 300)))
            got = window.conflicts_many(layer, rects, spacing)
            assert got == index.conflicts_many("a", layer, rects, spacing)
            assert all(c.net != "a" for hits in got for c in hits)
    assert any(index.window("a", (0, 0, 5000, 5000)).conflicts_many(0, [(150, 150, 160, 160)], 0))
