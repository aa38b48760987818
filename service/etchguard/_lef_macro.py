"""LEF MACROs: size, origin, class, and each pin's port geometry and antenna statements.

Port geometry is kept per layer in microns relative to the macro's LEF coordinates:
RECT, PATH (the port's WIDTH, else the layer's; half the width past each end), POLYGON
(rectilinear ones cut into rectangles; slanted ones by their bounding box, with a
warning), fixed VIAs, and the ITERATE forms. OBS, TIMING and DENSITY blocks are
skipped. Pin antenna statements follow the current ANTENNAMODEL where the standard
makes them oxide-dependent (gate area and the hierarchical ANTENNAMAX*CAR values).
"""

from __future__ import annotations

from itertools import pairwise

from ._lef_model import (
    OXIDES,
    Lef,
    Located,
    Macro,
    MacroPin,
    Measure,
    PinAntenna,
    RectUm,
)
from ._lef_words import Words, finish_block, rect_words, skip_until_end
from ._lefdef_geometry import bounding_box, rectilinear_pieces
from ._lefdef_tokens import TokenStream

_PARTIAL = {"ANTENNAPARTIALMETALAREA": Measure.AREA, "ANTENNAPARTIALMETALSIDEAREA": Measure.SIDE,
            "ANTENNAPARTIALCUTAREA": Measure.AREA}
_MAX_CAR = {"ANTENNAMAXAREACAR", "ANTENNAMAXSIDEAREACAR", "ANTENNAMAXCUTCAR"}


def read_macro(lef: Lef, stream: TokenStream, name: str, at: Located) -> Macro:
    macro = Macro(name, at)
    while True:
        keyword = stream.next(f"MACRO {name}").upper()
        if keyword == "END":
            finish_block(stream, "MACRO", name)
            return macro
        if keyword == "PIN":
            pin_name = stream.next("PIN")
            if pin_name in macro.pins:
                raise stream.error("PIN", f"pin {pin_name} of macro {name} is defined twice")
            macro.pins[pin_name] = _read_pin(lef, stream, pin_name, Located(stream.source, stream.line))
        elif keyword in ("OBS", "DENSITY"):
            stream.warn(keyword, "block skipped (not used by the antenna model)")
            _skip_to_bare_end(stream, keyword)
        elif keyword == "TIMING":
            stream.warn(keyword, "block skipped (not used by the antenna model)")
            skip_until_end(stream, "TIMING", "TIMING")
        else:
            words = Words(stream, keyword)
            if keyword == "CLASS":
                macro.class_words = tuple(w.upper() for w in words.items)
            elif keyword == "SIZE":
                if len(words) != 3 or words.text(1).upper() != "BY":
                    raise words.error("expected SIZE width BY height")
                macro.size = (words.number(0), words.number(2))
            elif keyword == "ORIGIN":
                values = [words.parse(w) for w in rect_words(words.items)]
                if len(values) != 2:
                    raise words.error("expected ORIGIN x y")
                macro.origin = (values[0], values[1])
            else:
                words.warn("macro statement skipped (not used by the antenna model)")


def _skip_to_bare_end(stream: TokenStream, keyword: str) -> None:
    while True:
        if stream.peek() is not None and stream.peek().upper() == "END":  # type: ignore[union-attr]
            stream.next(keyword)
            return
        stream.statement(keyword)


def _read_pin(lef: Lef, stream: TokenStream, name: str, at: Located) -> MacroPin:
    pin = MacroPin(name, at)
    oxide = OXIDES["OXIDE1"]
    while True:
        keyword = stream.next(f"PIN {name}").upper()
        if keyword == "END":
            finish_block(stream, "PIN", name)
            return pin
        if keyword == "PORT":
            _read_port(lef, stream, pin)
            continue
        words = Words(stream, keyword)
        if keyword == "DIRECTION":
            pin.direction = " ".join(words.items).upper()
        elif keyword == "USE":
            pin.use = words.text(0).upper()
        elif keyword == "ANTENNAMODEL":
            model = words.text(0).upper()
            if model not in OXIDES:
                raise words.error(f"expected OXIDE1..OXIDE4, got {model}")
            oxide = OXIDES[model]
        elif keyword.startswith("ANTENNA"):
            pin_antenna(pin.antenna, oxide, keyword, words)
        else:
            words.warn("pin statement skipped (not used by the antenna model)")


def _value_and_layer(words: Words) -> tuple[float, str | None]:
    if len(words) == 1:
        value, layer = words.number(0), None
    elif len(words) == 3 and words.text(1).upper() == "LAYER":
        value, layer = words.number(0), words.text(2)
    else:
        raise words.error("expected a value and optionally LAYER name")
    if value < 0:
        raise words.error(f"an area must be non-negative, got {words.text(0)}")
    return value, layer


def pin_antenna(antenna: PinAntenna, oxide: str, keyword: str, words: Words) -> None:
    """One pin antenna statement (LEF PIN, or DEF PINS with the ``ANTENNAPIN`` prefix
    turned into LEF's ``ANTENNA``)."""
    key = f"{keyword} {oxide}"
    if keyword == "ANTENNAGATEAREA":
        value, layer = _value_and_layer(words)
        if layer is None:
            if oxide in antenna.gate_area:
                words.warn(f"given again for oxide {oxide}; the later value is used")
            antenna.gate_area[oxide] = value
        else:
            antenna.gate_area_by_layer.setdefault(oxide, {})[layer] = value
    elif keyword == "ANTENNADIFFAREA":
        value, layer = _value_and_layer(words)
        if layer is None:
            if antenna.diff_area is not None:
                words.warn("given again; the later value is used")
            antenna.diff_area = value
        else:
            antenna.diff_area_by_layer[layer] = value
    elif keyword in _PARTIAL:
        value, layer = _value_and_layer(words)
        if layer is None:
            words.warn("without LAYER the layer of this in-cell area is not known; skipped")
            return
        slot = (_PARTIAL[keyword], layer)
        if slot in antenna.partial:
            words.warn("given again for the layer; the later value is used")
        antenna.partial[slot] = value
    elif keyword in _MAX_CAR:
        value, layer = _value_and_layer(words)
        if layer is None:
            raise words.error("needs LAYER name")
        antenna.max_car.append((keyword, oxide, layer, value))
    else:
        words.warn("pin antenna statement not in the model (skipped)")
        return
    antenna.at[key] = words.at


