"""DEF nets bound to a deck and a cell library: ``NetSpec``s the engine can check.

* Regular wiring (the contract's last paragraph): a segment between two routing points
  is a rectangle of the path's width (the net's NONDEFAULTRULE width on the layer, a
  TAPERRULE's, or the layer's WIDTH; TAPER returns to the layer's), extending half the
  width past each end unless the point gives its own extension; ``*`` repeats the
  previous coordinate; ``RECT`` is relative to the last point; ``VIRTUAL`` moves without
  a wire; a via is placed at the last point (oriented about its origin when DEF names an
  orientation) and switches the path to its other routing layer (a via of cuts alone
  leaves the path where it is). Odd widths lean one
  DBU up or right, as the package's runs do.
* Pins: a component pin is its macro pin's port shapes, moved by the macro ORIGIN,
  oriented and placed (``_lefdef_geometry``), on every process step it has shapes on
  (the pin joins at the lowest; its shapes are one conductor, each connecting at its
  own layer). Gate area
  per oxide, diffusion area and in-cell areas (ANTENNAPARTIALMETALAREA and
  ANTENNAPARTIALCUTAREA as ``cell_area`` on their layers, ANTENNAPARTIALMETALSIDEAREA as
  ``cell_side_area``, a side-wall area as the reference defines it) come from the LEF pin. Where a pin gives only
  per-LAYER gate or diffusion areas, the smallest is used (a warning says so: it gives
  the highest ratio). A DEF PIN is its ports placed, with its ANTENNAPIN values.
* A block pin's ANTENNAMAXAREACAR / ANTENNAMAXCUTCAR (area measure) and
  ANTENNAMAXSIDEAREACAR (side) on a layer, per ANTENNAMODEL oxide, become the pin's
  ``block_car`` for its gates of that oxide (how they enter the CAR: docs/formats.md).
* Not expressible in the engine, each a warning naming file:line: a side-wall in-cell
  area or ratio on a cut layer, a block ratio for an oxide the pin has no gate area of,
  shapes on layers
  that are not process steps of the deck (poly, contacts), unplaced components.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

from ._def_model import DefHeader, DefPin, RawNet, RawPath, coordinate
from ._geometry import Rect
from ._lef_model import (
    GeneratedVia,
    LayerKind,
    Lef,
    Located,
    MacroPin,
    Measure,
    PinAntenna,
)
from ._lefdef_geometry import ORIENTATIONS, Orientation, cut_array, place, placement_shift, to_dbu
from ._lefdef_tokens import Notes, fail
from ._nets import NetSpec, Pin, Shape, pin_copy, pin_fields, read_net, set_shape_layer, set_shape_rect
from ._rules import Deck

_N = Orientation.N
_blank = object.__new__  # a Shape without its fields (set_shape_layer, set_shape_rect)


class _PinTemplate:
    """A macro pin in macro-local DBU (origin applied), and the fields every placed copy
    of it shares (layers, areas: ``pin_fields``)."""

    __slots__ = ("fields", "rects")

    def __init__(self, layer: int, rects: list[Rect], rect_layers: tuple[int, ...], areas: _PinAreas) -> None:
        self.rects = rects
        self.fields = pin_fields(Pin("", layer, (), *areas, rect_layers))


# A pin's figures: gate area per oxide, diffusion, in-cell area and side-wall area per
# step, block ratios per (measure, step, oxide).
_PinAreas = tuple[dict[str, float], float, dict[int, float], dict[int, float], dict[tuple[str, int, str], float]]
_MAX_CAR_MEASURE = {"ANTENNAMAXAREACAR": "area", "ANTENNAMAXCUTCAR": "area", "ANTENNAMAXSIDEAREACAR": "side"}


class DesignBinder:
    """Turns ``RawNet``s of one DEF into ``NetSpec``s (one at a time, nothing kept but
    per-macro and per-via caches and the names of nets seen)."""

    def __init__(self, deck: Deck, lef: Lef, header: DefHeader, notes: Notes) -> None:
        self.deck, self.lef, self.header, self.notes = deck, lef, header, notes
        self.source = header.source
        self.dbu = deck.dbu_per_micron
        self.steps = deck.layer_index
        self._templates: dict[tuple[str, str], _PinTemplate | None] = {}
        self._oriented: dict[tuple[str, str, Orientation], tuple[dict[str, Any] | None, tuple[Rect, ...]]] = {}
        self._vias: dict[tuple[str, Orientation], tuple[list[tuple[int, Rect]], tuple[str, ...]]] = {}
        self._widths: dict[tuple[str | None, str], int] = {}
        self._via_moves: dict[tuple[str, str, str, str | None],
                              tuple[list[tuple[int, Rect]], bool, str, tuple[int, int] | None]] = {}
        self._seen: set[str] = set()
        for name, component in header.components.items():
            if component.macro not in lef.macros:
                raise fail(self.source, component.line, "COMPONENTS",
                           f"component {name}: macro {component.macro} is not in the LEF files")

    # -- layers and widths ------------------------------------------------------------------

    def _known(self, layer: str) -> bool:
        return layer in self.lef.other_layers or self.lef.layer(layer) is not None

    def _step(self, layer: str, line: int, keyword: str) -> int | None:
        """The deck step of a layer; None (with a warning) for a LEF layer that is not a
        process step; an error for a name nobody defined."""
        step = self.steps.get(layer)
        if step is not None:
            return step
        if self._known(layer):
            self.notes.warn(self.source, line, keyword, f"layer {layer} is not a process step of the deck "
                            "(not routing or cut, or a contact); its shapes are left out")
            return None
        raise fail(self.source, line, keyword, f"unknown layer {layer} (not in the LEF files)")

    def _width(self, rule: str | None, layer: str, line: int) -> int:
        key = (rule, layer)
        if key in self._widths:
            return self._widths[key]
        width: int | None = None
        if rule is not None:
            if rule in self.header.ndr_widths:
                value = self.header.ndr_widths[rule].get(layer)
                if value is not None:
                    width = int(value[0]) if value[0] == int(value[0]) else None
                    if width is None or width <= 0:
                        raise fail(self.source, value[1], "WIDTH", f"rule {rule}: width {value[0]:g} on {layer} "
                                   "is not a positive whole number of DBU")
            elif rule in self.lef.ndr_widths:
                um = self.lef.ndr_widths[rule].get(layer)
                if um is not None:
                    width = to_dbu(um, self.dbu)
                    if width is None:
                        raise fail(self.source, line, "NONDEFAULTRULE", f"rule {rule}: width {um:g} um on "
                                   f"{layer} is off the DBU grid")
            else:
                raise fail(self.source, line, "NONDEFAULTRULE", f"unknown non-default rule {rule}")
        if width is None:
            width = self.deck.layers[self.steps[layer]].wire_width
            if width is None:
                raise fail(self.source, line, "WIDTH", f"layer {layer} has no WIDTH in the LEF; a wire on it "
                           "has no width")
        self._widths[key] = width
        return width

    # -- vias -------------------------------------------------------------------------------

    def _via(self, name: str, orient: Orientation, line: int) -> tuple[list[tuple[int, Rect]], tuple[str, ...]]:
        """A via's shapes (deck step, rect about the via origin) and its routing layers."""
        key = (name, orient)
        cached = self._vias.get(key)
        if cached is not None:
            return cached
        shapes: dict[str, list[Rect]] = {}
        def_via = self.header.vias.get(name)
        lef_via = self.lef.vias.get(name)
        generated = def_via.generated if def_via is not None else (lef_via.generated if lef_via else None)
        scale = 1 if def_via is not None else self.dbu
        if generated is not None:
            shapes = self._generated(name, generated, scale, line)
        elif def_via is not None:
            shapes = def_via.shapes
        elif lef_via is not None:
            for layer, rects_um in lef_via.shapes.items():
                shapes[layer] = [self._rect_dbu(r, f"via {name}", lef_via.at) for r in rects_um]
        else:
            raise fail(self.source, line, "NETS", f"unknown via {name} (not in the DEF VIAS nor the LEF files)")
        placed: list[tuple[int, Rect]] = []
        routing: set[str] = set()
        for layer, rects in shapes.items():
            info = self.lef.layer(layer)
            if (info is not None and info.kind is LayerKind.ROUTING) or layer in self.lef.other_layers:
                routing.add(layer)
            step = self._step(layer, line, f"via {name}")
            if step is not None:
                placed.extend((step, r) for r in place(rects, orient, 0, 0))
        self._vias[key] = (placed, tuple(sorted(routing)))
        return self._vias[key]

    def _generated(self, name: str, gen: GeneratedVia, scale: int, line: int) -> dict[str, list[Rect]]:
        def dbu(value: float) -> int:
            out = to_dbu(value, scale) if scale != 1 else (int(value) if value == int(value) else None)
            if out is None:
                raise fail(self.source, line, "VIA", f"via {name}: {value:g} is off the DBU grid")
            return out
        enclosure, offset = gen.enclosure, gen.offset
        made = cut_array(dbu(gen.cut_size[0]), dbu(gen.cut_size[1]), dbu(gen.cut_spacing[0]),
                         dbu(gen.cut_spacing[1]), gen.rowcol[0], gen.rowcol[1],
                         (dbu(enclosure[0]), dbu(enclosure[1]), dbu(enclosure[2]), dbu(enclosure[3])),
                         (dbu(gen.origin[0]), dbu(gen.origin[1])),
                         (dbu(offset[0]), dbu(offset[1]), dbu(offset[2]), dbu(offset[3])))
        if made is None:
            raise fail(self.source, line, "VIA", f"via {name}: its cut array cannot be centred on the DBU grid")
        below, cuts, above = made
        bottom, cut, top = gen.layers
        return {bottom: [below], cut: cuts, top: [above]}

    def _rect_dbu(self, r: tuple[float, float, float, float], what: str, at: Located,
                  dx: float = 0.0, dy: float = 0.0) -> Rect:
        values = [to_dbu(v, self.dbu) for v in (r[0] + dx, r[1] + dy, r[2] + dx, r[3] + dy)]
        if any(v is None for v in values):
            raise fail(at.source, at.line, what, f"{r} is off the DBU grid at {self.dbu} per micron")
        return (values[0], values[1], values[2], values[3])  # type: ignore[return-value]

    # -- pins -------------------------------------------------------------------------------

    def _areas(self, antenna: PinAntenna, what: str, at: Located) -> _PinAreas:
        gate = dict(antenna.gate_area)
        for oxide, by_layer in antenna.gate_area_by_layer.items():
            if oxide not in gate and by_layer:
                gate[oxide] = min(by_layer.values())
                self.notes.warn(at.source, at.line, "ANTENNAGATEAREA", f"{what}: only per-LAYER gate areas; "
                                "the smallest is used (the highest ratio)")
        diff = antenna.diff_area
        if diff is None and antenna.diff_area_by_layer:
            diff = min(antenna.diff_area_by_layer.values())
            self.notes.warn(at.source, at.line, "ANTENNADIFFAREA", f"{what}: only per-LAYER diffusion areas; "
                            "the smallest is used (the highest ratio)")
        cell: dict[int, float] = {}
        cell_side: dict[int, float] = {}
        for (measure, layer), value in antenna.partial.items():
            step = self.steps.get(layer)
            if step is None:
                self.notes.warn(at.source, at.line, "ANTENNAPARTIAL", f"{what}: in-cell area on {layer}, "
                                "which is not a process step of the deck; left out")
                continue
            if measure is Measure.SIDE:
                if not self.deck.layers[step].is_routing:
                    self.notes.warn(at.source, at.line, "ANTENNAPARTIALMETALSIDEAREA", f"{what}: a side-wall "
                                    f"area on cut layer {layer}; left out")
                    continue
                cell_side[step] = value  # a side-wall area already (perimeter x thickness)
                continue
            cell[step] = value
        gate = {k: v for k, v in gate.items() if v > 0}
        return gate, diff or 0.0, cell, cell_side, self._block_car(antenna, gate, what, at)

    def _block_car(self, antenna: PinAntenna, gate: dict[str, float], what: str,
                   at: Located) -> dict[tuple[str, int, str], float]:
        block: dict[tuple[str, int, str], float] = {}
        for keyword, oxide, layer, value in antenna.max_car:
            measure, step = _MAX_CAR_MEASURE[keyword], self.steps.get(layer)
            if step is None:
                problem = f"on {layer}, which is not a process step of the deck"
            elif measure == "side" and not self.deck.layers[step].is_routing:
                problem = f"a side-wall ratio on cut layer {layer}"
            elif oxide not in gate:
                problem = f"for oxide {oxide}, which the pin has no gate area of"
            else:
                block[(measure, step, oxide)] = value  # a later statement for the same slot wins
                continue
            self.notes.warn(at.source, at.line, keyword, f"{what}: {problem}; left out")
        return block

    @staticmethod
    def _layered(shapes: list[tuple[int, Rect]]) -> tuple[int, list[Rect], tuple[int, ...]] | None:
        """A pin's shapes as (lowest step, rectangles, their steps; none when all on one)."""
        if not shapes:
            return None
        lowest = min(step for step, _ in shapes)
        steps = tuple(step for step, _ in shapes)
        return lowest, [r for _, r in shapes], steps if any(s != lowest for s in steps) else ()

    def _template(self, macro_name: str, pin_name: str, line: int) -> _PinTemplate | None:
        key = (macro_name, pin_name)
        if key in self._templates:
            return self._templates[key]
        macro = self.lef.macros[macro_name]
        pin: MacroPin | None = macro.pins.get(pin_name)
        if pin is None:
            raise fail(self.source, line, "NETS", f"macro {macro_name} has no pin {pin_name}")
        what = f"pin {pin_name} of {macro_name}"
        shapes = []
        for layer, rect in pin.shapes:
            step = self.steps.get(layer)
            if step is None:
                if not self._known(layer):
                    raise fail(pin.at.source, pin.at.line, "PIN", f"{what}: unknown layer {layer}")
                continue
            shapes.append((step, self._rect_dbu(rect, "PIN", pin.at, macro.origin[0], macro.origin[1])))
        one = self._layered(shapes)
        template = None
        if one is None:
            self.notes.warn(pin.at.source, pin.at.line, "PIN", f"{what} has no shape on a process step of the "
                            "deck; it is left out of its nets")
        else:
            template = _PinTemplate(one[0], one[1], one[2], self._areas(pin.antenna, what, pin.at))
        self._templates[key] = template
        return template

    def _component_pin(self, comp_name: str, pin_name: str, line: int) -> Pin | None:
        component = self.header.components.get(comp_name)
        if component is None:
            raise fail(self.source, line, "NETS", f"unknown component {comp_name}")
        placement = component.placement
        if placement is None:
            if self._template(component.macro, pin_name, line) is not None:
                self.notes.warn(self.source, component.line, "COMPONENTS", "a component that is not placed: "
                                "its pins are left out of their nets", subject=comp_name)
            return None
        x, y, orient = placement
        oriented = self._oriented.get((component.macro, pin_name, orient))
        if oriented is None:
            oriented = self._orient(component.macro, pin_name, orient, line)
        fields, rects = oriented
        if fields is None:
            return None
        if len(rects) == 1:  # the common case, without a comprehension's frame
            r = rects[0]
            placed: tuple[Rect, ...] = ((r[0] + x, r[1] + y, r[2] + x, r[3] + y),)
        else:
            placed = tuple([(r[0] + x, r[1] + y, r[2] + x, r[3] + y) for r in rects])
        return pin_copy(fields, f"{comp_name}.{pin_name}", placed)

    def _orient(self, macro_name: str, pin_name: str, orient: Orientation, line: int
                ) -> tuple[dict[str, Any] | None, tuple[Rect, ...]]:
        """A macro pin's fields and its rectangles oriented as placed at 0, 0 (kept per
        macro, pin and orientation; a placed pin is these moved by the placement point)."""
        template = self._template(macro_name, pin_name, line)
        oriented: tuple[dict[str, Any] | None, tuple[Rect, ...]] = (None, ())
        if template is not None:
            macro = self.lef.macros[macro_name]
            if macro.size is None and orient is not _N:
                raise fail(macro.at.source, macro.at.line, "SIZE", f"macro {macro.name} has no SIZE, so it "
                           f"cannot be placed in orientation {orient.name}")
            width, height = (self._size(macro.size, macro.at) if macro.size else (0, 0))
            # oriented about the origin and moved so that the box's lower-left is at 0, 0
            bx, by = placement_shift(orient, width, height, 0, 0)
            oriented = (template.fields, tuple(place(template.rects, orient, bx, by)))
        self._oriented[(macro_name, pin_name, orient)] = oriented
        return oriented

    def _size(self, size: tuple[float, float], at: Located) -> tuple[int, int]:
        w, h = to_dbu(size[0], self.dbu), to_dbu(size[1], self.dbu)
        if w is None or h is None:
            raise fail(at.source, at.line, "SIZE", f"macro size {size[0]:g} x {size[1]:g} is off the DBU grid")
        return w, h

    def _io_pin(self, name: str, line: int) -> Pin | None:
        pin: DefPin | None = self.header.pins.get(name)
        if pin is None:
            raise fail(self.source, line, "NETS", f"unknown design pin {name} (not in PINS)")
        at = Located(self.source, pin.line)
        shapes: list[tuple[int, Rect]] = []
        for port in pin.ports:
            if not port.shapes and not port.vias:
                continue
            if port.placement is None:
                self.notes.warn(self.source, pin.line, "PINS", f"pin {name} has a port that is not placed; "
                                "it is left out")
                continue
            x, y, orient = port.placement
            for layer, rect in port.shapes:
                step = self._step(layer, pin.line, "PINS")
                if step is not None:
                    shapes.extend((step, r) for r in place([rect], orient, x, y))
            for via_name, vx, vy in port.vias:
                for step, r in self._via(via_name, _N, pin.line)[0]:
                    shapes.extend((step, o) for o in place([(r[0] + vx, r[1] + vy, r[2] + vx, r[3] + vy)],
                                                          orient, x, y))
        one = self._layered(shapes)
        if one is None:
            self.notes.warn(self.source, pin.line, "PINS", f"pin {name} has no placed shape on a process "
                            "step; it is left out of its net")
            return None
        return Pin(f"PIN {name}", one[0], tuple(one[1]), *self._areas(pin.antenna, f"pin {name}", at), one[2])

    # -- nets -------------------------------------------------------------------------------

    def spec(self, raw: RawNet) -> NetSpec:
        if raw.name in self._seen:
            raise fail(self.source, raw.line, "NETS", f"net {raw.name} appears twice")
        self._seen.add(raw.name)
        pins: list[Pin] = []
        names: set[str] = set()
        for comp, pin_name, line in raw.connections:
            if comp == "*":
                self.notes.warn(self.source, line, "NETS", "a '*' connection (every component) is left out")
                continue
            pin = self._io_pin(pin_name, line) if comp == "PIN" else self._component_pin(comp, pin_name, line)
            if pin is not None and pin.name not in names:
                names.add(pin.name)
                pins.append(pin)
        shapes: list[Shape] = []
        for path in raw.paths:
            self._wire(raw, path, shapes)
        return read_net(raw.name, tuple(pins), tuple(shapes))

    def _wire(self, raw: RawNet, path: RawPath, shapes: list[Shape]) -> None:
        """The path's shapes, its routing points walked once (shapes built inline, as
        ``_nets`` says: a read makes one per segment and three per via)."""
        line = path.line
        layer = path.layer
        step = self._step(layer, line, "NETS")
        if step is None:
            return
        if not self.deck.layers[step].is_routing:
            raise fail(self.source, line, "NETS", f"net {raw.name}: wiring on cut layer {layer}")
        rule = None if path.taper else (path.taper_rule or raw.rule)
        width = self._width(rule, layer, line)
        half = width // 2
        px: int | None = None
        py: int | None = None
        pext: int | None = None
        words, i, n = path.words, 0, len(path.words)
        append = shapes.append
        try:
            while i < n:
                word = words[i]
                if word == "(":  # ( x y [extension] ), '*' repeating the previous x or y
                    wx, wy = words[i + 1], words[i + 2]
                    try:
                        x = px if wx == "*" else int(wx)
                        y = py if wy == "*" else int(wy)
                    except ValueError:
                        x, y = self._point(wx, wy, px, py, line)
                    if words[i + 3] == ")":
                        ext, i = None, i + 4
                    else:
                        ext, i = self._extension(raw, words, i, line), i + 5
                    if x is None or y is None:
                        raise fail(self.source, line, "NETS", f"net {raw.name}: '*' before any point")
                    if px is not None:
                        # a segment: the path's width, half of it past each end unless the
                        # point gives its own extension; odd widths lean one DBU up or right
                        d1 = half if pext is None else pext
                        d2 = half if ext is None else ext
                        if py == y and (px != x or self.deck.layers[step].direction == "horizontal"):
                            rect = ((x - d2, y - half, px + d1, y - half + width) if px > x
                                    else (px - d1, y - half, x + d2, y - half + width))
                        elif px == x:
                            rect = ((x - half, y - d2, x - half + width, py + d1) if py > y  # type: ignore[operator]
                                    else (x - half, py - d1, x - half + width, y + d2))  # type: ignore[operator]
                        else:
                            raise fail(self.source, line, "NETS", f"net {raw.name}: segment ({px} {py}) to "
                                       f"({x} {y}) is neither horizontal nor vertical")
                        shape = _blank(Shape)
                        set_shape_layer(shape, step)
                        set_shape_rect(shape, rect)
                        append(shape)
                    px, py, pext = x, y, ext
                elif word == "MASK":
                    i += 2
                elif word == "RECT" or word == "VIRTUAL":
                    values, i = self._relative(raw, words, i, line)
                    if word == "VIRTUAL":
                        px, py, pext = values[0], values[1], None
                        continue
                    if px is None or py is None:
                        raise fail(self.source, line, "RECT", f"net {raw.name}: RECT before any point")
                    x1, y1, x2, y2 = px + values[0], py + values[1], px + values[2], py + values[3]
                    if x1 == x2 or y1 == y2:
                        raise fail(self.source, line, "RECT", f"net {raw.name}: the rectangle has no area")
                    append(Shape(step, (min(x1, x2), min(y1, y2), max(x1, x2), max(y1, y2))))
                else:  # a via, placed at the last point; it switches the path's layer
                    orient = words[i + 1] if i + 1 < n and words[i + 1] in ORIENTATIONS else ""
                    i += 2 if orient else 1
                    if px is None or py is None:
                        raise fail(self.source, line, "NETS", f"net {raw.name}: via {word} before any point")
                    move = self._via_moves.get((word, orient, layer, rule))
                    if move is None:
                        move = self._via_move(raw, word, orient, layer, rule, line)
                    placed, moves, layer, after = move
                    for s, r in placed:
                        shape = _blank(Shape)
                        set_shape_layer(shape, s)
                        set_shape_rect(shape, (r[0] + px, r[1] + py, r[2] + px, r[3] + py))
                        append(shape)
                    if not moves:
                        continue  # cuts only: placed, the path stays on its layer
                    if after is None:
                        return  # the rest of the path runs on a layer the deck does not hold
                    step, width = after
                    half, pext = width // 2, None
        except IndexError:
            raise fail(self.source, line, "NETS", f"net {raw.name}: the wiring ends inside a routing point") from None

    def _via_move(self, raw: RawNet, via: str, orient: str, layer: str, rule: str | None, line: int
                  ) -> tuple[list[tuple[int, Rect]], bool, str, tuple[int, int] | None]:
        """What via ``via`` (``orient`` its DEF orientation word, or "") does to a path on
        ``layer``: its shapes about the point, whether it moves the path, the layer after
        it and (step, width) there (None: not a deck step). Kept per via, orientation,
        layer and rule, except when the layer after is not a deck step (so that its
        warning counts every time, as any other)."""
        placed, routing = self._via(via, ORIENTATIONS[orient] if orient else _N, line)
        move: tuple[list[tuple[int, Rect]], bool, str, tuple[int, int] | None]
        if not routing:
            move = (placed, False, layer, None)
        else:
            after = self._next_layer(raw, via, layer, routing, line)
            step = self._step(after, line, "NETS")
            move = (placed, True, after, None if step is None else (step, self._width(rule, after, line)))
        if not move[1] or move[3] is not None:
            self._via_moves[(via, orient, layer, rule)] = move
        return move

    def _point(self, wx: str, wy: str, px: int | None, py: int | None, line: int) -> tuple[int | None, int | None]:
        """A point whose coordinates are not plain integers (``1.0e3``), or an error."""
        return (px if wx == "*" else coordinate(wx, self.source, line, "NETS"),
                py if wy == "*" else coordinate(wy, self.source, line, "NETS"))

    def _extension(self, raw: RawNet, words: list[str], i: int, line: int) -> int:
        """The extension of ``( x y extension )`` at word i."""
        ext = coordinate(words[i + 3], self.source, line, "NETS")
        if ext < 0 or words[i + 4] != ")":
            raise fail(self.source, line, "NETS", f"net {raw.name}: expected ( x y [extension >= 0] )")
        return ext

    def _relative(self, raw: RawNet, words: list[str], i: int, line: int) -> tuple[tuple[int, ...], int]:
        """``RECT ( 4 numbers )`` or ``VIRTUAL ( 2 numbers )`` at word i: the numbers and
        the index after them."""
        word = words[i]
        count = 4 if word == "RECT" else 2
        if words[i + 1] != "(" or words[i + 2 + count] != ")":
            raise fail(self.source, line, word, f"net {raw.name}: expected {word} ( {count} numbers )")
        values = tuple(coordinate(w, self.source, line, word) for w in words[i + 2:i + 2 + count])
        return values, i + 3 + count

    def _next_layer(self, raw: RawNet, via: str, layer: str, routing: tuple[str, ...], line: int) -> str:
        """The routing layer a via takes the path to from ``layer``."""
        if layer not in routing:
            raise fail(self.source, line, "NETS", f"net {raw.name}: via {via} does not land on {layer}")
        if len(routing) == 2:
            return routing[1] if routing[0] == layer else routing[0]
        if len(routing) != 1:
            raise fail(self.source, line, "NETS", f"net {raw.name}: via {via} joins "
                       f"{', '.join(routing)}: not one layer to another")
        return layer


def bound_nets(binder: DesignBinder, raws: Iterator[RawNet]) -> Iterator[NetSpec]:
    """One NetSpec per DEF net, as the reader streams them."""
    return map(binder.spec, raws)  # (a generator of its own would cost a frame switch per net)
