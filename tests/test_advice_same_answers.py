"""The advice answers exactly as before its speed work, on seeded random designs.

Each case builds a design of generated nets (bench/netgen.py, the lumen-6m demo deck)
with other nets and declared blockages as obstacles, then asks advice for random runs
(from pins and from held shapes, either direction, against the preferred direction
now and then, with odd widths, layer ranges, partial answers and small budgets of
exact scores). Every answer of the engine is compared field by field (its repr, so
floats to the bit) with the answer of ``advice_baseline``, the advice as it was
computed before, on the same net state; a refusal must be the same refusal. The
far-side-driver scenario of test_advice (a small deck whose diode tables vary) adds
answers where diodes and jumpers are found.
"""

from __future__ import annotations

import random
import sys
from pathlib import Path

import advice_baseline as baseline
import pytest
from etchguard import Engine, EtchguardError, Shape, load_deck, loads_deck, make_pin
from etchguard._advice import _Advisor, via_stack
from etchguard._coreview import CoreView
from etchguard._engine import Limits
from test_advice import deck_text

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from bench.netgen import generate_net  # noqa: E402  (the bench's seeded nets)

DEMO_DECK = Path(__file__).resolve().parents[1] / "service" / "etchguard" / "data" / "lumen-6m.toml"
CASES = 40
WANTS = (None, None, ("hop",), ("jumper",), ("diode",), ("hop", "diode"), ("jumper", "diode"))


def baseline_answer(engine: Engine, name: str, *args: object) -> str:
    """The advice as computed before, on the engine's net (under its lock, as the engine does)."""
    try:
        request = baseline.check_request(engine.deck, *args)
    except EtchguardError as exc:
        return f"refused {type(exc).__name__}: {exc}"
    net = engine._net(name)
    with net.lock:
        view = CoreView(name, net.core, engine.costs)
        advice = baseline.advise(name, view, engine._obstacles, net.layer_range, request, None,
                                 engine.limits.max_advice_scores)
    return repr(advice)


def engine_answer(engine: Engine, name: str, *args: object) -> str:
    try:
        return repr(engine.advise(name, *args))
    except EtchguardError as exc:
        return f"refused {type(exc).__name__}: {exc}"


def assert_same(engine: Engine, name: str, *args: object) -> str:
    got, want = engine_answer(engine, name, *args), baseline_answer(engine, name, *args)
    assert got == want, f"advice on {name} for {args} changed"
    return got


def random_design(rng: random.Random, seed: int) -> tuple[Engine, list[str]]:
    deck = load_deck(DEMO_DECK)
    engine = Engine(deck, Limits(max_advice_scores=rng.choice([20_000, 20_000, 20_000, 3, 8, 15, 30])))
    names = []
    for i in range(rng.randint(2, 5)):  # nets close enough to be each other's obstacles
        net = generate_net(deck, rng.randint(5, 60), seed=seed, name=f"n{i}",
                           origin=(rng.randrange(0, 60_000, 10), rng.randrange(0, 60_000, 10)))
        layer_range = (0, rng.choice([4, 6, 8, 10])) if rng.random() < 0.2 else None
        engine.open_net(net.name, net.pins, layer_range, net.shapes)
        names.append(net.name)
    for _ in range(rng.randint(0, 4)):
        x, y = rng.randrange(-50_000, 150_000, 10), rng.randrange(-50_000, 150_000, 10)
        engine.declare_blockage(rng.choice([2, 4, 6, 8]),
                                (x, y, x + rng.randint(100, 20_000), y + rng.randint(100, 3_000)))
    return engine, names


def random_run(rng: random.Random, engine: Engine, name: str) -> tuple[object, ...]:
    deck, spec = engine.deck, engine.spec(name)
    pin = rng.choice(spec.pins)
    r, layer = pin.rects[0], pin.layer
    if rng.random() < 0.3 and spec.shapes:  # from the middle of a held shape
        shape = rng.choice(spec.shapes)
        r = shape.rect
        layer = shape.layer if deck.layers[shape.layer].is_routing else shape.layer - 1
    x, y = (r[0] + r[2]) // 2, (r[1] + r[3]) // 2
    length = rng.randint(0, 300_000) * rng.choice([1, -1])
    horizontal = (deck.layers[layer].direction == "horizontal") != (rng.random() < 0.15)
    x2, y2 = (x + length, y) if horizontal else (x, y + length)
    if rng.random() < 0.3:
        x, y, x2, y2 = x2, y2, x, y
    return (layer, x, y, x2, y2, rng.choice([None, None, None, 100, 280, 141]), rng.random() < 0.2,
            rng.choice(WANTS))


