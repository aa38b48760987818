"""What a net is made of, as given by a router or a net file: pins and shapes.

Validation happens here, once, at the edge; everything behind it may trust its input.
Layers are resolved to process-step indices of the loaded deck.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ._errors import InputError
from ._geometry import COORD_LIMIT, Rect, checked_rect, run_rect, square
from ._names import check_name, shown
from ._netfile import NetFileReader
from ._rules import DEFAULT_OXIDE, Deck


@dataclass(frozen=True)
class Pin:
    """A pin of a net: a gate input (gate_area > 0), a driver or diode (diff_area > 0)."""

    name: str
    layer: int
    rects: tuple[Rect, ...]
    gate_area: Mapping[str, float] = field(default_factory=dict)  # um^2 per oxide class
    diff_area: float = 0.0  # um^2
    cell_area: Mapping[int, float] = field(default_factory=dict)  # um^2 per layer step
    # In-cell side-wall um^2 per layer step, for the side measure: LEF's
    # ANTENNAPARTIALMETALSIDEAREA, which the LEF/DEF reference defines as the side-wall
    # area itself (perimeter times thickness), so it is added as given.
    cell_side_area: Mapping[int, float] = field(default_factory=dict)
    # A block pin's cumulative ratios accumulated inside the block (LEF's ANTENNAMAX*CAR),
    # (measure, layer step, oxide) -> ratio; added to the pin's gates' CAR of that measure
    # and oxide from that step up, until a higher step of the chain gives its own (the
    # core's Model::block_car; docs/formats.md).
    block_car: Mapping[tuple[str, int, str], float] = field(default_factory=dict)
    # The layer step of each rectangle, for a pin with shapes on several layers (a cell
    # port on M1 and M2); empty: all on `layer`. `layer` is then the lowest: the pin joins
    # the structure there, each rectangle connects at its own layer from its step on, and
    # the pin's rectangles are one conductor (connected inside the cell).
    rect_layers: tuple[int, ...] = ()

    @property
    def total_gate_area(self) -> float:
        return sum(self.gate_area.values())

    def layered_rects(self) -> tuple[tuple[int, Rect], ...]:
        """(layer step, rectangle) of every rectangle."""
        if not self.rect_layers:
            return tuple((self.layer, r) for r in self.rects)
        return tuple(zip(self.rect_layers, self.rects))

    def lowest_rects(self) -> tuple[Rect, ...]:
        """The rectangles on the pin's own (lowest) layer."""
        return tuple(r for layer, r in self.layered_rects() if layer == self.layer)


@dataclass(frozen=True, slots=True)
class Shape:
    """A routed (or candidate) rectangle on one layer (slots: no dict per shape, a DEF
    read or a big net makes millions)."""

    layer: int
    rect: Rect


_object_new = object.__new__
# A reader's hot loop builds shapes it has already checked as ``shape = object.__new__(Shape)``
# then ``set_shape_layer(shape, layer)`` and ``set_shape_rect(shape, rect)`` (the slots' own
# setters), inline: equal to ``Shape(layer, rect)`` but without the frozen dataclass's
# ``__init__`` (``object.__setattr__`` per field: half the cost of a shape, and a DEF read
# makes millions).
set_shape_layer = Shape.__dict__["layer"].__set__
set_shape_rect = Shape.__dict__["rect"].__set__


_set_attribute = object.__setattr__  # past the frozen dataclass's refusal


def pin_fields(pin: Pin) -> dict[str, Any]:
    """A pin's fields, for ``pin_copy`` (a reader's template of one cell pin)."""
    return dict(vars(pin))


def pin_copy(fields: dict[str, Any], name: str, rects: tuple[Rect, ...]) -> Pin:
    """A pin equal to ``Pin(name, rects=rects, **other fields)`` of ``pin_fields``, built
    without the frozen dataclass's ``__init__`` (``object.__setattr__`` per field, nine
    of them: four times the cost of a dict copy, and a DEF read makes a pin per
    connection). The other fields' mappings are shared with the template, as pins of
    one cell pin always shared them."""
    pin = _object_new(Pin)
    own = fields.copy()
    own["name"] = name
    own["rects"] = rects
    _set_attribute(pin, "__dict__", own)
    return pin


@dataclass(frozen=True)
class NetSpec:
    name: str
    pins: tuple[Pin, ...]
    shapes: tuple[Shape, ...] = ()
    layer_range: tuple[int, int] | None = None


