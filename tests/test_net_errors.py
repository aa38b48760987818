"""Bad nets and bad shapes are refused with the right exception, naming the field,
and leave the engine exactly as it was (check reports and held-state stats).

The input rules are the contract's (the antenna model): integer DBU coordinates,
closed rectangles with xlo < xhi and ylo < yhi, layers of the deck, areas in um^2
(non-negative, finite), pins named uniquely within a net.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest

import etchguard as eg

DECK_PATH = Path(eg.__file__).parent / "data" / "lumen-6m.toml"


@pytest.fixture()
def deck() -> eg.Deck:
    return eg.load_deck(DECK_PATH)


@pytest.fixture()
def engine(deck: eg.Deck) -> eg.Engine:
    """An engine holding one net with a gate, a wire and a via, so that a corrupted
    state would show in its report."""
    engine = eg.Engine(deck)
    gate = eg.make_pin(deck, "u1.a", "M1", [[0, 0, 140, 140]], {"thin": 0.05, "thick": 0.02},
                       0.0, {"M1": 0.01})
    driver = eg.make_pin(deck, "u2.z", "M2", [[20000, 0, 20140, 140]], None, 0.3)
    shapes = [eg.make_shape(deck, "M1", [0, 0, 30000, 140]), eg.make_shape(deck, "V1", [20000, 0, 20140, 140]),
              eg.make_shape(deck, "M2", [19960, -40, 20180, 4000])]
    engine.open_net("n1", [gate, driver], shapes=shapes)
    return engine


def held(engine: eg.Engine) -> dict[str, int]:
    """Stats of what the engine holds and has done (a refused call changes none)."""
    return {k: v for k, v in engine.stats().items() if k != "checks"}


def assert_refused(engine: eg.Engine, call: Callable[[], Any], error: type[eg.EtchguardError],
                   field: str) -> eg.EtchguardError:
    before = engine.check("n1")
    names = engine.net_names()
    shapes = engine.shapes("n1")
    stats = held(engine)
    with pytest.raises(error) as info:
        call()
    assert info.value.field is not None and field in info.value.field, (info.value.field, info.value.message)
    assert held(engine) == stats
    assert engine.net_names() == names
    assert engine.shapes("n1") == shapes
    assert engine.check("n1") == before
    return info.value


# -- bad shapes --------------------------------------------------------------------------

@pytest.mark.parametrize(("layer", "rect", "field"), [
    ("M9", [0, 0, 100, 100], "shape.layer"),  # unknown layer
    (3, [0, 0, 100, 100], "shape.layer"),  # a layer is named, not numbered
    ("M1", [100, 0, 0, 100], "shape.rect"),  # inverted in x
    ("M1", [0, 100, 100, 0], "shape.rect"),  # inverted in y
    ("M1", [0, 0, 0, 100], "shape.rect"),  # empty (zero width)
    ("M1", [0, 0, 100], "shape.rect"),  # three coordinates
    ("M1", [0.5, 0, 100, 100], "shape.rect"),  # float coordinate (DBU are integers)
    ("M1", [0, 0, math.nan, 100], "shape.rect"),
    ("M1", [0, 0, math.inf, 100], "shape.rect"),
    ("M1", [0, 0, "100", 100], "shape.rect"),
    ("M1", [True, 0, 100, 100], "shape.rect"),
])
def test_bad_shape_is_refused(engine: eg.Engine, deck: eg.Deck, layer: Any, rect: list[Any], field: str) -> None:
    def commit() -> None:
        engine.commit("n1", [eg.make_shape(deck, "M1", [0, 0, 100, 100]), eg.make_shape(deck, layer, rect)])
    assert_refused(engine, commit, eg.InputError, field)


@pytest.mark.parametrize("shape", [
    eg.Shape(0, (100, 0, 0, 100)),  # inverted
    eg.Shape(0, (0, 0, 0, 100)),  # empty
    eg.Shape(0, (0.5, 0, 100, 100)),  # type: ignore[arg-type]  # float coordinate
    eg.Shape(0, (0, 0, 100)),  # type: ignore[arg-type]  # three coordinates
    eg.Shape(99, (0, 0, 100, 100)),  # no such layer
])
def test_engine_refuses_bad_shape_objects_without_changing_anything(engine: eg.Engine, shape: eg.Shape) -> None:
    # The engine's promise: "every mutating call validates its whole input before it
    # changes anything". A good shape first, then the bad one: neither is committed.
    good = eg.Shape(0, (0, 0, 100, 100))
    assert_refused(engine, lambda: engine.commit("n1", [good, shape]), eg.InputError, "shapes[1]")
    assert_refused(engine, lambda: engine.score("n1", [good, shape]), eg.InputError, "shapes[1]")


def test_open_net_with_a_bad_shape_opens_nothing(engine: eg.Engine, deck: eg.Deck) -> None:
    pin = eg.make_pin(deck, "u9.a", "M1", [[0, 0, 140, 140]], 0.05)
    assert_refused(engine, lambda: engine.open_net("n2", [pin], shapes=[eg.Shape(0, (5, 5, 1, 1))]),
                   eg.InputError, "shapes[0]")
    assert "n2" not in engine.net_names()


def test_empty_candidate(engine: eg.Engine) -> None:
    assert_refused(engine, lambda: engine.score("n1", []), eg.InputError, "candidate")


# -- bad pins ----------------------------------------------------------------------------

@pytest.mark.parametrize(("kwargs", "field"), [
    ({"layer": "M9"}, "pin.layer"),
    ({"rects": []}, "pin.rects"),
    ({"rects": [[0, 0, 140, 140], [140, 0, 0, 140]]}, "pin.rects[1]"),
    ({"rects": [[0, 0, 1.5, 140]]}, "pin.rects[0]"),
    ({"gate_area": math.nan}, "pin.gate_area"),
    ({"gate_area": {"thin": math.nan}}, "pin.gate_area.thin"),
    ({"gate_area": {"thick": -0.1}}, "pin.gate_area.thick"),
    ({"gate_area": -0.1}, "pin.gate_area"),
    ({"gate_area": {"thin": math.inf}}, "pin.gate_area.thin"),
    ({"gate_area": {"": 0.1}}, "pin.gate_area"),
    ({"diff_area": -0.2}, "pin.diff_area"),
    ({"diff_area": math.nan}, "pin.diff_area"),
    ({"diff_area": "0.2"}, "pin.diff_area"),
    ({"cell_area": {"M1": -0.01}}, "pin.cell_area.M1"),
    ({"cell_area": {"M9": 0.01}}, "pin.cell_area"),
    ({"name": ""}, "pin.name"),
])
def test_bad_pin_is_refused(engine: eg.Engine, deck: eg.Deck, kwargs: dict[str, Any], field: str) -> None:
    args: dict[str, Any] = {"name": "u9.a", "layer": "M1", "rects": [[0, 0, 140, 140]], "gate_area": 0.05,
                            "diff_area": 0.0, "cell_area": None}
    args.update(kwargs)

    def open_it() -> None:
        engine.open_net("n2", [eg.make_pin(deck, args["name"], args["layer"], args["rects"], args["gate_area"],
                                           args["diff_area"], args["cell_area"])])
    assert_refused(engine, open_it, eg.InputError, field)
    assert "n2" not in engine.net_names()


def test_engine_refuses_a_pin_object_with_nan_gate_area(engine: eg.Engine) -> None:
    # A Pin built without make_pin: the engine's own validation must still hold.
    bad = eg.Pin("u9.a", 0, ((0, 0, 140, 140),), {"thin": math.nan})
    assert_refused(engine, lambda: engine.open_net("n2", [bad]), eg.InputError, "pins[0]")
    assert "n2" not in engine.net_names()


def test_duplicate_pin_names(engine: eg.Engine, deck: eg.Deck) -> None:
    a = eg.make_pin(deck, "u9.a", "M1", [[0, 0, 140, 140]], 0.05)
    b = eg.make_pin(deck, "u9.a", "M1", [[1000, 0, 1140, 140]], 0.05)
    assert_refused(engine, lambda: engine.open_net("n2", [a, b]), eg.InputError, "pins[1].name")
    assert "n2" not in engine.net_names()


# -- net files ---------------------------------------------------------------------------

@pytest.mark.parametrize(("net", "field"), [
    ({"name": "n2", "pins": [{"name": "p", "layer": "M7", "rects": [[0, 0, 1, 1]]}]}, "nets[0].pins[0].layer"),
    ({"name": "n2", "pins": [{"name": "p", "layer": "M1", "rects": [[0, 0, 1, 1]], "gate_area": {"thin": -1}}]},
     "nets[0].pins[0].gate_area.thin"),
    ({"name": "n2", "shapes": [{"layer": "M1", "rect": [0, 0, 1.25, 1]}]}, "nets[0].shapes[0].rect"),
    ({"name": "n2", "shapes": [{"layer": "M1", "rect": [9, 0, 1, 1]}]}, "nets[0].shapes[0].rect"),
    ({"name": "n2", "shapes": [{"layer": "M1", "rect": [0, 0, 1, 1], "width": 3}]}, "nets[0].shapes[0].width"),
    ({"name": "n2", "colour": "red"}, "nets[0].colour"),
    ({"name": "n2", "pins": [{"name": "p", "layer": "M1", "rects": [[0, 0, 1, 1]], "size": 1}]},
     "nets[0].pins[0].size"),
    ({"name": "n2", "pins": 3}, "nets[0].pins"),
    ({"name": "n2", "shapes": {"layer": "M1"}}, "nets[0].shapes"),
    ({"name": "n2", "shapes": [{"layer": "M1", "rect": 7}]}, "nets[0].shapes[0].rect"),
    ({"name": "n2", "pins": [{"name": "p", "layer": "M1", "rects": [[0, 0, 1, 1]], "cell_area": [1]}]},
     "nets[0].pins[0].cell_area"),
    # an oxide class no rule of the deck names (lumen-6m has thin and thick): never checked
    ({"name": "n2", "pins": [{"name": "p", "layer": "M1", "rects": [[0, 0, 1, 1]], "gate_area": {"thik": 1}}]},
     "nets[0].pins[0].gate_area.thik"),
    ({"name": "n2", "pins": [{"name": "p", "layer": "M1", "rects": [[0, 0, 1, 1]], "gate_area": {"Thin": 1}}]},
     "nets[0].pins[0].gate_area.Thin"),
    ({"name": ""}, "nets[0].name"),
    ({"name": "n2", "layer_range": ["M4", "M1"]}, "nets[0].layer_range"),
])
def test_bad_net_file_entry(deck: eg.Deck, net: dict[str, Any], field: str) -> None:
    with pytest.raises(eg.InputError) as info:
        eg.parse_net_file(deck, {"nets": [net]}, "demo-nets.json")
    assert info.value.field == f"demo-nets.json: {field}", info.value.field


def test_net_named_twice_in_a_file(deck: eg.Deck) -> None:
    with pytest.raises(eg.InputError) as info:
        eg.parse_net_file(deck, {"nets": [{"name": "a"}, {"name": "a"}]}, "demo-nets.json")
    assert info.value.field == "demo-nets.json: nets[1].name"


# -- nets and shape ids ------------------------------------------------------------------

def test_net_opened_twice(engine: eg.Engine, deck: eg.Deck) -> None:
    pin = eg.make_pin(deck, "u9.a", "M1", [[0, 0, 140, 140]], 0.05)
    assert_refused(engine, lambda: engine.open_net("n1", [pin]), eg.AlreadyExistsError, "net")


def test_unknown_net(engine: eg.Engine, deck: eg.Deck) -> None:
    shape = eg.make_shape(deck, "M1", [0, 0, 100, 100])
    assert_refused(engine, lambda: engine.commit("absent", [shape]), eg.NotFoundError, "net")
    assert_refused(engine, lambda: engine.check("absent"), eg.NotFoundError, "net")
    assert_refused(engine, lambda: engine.score("absent", [shape]), eg.NotFoundError, "net")
    assert_refused(engine, lambda: engine.close_net("absent"), eg.NotFoundError, "net")


def test_unknown_shape_id_on_remove_removes_nothing(engine: eg.Engine) -> None:
    known = sorted(engine.shapes("n1"))
    assert_refused(engine, lambda: engine.remove("n1", [known[0], 999]), eg.NotFoundError, "shape_ids[1]")
    assert_refused(engine, lambda: engine.remove("n1", [known[0], known[0]]), eg.NotFoundError, "shape_ids[1]")


def test_no_deck_loaded() -> None:
    engine = eg.Engine()
    deck = eg.load_deck(DECK_PATH)
    pin = eg.make_pin(deck, "u1.a", "M1", [[0, 0, 140, 140]], 0.05)
    shape = eg.make_shape(deck, "M1", [0, 0, 100, 100])
    for call in (lambda: engine.open_net("n1", [pin]), lambda: engine.check("n1"),
                 lambda: engine.commit("n1", [shape]), lambda: engine.score("n1", [shape]),
                 lambda: engine.remove("n1", [1]), lambda: engine.deck):
        with pytest.raises(eg.NoDeckError) as info:
            call()
        assert info.value.field == "deck"
    assert engine.net_names() == []
    assert engine.stats()["nets"] == 0 and engine.stats()["shapes"] == 0