def _read_port(lef: Lef, stream: TokenStream, pin: MacroPin) -> None:
    layer: str | None = None
    width: float | None = None
    while True:
        keyword = stream.next(f"PORT of pin {pin.name}").upper()
        if keyword == "END":
            return
        words = Words(stream, keyword)
        if keyword == "LAYER":
            layer, width = words.text(0), None
            continue
        if keyword == "WIDTH":
            width = words.single_number(positive=True)
            continue
        if keyword == "CLASS":
            continue
        if keyword == "VIA":
            _port_via(lef, pin, words)
            continue
        if keyword not in ("RECT", "PATH", "POLYGON"):
            words.warn("port statement skipped (not used by the antenna model)")
            continue
        if layer is None:
            raise words.error("a shape before any LAYER")
        coords, copies = _iterate(words)
        if keyword == "RECT":
            if len(coords) != 4:
                raise words.error("expected RECT x1 y1 x2 y2")
            x1, y1, x2, y2 = coords
            shapes = [(min(x1, x2), min(y1, y2), max(x1, x2), max(y1, y2))]
        elif keyword == "PATH":
            shapes = _path(lef, words, layer, width, coords)
        else:
            points = list(zip(coords[0::2], coords[1::2]))
            pieces = rectilinear_pieces(points)
            if pieces is None:
                words.warn("a polygon with slanted edges: its bounding box is used")
                pieces = [bounding_box(points)]
            shapes = pieces
        for dx, dy in copies:
            pin.shapes.extend((layer, (r[0] + dx, r[1] + dy, r[2] + dx, r[3] + dy)) for r in shapes)


def _iterate(words: Words) -> tuple[list[float], list[tuple[float, float]]]:
    """Coordinates of a shape statement, and the offsets of its copies (ITERATE ... DO
    nx BY ny STEP dx dy; one copy at 0, 0 otherwise)."""
    items = words.items
    upper = [w.upper() for w in items]
    if "DO" not in upper:
        return [words.parse(w) for w in rect_words(items)], [(0.0, 0.0)]
    at = upper.index("DO")
    tail = items[at + 1:]
    if len(tail) != 6 or tail[1].upper() != "BY" or tail[3].upper() != "STEP":
        raise words.error("expected DO nx BY ny STEP dx dy")
    nx, ny = int(words.parse(tail[0])), int(words.parse(tail[2]))
    dx, dy = words.parse(tail[4]), words.parse(tail[5])
    return ([words.parse(w) for w in rect_words(items[:at])],
            [(i * dx, j * dy) for i in range(nx) for j in range(ny)])


def _path(lef: Lef, words: Words, layer: str, width: float | None, coords: list[float]) -> list[RectUm]:
    if width is None:
        info = lef.layer(layer)
        width = info.width if info is not None else None
    if width is None:
        words.warn(f"a PATH on {layer} without a WIDTH (port or layer); skipped")
        return []
    if len(coords) < 2 or len(coords) % 2:
        raise words.error("expected PATH x1 y1 [x2 y2 ...]")
    half = width / 2
    points = list(zip(coords[0::2], coords[1::2]))
    if len(points) == 1:
        x, y = points[0]
        return [(x - half, y - half, x + half, y + half)]
    out = []
    for (x1, y1), (x2, y2) in pairwise(points):
        if x1 != x2 and y1 != y2:
            words.warn("a slanted PATH segment: its bounding box grown by half the width is used")
        out.append((min(x1, x2) - half, min(y1, y2) - half, max(x1, x2) + half, max(y1, y2) + half))
    return out


def _port_via(lef: Lef, pin: MacroPin, words: Words) -> None:
    """VIA [ITERATE] [MASK n] x y viaName [DO nx BY ny STEP dx dy] ;"""
    items = rect_words(words.items)
    if len(items) not in (3, 10):
        raise words.error("expected VIA x y viaName [DO nx BY ny STEP dx dy]")
    x, y, name = words.parse(items[0]), words.parse(items[1]), items[2]
    copies = [(0.0, 0.0)]
    if len(items) == 10:
        tail = items[3:]
        if tail[0].upper() != "DO" or tail[2].upper() != "BY" or tail[4].upper() != "STEP":
            raise words.error("expected DO nx BY ny STEP dx dy")
        nx, ny = int(words.parse(tail[1])), int(words.parse(tail[3]))
        dx, dy = words.parse(tail[5]), words.parse(tail[6])
        copies = [(i * dx, j * dy) for i in range(nx) for j in range(ny)]
    via = lef.vias.get(name)
    if via is None:
        words.warn(f"unknown via {name}: its shapes in the pin are skipped")
        return
    if via.generated is not None:
        words.warn(f"via {name} is generated by a rule; its shapes in a pin are skipped")
        return
    for dx, dy in copies:
        for layer, rects in via.shapes.items():
            pin.shapes.extend((layer, (r[0] + x + dx, r[1] + y + dy, r[2] + x + dx, r[3] + y + dy))
                              for r in rects)