def read_net(name: str, pins: tuple[Pin, ...], shapes: tuple[Shape, ...]) -> NetSpec:
    """A net a reader has already checked, equal to ``NetSpec(name, pins, shapes)`` but
    built without the frozen dataclass's ``__init__`` (as ``pin_copy``)."""
    spec = _object_new(NetSpec)
    _set_attribute(spec, "__dict__", {"name": name, "pins": pins, "shapes": shapes, "layer_range": None})
    return spec


def resolve_layer(deck: Deck, name: object, field_name: str) -> int:
    if not isinstance(name, str) or name not in deck.layer_index:
        raise InputError(f"unknown layer {shown(name)} (deck {deck.name} has "
                         f"{', '.join(deck.layer_index)})", field_name)
    return deck.layer_index[name]


def _area(value: object, field_name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"must be a number of um^2, got {value!r}", field_name)
    value = float(value)
    if not math.isfinite(value) or value < 0:
        raise InputError(f"must be a finite, non-negative um^2, got {value!r}", field_name)
    return value


def make_pin(deck: Deck, name: object, layer: object, rects: Sequence[object],
             gate_area: Mapping[str, object] | float | None = None, diff_area: object = 0.0,
             cell_area: Mapping[str, object] | None = None, field_name: str = "pin",
             cell_side_area: Mapping[str, object] | None = None,
             block_car: Sequence[object] | None = None) -> Pin:
    """Validate one pin given with layer names, as a router or a net file states it."""
    pin_name = check_name(name, "a pin", f"{field_name}.name")
    step = resolve_layer(deck, layer, f"{field_name}.layer")
    if not rects:
        raise InputError("a pin needs at least one rectangle", f"{field_name}.rects")
    layered = [_pin_rect(deck, step, r, f"{field_name}.rects[{i}]") for i, r in enumerate(rects)]
    checked = tuple(r for _, r in layered)
    rect_layers: tuple[int, ...] = ()
    if any(l != step for l, _ in layered):  # several layers: the pin joins at the lowest
        rect_layers = tuple(l for l, _ in layered)
        step = min(rect_layers)
    if gate_area is None:
        gates: dict[str, float] = {}
    elif isinstance(gate_area, Mapping):
        gates = {}
        for oxide, value in gate_area.items():
            if not isinstance(oxide, str) or not oxide:
                raise InputError(f"oxide class must be a non-empty name, got {shown(oxide)}",
                                 f"{field_name}.gate_area")
            check_name(oxide, "an oxide class", f"{field_name}.gate_area")
            gates[oxide] = _area(value, f"{field_name}.gate_area.{oxide}")
    else:
        gates = {DEFAULT_OXIDE: _area(gate_area, f"{field_name}.gate_area")}
    _check_oxides(deck, gates, f"{field_name}.gate_area")
    gates = {k: v for k, v in gates.items() if v > 0}
    return Pin(pin_name, step, checked, gates, _area(diff_area, f"{field_name}.diff_area"),
               _per_layer(deck, cell_area, f"{field_name}.cell_area"),
               _per_layer(deck, cell_side_area, f"{field_name}.cell_side_area", routing_only=True),
               _block_car(deck, block_car or (), gates, f"{field_name}.block_car"), rect_layers)


def _pin_rect(deck: Deck, step: int, raw: object, field_name: str) -> tuple[int, Rect]:
    """A pin rectangle: four coordinates on the pin's layer, or ``{"layer", "rect"}`` on
    a layer of its own."""
    if isinstance(raw, Mapping):
        entry = _json_object(dict(raw), "a pin rectangle", {"layer", "rect"}, field_name)
        return (resolve_layer(deck, entry.get("layer"), f"{field_name}.layer"),
                checked_rect(entry.get("rect", []), f"{field_name}.rect"))
    return step, checked_rect(raw, field_name)  # type: ignore[arg-type]


_BLOCK_KEYS = {"layer", "measure", "oxide", "ratio"}
MEASURE_NAMES = ("area", "side")


