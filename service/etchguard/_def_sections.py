"""The DEF header sections a net needs: VIAS, NONDEFAULTRULES, COMPONENTS and PINS.

One method per statement (``- name ... ;`` as words with their line marks), each
filling the reader's ``DefHeader``. Generated vias keep their via-rule parameters
(``_lef_via.generated_via``); polygons are cut into rectangles (slanted ones by their
bounding box, with a warning); placements are ``( x y ) orientation``.
"""

from __future__ import annotations

from ._def_model import (
    PLACEMENT,
    DefComponent,
    DefHeader,
    DefPin,
    DefPort,
    DefVia,
    coordinate,
    split_plus,
)
from ._errors import InputError
from ._geometry import Rect
from ._lef_macro import pin_antenna
from ._lef_model import OXIDES, Located, PinAntenna
from ._lef_via import generated_via
from ._lef_words import Words
from ._lefdef_geometry import (
    ORIENTATIONS,
    Orientation,
    bounding_box,
    normalized,
    rectilinear_pieces,
)
from ._lefdef_tokens import TokenStream, fail, line_of


class SectionReader:
    """Reads header statements into ``header``; warnings and errors name file:line."""

    def __init__(self, stream: TokenStream, header: DefHeader) -> None:
        self.stream, self.header = stream, header
        self.source, self.notes = stream.source, stream.notes

    def _groups(self, words: list[str], start: int, marks: list[tuple[int, int]],
                section: str) -> list[tuple[int, list[str]]]:
        try:
            return split_plus(words, start)
        except InputError as exc:
            raise fail(self.source, line_of(marks, start), section, exc.message) from None

    def via(self, words: list[str], marks: list[tuple[int, int]]) -> None:
        source, line = self.source, marks[0][1]
        name = words[1]
        via = DefVia(name, Located(source, line))
        gen: dict[str, Words] = {}
        groups: list[tuple[int, list[str]]] = []
        for start, group in self._groups(words, 2, marks, "VIAS"):
            if group and group[0].upper() == "MASK" and groups:
                groups[-1][1].extend(group[2:])  # '+ MASK n' then the points of the shape before it
            else:
                groups.append((start, group))
        for start, group in groups:
            key = group[0].upper() if group else ""
            at = Located(source, line_of(marks, start))
            if key in ("RECT", "POLYGON"):
                values = [coordinate(w, source, at.line, key) for w in group[2:] if w not in ("(", ")")]
                via.shapes.setdefault(group[1], []).extend(self._shape_rects(key, values, at))
            elif key in ("VIARULE", "CUTSIZE", "LAYERS", "CUTSPACING", "ENCLOSURE", "ROWCOL", "ORIGIN",
                         "OFFSET", "PATTERN"):
                gen[key] = Words.of(group[1:], key, at, self.stream)
            else:
                self.notes.warn(source, at.line, key, "via attribute skipped (not used by the antenna model)")
        if gen:
            via.generated = generated_via(gen, f"{source}:{line}: VIAS {name}")
        if name in self.header.vias:
            raise fail(source, line, "VIAS", f"via {name} is defined twice")
        self.header.vias[name] = via

    def _shape_rects(self, key: str, values: list[int], at: Located) -> list[Rect]:
        if key == "RECT":
            if len(values) != 4:
                raise fail(at.source, at.line, key, "expected RECT layer ( x y ) ( x y )")
            rect = normalized(*values)
            if rect is None:
                raise fail(at.source, at.line, key, "the rectangle has no area")
            return [rect]
        points = list(zip(values[0::2], values[1::2]))
        pieces = rectilinear_pieces(points)
        if pieces is None:
            self.notes.warn(at.source, at.line, key, "a polygon with slanted edges: its bounding box is used")
            pieces = [bounding_box(points)]
        return [(int(p[0]), int(p[1]), int(p[2]), int(p[3])) for p in pieces]

    def ndr(self, words: list[str], marks: list[tuple[int, int]]) -> None:
        widths: dict[str, tuple[float, int]] = {}
        for start, group in self._groups(words, 2, marks, "NONDEFAULTRULES"):
            if group and group[0].upper() == "LAYER":
                upper = [w.upper() for w in group]
                if "WIDTH" in upper:
                    at = upper.index("WIDTH")
                    width = Words.of(group[at + 1:at + 2], "WIDTH", Located(self.source, line_of(marks, start)),
                                     self.stream).number(0)
                    widths[group[1]] = (width, line_of(marks, start))
        self.header.ndr_widths[words[1]] = widths

    def _placement(self, group: list[str], line: int, keyword: str) -> tuple[int, int, Orientation]:
        values = [w for w in group[1:] if w not in ("(", ")")]
        if len(values) != 3 or values[2] not in ORIENTATIONS:
            raise fail(self.source, line, keyword,
                       f"expected {group[0]} ( x y ) orientation (N, S, E, W, FN, FS, FE, FW)")
        return (coordinate(values[0], self.source, line, keyword),
                coordinate(values[1], self.source, line, keyword), ORIENTATIONS[values[2]])

    def placed_components(self) -> int:
        """The COMPONENTS statements of the common form, one per line, that follow
        ("- name macro + PLACED ( x y ) orient ;", integer coordinates, a name not seen
        before), taken a line at a time without a statement's words and marks (a big
        design has hundreds of thousands); returns how many. It stops at any other line,
        which ``component`` then reads (and refuses, if it must)."""
        components = self.header.components
        stream = self.stream
        taken = 0
        for line, words in stream.whole_lines():
            if len(words) == 11:
                dash, name, macro, plus, kind, left, x, y, right, orient, end = words
                if (dash == "-" and plus == "+" and kind in PLACEMENT and left == "(" and right == ")"
                        and orient in ORIENTATIONS and end == ";" and name not in components):
                    try:
                        at = (int(x), int(y), ORIENTATIONS[orient])
                    except ValueError:
                        pass
                    else:
                        components[name] = DefComponent(macro, line, at)
                        taken += 1
                        continue
            stream.unread_line()
            break
        return taken

    def component(self, words: list[str], marks: list[tuple[int, int]]) -> None:
        line = marks[0][1]
        if len(words) < 3:
            raise fail(self.source, line, "COMPONENTS", "expected - name macro")
        name, macro = words[1], words[2]
        placement = None
        i = 3
        while i < len(words) and words[i] != "+":
            i += 1
        if i > 3:
            self.notes.warn(self.source, line, "COMPONENTS", "words between the macro and the first '+' are "
                            "skipped (old net lists, or a '+' missing)", subject=name)
        for start, group in self._groups(words, i, marks, "COMPONENTS"):
            key = group[0].upper() if group else ""
            if key in PLACEMENT:
                placement = self._placement(group, line_of(marks, start), "COMPONENTS")
            elif key != "UNPLACED":
                self.notes.warn(self.source, line_of(marks, start), key, "component attribute skipped "
                                "(not used by the antenna model)")
        if name in self.header.components:
            raise fail(self.source, line, "COMPONENTS", f"component {name} is defined twice")
        self.header.components[name] = DefComponent(macro, line, placement)

    def pin(self, words: list[str], marks: list[tuple[int, int]]) -> None:
        line = marks[0][1]
        pin = DefPin(words[1], "", line, [DefPort()], PinAntenna())
        oxide = OXIDES["OXIDE1"]
        for start, group in self._groups(words, 2, marks, "PINS"):
            key = group[0].upper() if group else ""
            at_line = line_of(marks, start)
            port = pin.ports[-1]
            if key == "NET":
                pin.net = group[1]
            elif key == "SPECIAL":
                pin.special = True
            elif key == "PORT":
                if port.shapes or port.vias or port.placement:
                    pin.ports.append(DefPort())
            elif key in ("LAYER", "POLYGON"):
                rest = [w for w in group[2:]]
                while rest and rest[0].upper() in ("MASK", "SPACING", "DESIGNRULEWIDTH"):
                    rest = rest[2:]
                values = [coordinate(w, self.source, at_line, key) for w in rest if w not in ("(", ")")]
                kind = "RECT" if key == "LAYER" else "POLYGON"
                located = Located(self.source, at_line)
                port.shapes.extend((group[1], r) for r in self._shape_rects(kind, values, located))
            elif key == "VIA":
                words_at = [w for w in group[2:] if w not in ("(", ")")]
                if words_at and words_at[0].upper() == "MASK":
                    words_at = words_at[2:]
                if len(words_at) != 2:
                    raise fail(self.source, at_line, key, "expected VIA name [MASK n] ( x y )")
                port.vias.append((group[1], coordinate(words_at[0], self.source, at_line, key),
                                  coordinate(words_at[1], self.source, at_line, key)))
            elif key in PLACEMENT:
                port.placement = self._placement(group, at_line, "PINS")
            elif key == "ANTENNAMODEL":
                if len(group) != 2 or group[1].upper() not in OXIDES:
                    raise fail(self.source, at_line, key, "expected OXIDE1..OXIDE4")
                oxide = OXIDES[group[1].upper()]
            elif key.startswith("ANTENNAPIN"):
                lef_key = "ANTENNA" + key[len("ANTENNAPIN"):]
                pin_antenna(pin.antenna, oxide, lef_key,
                            Words.of(group[1:], key, Located(self.source, at_line), self.stream))
            else:
                self.notes.warn(self.source, at_line, key, "pin attribute skipped (not used by the antenna model)")
        if pin.name in self.header.pins:
            raise fail(self.source, line, "PINS", f"pin {pin.name} is defined twice")
        self.header.pins[pin.name] = pin