@pytest.mark.parametrize("seed", range(CASES))
def test_same_answers_on_random_designs(seed):
    rng = random.Random(seed)
    engine, names = random_design(rng, seed)
    for name in names:
        for _ in range(3):
            assert_same(engine, name, *random_run(rng, engine, name))


@pytest.mark.parametrize("seed", range(CASES))
def test_same_answers_far_side_driver(seed):
    rng = random.Random(seed)
    deck = loads_deck(deck_text(rng.choice([4000.0, 1500.0, 700.0, 450.0, 401.0])), f"same-{seed}")
    L = deck.layer_index
    gate = make_pin(deck, "g", "M1", [[0, 0, 100, 100]], {"thin": rng.choice([0.006, 0.01, 0.013])})
    driver = make_pin(deck, "d", "M1", [[119950, 0, 120050, 100]], None, rng.choice([0.05, 0.5]))
    far_x = rng.randrange(30_000, 90_000, 10) + 50
    shapes = via_stack(deck, far_x, 50, L["M1"], L["M3"]) + [Shape(L["M3"], (far_x - 50, 0, 120100, 100))]
    shapes += via_stack(deck, 120000, 50, L["M1"], L["M3"])
    engine = Engine(deck, Limits(max_advice_scores=rng.choice([20_000, 20_000, 5, 12])))
    engine.open_net("n", [gate, driver], None, shapes)
    for k in range(rng.randint(0, 3)):  # other nets' wires near the tracks
        x0 = rng.randrange(1000, far_x - 2000)
        other = make_pin(deck, "x", "M1", [[x0, 9000, x0 + 100, 9100]], {"thin": 1.0})
        y = rng.choice([150, 190, 260, 400, -200])
        engine.open_net(f"other{k}", [other], None,
                        [Shape(L[rng.choice(["M2", "M3", "M4", "M5"])], (x0, y, x0 + 1000, y + 100))])
    assert_same(engine, "n", L["M1"], 50, 50, far_x, 50, None, False, rng.choice(WANTS))


@pytest.mark.parametrize("seed", range(8))
def test_same_answers_with_the_bisection_search_alone(seed, monkeypatch):
    # the jumper's fallback search, which the tangent steps usually spare, on its own
    monkeypatch.setattr(_Advisor, "tangent_search", False)
    monkeypatch.setattr(baseline._Advisor, "tangent_search", False)
    rng = random.Random(1000 + seed)
    engine, names = random_design(rng, 1000 + seed)
    for name in names:
        assert_same(engine, name, *random_run(rng, engine, name))


def test_a_changed_answer_is_caught(monkeypatch):
    # the comparison is not blind: a diode search that stops one step early differs
    deck = loads_deck(deck_text(), "same-caught")
    gate = make_pin(deck, "g", "M1", [[0, 0, 100, 100]], {"thin": 0.01})
    driver = make_pin(deck, "d", "M1", [[99950, 0, 100050, 100]], None, 0.5)
    L = deck.layer_index
    shapes = via_stack(deck, 50050, 50, L["M1"], L["M3"]) + [Shape(L["M3"], (50000, 0, 100100, 100))]
    shapes += via_stack(deck, 100000, 50, L["M1"], L["M3"])
    engine = Engine(deck)
    engine.open_net("n", [gate, driver], None, shapes)
    args = (L["M1"], 50, 50, 50050, 50, None, False, None)
    assert engine_answer(engine, "n", *args) == baseline_answer(engine, "n", *args)
    import etchguard._advice as advice_module
    monkeypatch.setattr(advice_module, "DIODE_REL_PRECISION", 1e-3)
    assert engine_answer(engine, "n", *args) != baseline_answer(engine, "n", *args)