def _block_car(deck: Deck, entries: Sequence[object], gates: Mapping[str, float],
               field_name: str) -> dict[tuple[str, int, str], float]:
    """A block pin's accumulated ratios: objects with ``layer``, ``measure`` ("area" when
    absent), ``oxide`` ("thin" when absent) and ``ratio``; each for a class the pin has
    gate area of (the ratio is its gates'), once per (measure, layer, oxide)."""
    if isinstance(entries, (str, bytes, Mapping)) or not isinstance(entries, Sequence):
        raise InputError(f"must be a list of objects, got {shown(entries)}", field_name)
    out: dict[tuple[str, int, str], float] = {}
    for i, raw in enumerate(entries):
        where = f"{field_name}[{i}]"
        entry = _json_object(raw, "a block ratio", _BLOCK_KEYS, where)
        step = resolve_layer(deck, entry.get("layer"), f"{where}.layer")
        measure = entry.get("measure", "area")
        if measure not in MEASURE_NAMES:
            raise InputError(f"must be \"area\" or \"side\", got {shown(measure)}", f"{where}.measure")
        if measure == "side" and not deck.layers[step].is_routing:
            raise InputError(f"{deck.layers[step].name} is a cut layer; a side ratio needs a routing layer",
                             f"{where}.layer")
        oxide = entry.get("oxide", DEFAULT_OXIDE)
        if not isinstance(oxide, str) or oxide not in gates:
            raise InputError(f"the pin has no gate area of class {shown(oxide)}; a block's cumulative "
                             "ratio belongs to the gates behind the pin", f"{where}.oxide")
        if (measure, step, oxide) in out:
            raise InputError("given twice for one (layer, measure, oxide)", where)
        ratio = entry.get("ratio")
        if isinstance(ratio, bool) or not isinstance(ratio, (int, float)) or not math.isfinite(ratio) \
                or ratio < 0:
            raise InputError(f"must be a finite ratio >= 0, got {shown(ratio)}", f"{where}.ratio")
        out[(measure, step, oxide)] = float(ratio)
    return out


def _per_layer(deck: Deck, areas: Mapping[str, object] | None, field_name: str,
               routing_only: bool = False) -> dict[int, float]:
    """um^2 per layer name, as um^2 per process step. A side wall belongs to a routing
    layer (the side measure has no cut-layer figure): on a cut layer it is refused."""
    out: dict[int, float] = {}
    for layer_name, value in (areas or {}).items():
        step = resolve_layer(deck, layer_name, field_name)
        if routing_only and not deck.layers[step].is_routing:
            raise InputError(f"{layer_name} is a cut layer; a side-wall area needs a routing layer",
                             f"{field_name}.{layer_name}")
        out[step] = _area(value, f"{field_name}.{layer_name}")
    return out


def _check_oxides(deck: Deck, gates: Mapping[str, float], field_name: str) -> None:
    """A gate of an oxide class no rule names would never be checked: a net far over its
    limits would read legal. Refused, naming the class. (A class the deck has rules for,
    only not on every layer, is fine: the deck states where it is limited.) A deck without
    any rule checks nothing, so it names no classes to hold a gate to."""
    known = deck.oxides
    for oxide, value in gates.items():
        if known and value > 0 and oxide not in known:
            raise InputError(f"oxide class {shown(oxide)} has no rule in deck {deck.name} "
                             f"(its classes: {', '.join(known)})", f"{field_name}.{oxide}")


def make_shape(deck: Deck, layer: object, rect: Sequence[object], field_name: str = "shape") -> Shape:
    return Shape(resolve_layer(deck, layer, f"{field_name}.layer"), checked_rect(rect, f"{field_name}.rect"))


_NET_KEYS = {"name", "pins", "shapes", "layer_range"}
_PIN_KEYS = {"name", "layer", "rects", "gate_area", "diff_area", "cell_area", "cell_side_area", "block_car"}
_SHAPE_KEYS = {"layer", "rect"}


def _json_object(raw: object, what: str, allowed: set[str], where: str) -> dict[str, Any]:
    """``raw`` as a JSON object with only ``allowed`` keys; a refusal names the first other."""
    if not isinstance(raw, dict):
        raise InputError(f"{what} must be a JSON object, got {shown(raw)}", where)
    unknown = sorted(set(raw) - allowed)
    if unknown:
        raise InputError(f"unknown key {shown(unknown[0])} (allowed: {', '.join(sorted(allowed))})",
                         f"{where}.{unknown[0]}")
    return raw


def _json_list(raw: dict[str, Any], key: str, where: str) -> list[Any]:
    value = raw.get(key, [])
    if not isinstance(value, list):
        raise InputError(f"must be a list, got {shown(value)}", f"{where}.{key}")
    return value


def net_from_json(deck: Deck, raw: Any, where: str) -> NetSpec:
    """Validate one net object of a net file; ``where`` names it (``file: nets[3]``)."""
    raw = _json_object(raw, "a net", _NET_KEYS, where)
    name = check_name(raw.get("name"), "a net", f"{where}.name")
    pins = []
    for i, p in enumerate(_json_list(raw, "pins", where)):
        pf = f"{where}.pins[{i}]"
        p = _json_object(p, "a pin", _PIN_KEYS, pf)
        for key in ("cell_area", "cell_side_area"):
            if not isinstance(p.get(key, {}), dict):
                raise InputError(f"must be an object of um^2 per layer, got {shown(p[key])}",
                                 f"{pf}.{key}")
        pins.append(make_pin(deck, p.get("name", ""), p.get("layer"), _json_list(p, "rects", pf),
                             p.get("gate_area"), p.get("diff_area", 0.0), p.get("cell_area"), pf,
                             p.get("cell_side_area"), p.get("block_car")))
    shapes = []
    for i, s in enumerate(_json_list(raw, "shapes", where)):
        sf = f"{where}.shapes[{i}]"
        s = _json_object(s, "a shape", _SHAPE_KEYS, sf)
        shapes.append(make_shape(deck, s.get("layer"), s.get("rect", []), sf))
    layer_range = None
    if "layer_range" in raw:
        lr = raw["layer_range"]
        if not isinstance(lr, list) or len(lr) != 2:
            raise InputError("layer_range is [lowest, highest] routing layer", f"{where}.layer_range")
        layer_range = checked_layer_range(deck, lr[0], lr[1], f"{where}.layer_range")
    return NetSpec(name, tuple(pins), tuple(shapes), layer_range)


def checked_layer_range(deck: Deck, low: object, high: object, field_name: str) -> tuple[int, int]:
    lo = resolve_layer(deck, low, field_name)
    hi = resolve_layer(deck, high, field_name)
    if lo > hi:
        raise InputError(f"layer range {low}..{high} is upside down", field_name)
    return lo, hi


def parse_net_file(deck: Deck, data: Any, source: str = "<nets>") -> list[NetSpec]:
    """Validate an already decoded net file: {"nets": [...]}."""
    if not isinstance(data, dict) or not isinstance(data.get("nets"), list):
        raise InputError('a net file is a JSON object {"nets": [...]}', source)
    unknown = sorted(set(data) - {"nets"})
    if unknown:
        raise InputError(f"unknown key {shown(unknown[0])} (a net file has only 'nets')",
                         f"{source}: {unknown[0]}")
    nets = [net_from_json(deck, raw, f"{source}: nets[{i}]") for i, raw in enumerate(data["nets"])]
    seen: set[str] = set()
    for i, net in enumerate(nets):
        if net.name in seen:
            raise InputError(f"net {shown(net.name)} appears twice", f"{source}: nets[{i}].name")
        seen.add(net.name)
    return nets


def iter_net_file(deck: Deck, path: str | Path) -> Iterator[NetSpec]:
    """The nets of a net file one at a time, each validated as it is read; a refusal
    names the file, the line and the field (``nets[3].shapes[0].rect``)."""
    reader = NetFileReader(path)
    seen: set[str] = set()
    for index, raw, offset in reader.nets():
        where = f"{reader.source}: nets[{index}]"
        try:
            spec = net_from_json(deck, raw, where)
        except InputError as exc:
            path_in_net = (exc.field or "")[len(where):]
            raise exc.at_line(reader.line_of_field(offset, path_in_net)) from None
        if spec.name in seen:
            raise InputError(f"net {shown(spec.name)} appears twice", f"{where}.name",
                             reader.line_of_field(offset, ".name"))
        seen.add(spec.name)
        yield spec


def load_net_file(deck: Deck, path: str | Path) -> list[NetSpec]:
    """Every net of a net file, validated (see ``iter_net_file``)."""
    return list(iter_net_file(deck, path))


def run_shapes(deck: Deck, layer: int, x1: int, y1: int, x2: int, y2: int,
               width: int | None = None, extension: int | None = None) -> list[Shape]:
    """A straight run on a routing layer as one shape (width defaults to the layer's)."""
    info = deck.layers[layer]
    if not info.is_routing:
        raise InputError(f"{info.name} is a cut layer; a run needs a routing layer", "layer")
    if width is None:
        if not info.wire_width:
            raise InputError(f"{info.name} has no default wire_width; give a width", "width")
        width = info.wire_width
    return [Shape(layer, run_rect(x1, y1, x2, y2, width, extension))]


def via_shapes(deck: Deck, cut_layer: int, x: int, y: int) -> list[Shape]:
    """The deck's default via centred at (x, y): landing pad, cut, landing pad."""
    info = deck.layers[cut_layer]
    if info.is_routing or not info.cut_size:
        raise InputError(f"{info.name} is not a cut layer with a cut_size", "layer")
    pad = info.cut_size + 2 * (info.enclosure or 0)
    return [Shape(cut_layer - 1, square(x, y, pad)), Shape(cut_layer, square(x, y, info.cut_size)),
            Shape(cut_layer + 1, square(x, y, pad))]


def _fast_rect_ok(r: object) -> bool:
    # spelled out, not all(...) over a generator: this runs for every shape committed
    return (type(r) is tuple and len(r) == 4
            and type(r[0]) is int and type(r[1]) is int and type(r[2]) is int and type(r[3]) is int
            and r[0] < r[2] and r[1] < r[3]
            and r[0] > -COORD_LIMIT and r[2] < COORD_LIMIT
            and r[1] > -COORD_LIMIT and r[3] < COORD_LIMIT)


def check_shape_object(steps: int, shape: object, field_name: str) -> None:
    """Refuse a Shape object handed to the engine directly that the edge would refuse."""
    if not isinstance(shape, Shape) or type(shape.layer) is not int or not 0 <= shape.layer < steps:
        raise InputError("not a shape on a layer of the deck", field_name)
    if not _fast_rect_ok(shape.rect):
        if not isinstance(shape.rect, (tuple, list)):
            raise InputError("a rectangle is four integer DBU coordinates", f"{field_name}.rect")
        checked_rect(shape.rect, f"{field_name}.rect")  # raises with the precise reason
        raise InputError("a rectangle is a tuple of four ints", f"{field_name}.rect")


def check_shape_objects(steps: int, shapes: Sequence[object], field_name: str) -> None:
    """``check_shape_object`` on each of ``shapes`` (field ``field_name[i]``); the
    field's name is made only for a shape refused (every commit comes here)."""
    for i, s in enumerate(shapes):
        if not (type(s) is Shape and type(s.layer) is int and 0 <= s.layer < steps and _fast_rect_ok(s.rect)):
            check_shape_object(steps, s, f"{field_name}[{i}]")


def check_pin_object(steps: int, pin: object, field_name: str) -> None:
    """Refuse a Pin object handed to the engine directly that make_pin would refuse."""
    if not isinstance(pin, Pin):
        raise InputError("not a pin", field_name)
    check_name(pin.name, "a pin", f"{field_name}.name")
    if type(pin.layer) is not int or not 0 <= pin.layer < steps:
        raise InputError("not a layer of the deck", f"{field_name}.layer")
    if not pin.rects:
        raise InputError("a pin needs at least one rectangle", f"{field_name}.rects")
    for i, r in enumerate(pin.rects):
        if not _fast_rect_ok(r):
            checked_rect(r if isinstance(r, (tuple, list)) else (), f"{field_name}.rects[{i}]")
            raise InputError("a rectangle is a tuple of four ints", f"{field_name}.rects[{i}]")
    for oxide, value in pin.gate_area.items():
        check_name(oxide, "an oxide class", f"{field_name}.gate_area")
        _area(value, f"{field_name}.gate_area.{oxide}")
    _area(pin.diff_area, f"{field_name}.diff_area")
    for key in ("cell_area", "cell_side_area"):
        for step, value in getattr(pin, key).items():
            if type(step) is not int or not 0 <= step < steps:
                raise InputError("not a layer of the deck", f"{field_name}.{key}")
            _area(value, f"{field_name}.{key}")
    if pin.rect_layers and (len(pin.rect_layers) != len(pin.rects) or min(pin.rect_layers) != pin.layer
                            or any(type(l) is not int or not 0 <= l < steps for l in pin.rect_layers)):
        raise InputError("one layer step per rectangle, the pin's layer the lowest", f"{field_name}.rect_layers")
    for (measure, step, oxide), ratio in pin.block_car.items():
        if measure not in MEASURE_NAMES or type(step) is not int or not 0 <= step < steps \
                or oxide not in pin.gate_area or not (isinstance(ratio, (int, float)) and 0 <= ratio < math.inf):
            raise InputError("a (measure, step, oxide) of the pin's gates and a finite ratio >= 0",
                             f"{field_name}.block_car")
