"""A DEF reader (the open LEF/DEF 5.8 standard): the design as the file states it.

``DefReader.read_header()`` reads everything before the NETS section that nets need:
UNITS, DIEAREA, VIAS (fixed shapes and generated ones), NONDEFAULTRULES widths,
COMPONENTS (macro, placement, orientation), PINS (ports, placement, ANTENNAPIN
statements); SPECIALNETS are counted and left out of antenna checks (power); other
sections are skipped with a warning. ``raw_nets()`` then streams the NETS section one
net at a time (``RawNet``: its pins and its regular wiring as written), and afterwards
reads the rest of the file up to END DESIGN, so a truncated file is still an error.
Nothing here needs the LEF: names are resolved when a net is bound (``_def_bind``).

A section's declared count that differs from what it holds is a warning naming the
section's line. Errors (``InputError``) name file:line and the keyword.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from enum import Enum
from pathlib import Path

from ._errors import InputError
from ._geometry import Rect
from ._lef_macro import pin_antenna
from ._lef_model import OXIDES, GeneratedVia, Located, PinAntenna
from ._lef_words import Words
from ._lefdef_geometry import (
    ORIENTATIONS,
    Orientation,
    bounding_box,
    normalized,
    rectilinear_pieces,
)
from ._lefdef_tokens import Notes, TokenStream, fail, line_of

# sections skipped whole (their statements are "- ... ;" up to END name)
_SKIPPED_SECTIONS = {"REGIONS", "PINPROPERTIES", "BLOCKAGES", "SLOTS", "FILLS", "SCANCHAINS", "GROUPS", "STYLES"}
_NEEDED_BEFORE_NETS = {"VIAS", "NONDEFAULTRULES", "COMPONENTS", "PINS"}
_QUIET = {"VERSION", "NAMESCASESENSITIVE", "DIVIDERCHAR", "BUSBITCHARS", "TECHNOLOGY"}
_WIRING = {"ROUTED", "FIXED", "COVER", "NOSHIELD"}
_PLACEMENT = {"PLACED", "FIXED", "COVER"}


class Item(Enum):
    """A routing point's kind in a wiring path."""

    POINT = 1  # (x, y, extension); x or y None for '*'
    VIA = 2  # (name, orientation or None)
    RECT = 3  # (dx1, dy1, dx2, dy2) relative to the last point
    VIRTUAL = 4  # (x, y): a jump without wire


@dataclass(slots=True)
class RawPath:
    layer: str
    line: int
    taper: bool  # TAPER: the layer's default width whatever the net's rule
    taper_rule: str | None
    items: list[tuple]


@dataclass(slots=True)
class RawNet:
    name: str
    line: int
    connections: list[tuple[str, str, int]]  # (component or PIN, pin, line)
    paths: list[RawPath]
    rule: str | None  # NONDEFAULTRULE


@dataclass
class DefVia:
    name: str
    at: Located
    shapes: dict[str, list[Rect]] = field(default_factory=dict)  # layer -> rects, DBU
    generated: GeneratedVia | None = None  # DBU values


@dataclass(slots=True)
class DefComponent:
    macro: str
    line: int
    placement: tuple[int, int, Orientation] | None  # None: UNPLACED


@dataclass
class DefPort:
    shapes: list[tuple[str, Rect]] = field(default_factory=list)  # relative to the placement
    vias: list[tuple[str, int, int]] = field(default_factory=list)
    placement: tuple[int, int, Orientation] | None = None


@dataclass
class DefPin:
    name: str
    net: str
    line: int
    ports: list[DefPort]
    antenna: PinAntenna
    special: bool = False


@dataclass
class DefHeader:
    source: str
    design: str = ""
    dbu: int | None = None
    die_area: tuple[int, int, int, int] | None = None
    vias: dict[str, DefVia] = field(default_factory=dict)
    ndr_widths: dict[str, dict[str, tuple[float, int]]] = field(default_factory=dict)  # DBU, line
    components: dict[str, DefComponent] = field(default_factory=dict)
    pins: dict[str, DefPin] = field(default_factory=dict)
    counts: dict[str, tuple[int, int, int]] = field(default_factory=dict)  # section -> (declared, found, line)
    special_nets: int = 0


def coordinate(word: str, source: str, line: int, keyword: str) -> int:
    try:
        return int(word)
    except ValueError:
        pass
    try:
        value = float(word)
    except ValueError:
        raise fail(source, line, keyword, f"expected a coordinate, got {word!r}") from None
    if value != int(value):
        raise fail(source, line, keyword, f"coordinates are whole DBU, got {word!r}")
    return int(value)


def split_plus(words: list[str], start: int) -> list[tuple[int, list[str]]]:
    """The '+'-separated groups of a statement from word ``start``: (index, words)."""
    n = len(words)
    if start < n and words[start] != "+":
        raise InputError(f"expected '+' before {words[start]!r}", "statement")
    groups: list[tuple[int, list[str]]] = []
    at = start
    while at < n:
        try:
            following = words.index("+", at + 1)
        except ValueError:
            following = n
        groups.append((at + 1, words[at + 1:following]))
        at = following
    return groups


class DefReader:
    def __init__(self, path: str | Path, notes: Notes | None = None) -> None:
        self.stream = TokenStream(path, notes)
        self.source = self.stream.source
        self.notes = self.stream.notes
        self.header = DefHeader(self.source)
        self._in_nets = False
        self._nets_declared = (0, 0)
        self._done = False

    # -- sections -------------------------------------------------------------------------

    def _declared(self, section: str) -> tuple[int, int]:
        """``SECTION count ;``: (count, line)."""
        line = self.stream.line
        words, _ = self.stream.statement(section)
        if len(words) != 1:
            raise self.stream.error(section, f"expected {section} count ;")
        return coordinate(words[0], self.source, line, section), line

    def _statements(self, section: str, declared_at: tuple[int, int] | None = None
                    ) -> Iterator[tuple[list[str], list[tuple[int, int]]]]:
        stream = self.stream
        declared, line = declared_at or self._declared(section)
        found = 0
        while True:
            word = stream.peek()
            if word is None:
                raise stream.error(section, f"the file ends inside {section} (truncated, or END {section} missing)")
            if word == "END":
                stream.next(section)
                closing = stream.next(f"END {section}")
                if closing != section:
                    raise stream.error("END", f"END {closing} where END {section} should close the section")
                break
            words, marks = stream.statement(section)
            if not words or words[0] != "-":
                raise fail(self.source, marks[0][1], section, f"expected '- name ...' in {section}, got {words[0]!r}")
            found += 1
            yield words, marks
        self.header.counts[section] = (declared, found, line)
        if declared != found:
            self.notes.warn(self.source, line, section, f"declares {declared} but holds {found}")

    @property
    def nets_declared(self) -> int:
        """The count the NETS section declares (0 before it is reached)."""
        return self._nets_declared[0]

    def read_header(self) -> DefHeader:
        """Everything up to the NETS section (or the end of the design)."""
        while not self._in_nets and not self._done:
            self._top_statement(before_nets=True)
        return self.header

    def _top_statement(self, before_nets: bool) -> None:
        stream = self.stream
        keyword = stream.next("END DESIGN")
        up = keyword.upper()
        line = stream.line
        if up == "END":
            closing = stream.next("END DESIGN")
            if closing.upper() != "DESIGN":
                raise stream.error("END", f"END {closing} outside any section (expected END DESIGN)")
            self._done = True
            return
        if not before_nets and up in _NEEDED_BEFORE_NETS:
            raise stream.error(up, f"{up} must come before NETS (nets need it)")
        if up == "UNITS":
            words, _ = stream.statement(up)
            if len(words) != 3 or [w.upper() for w in words[:2]] != ["DISTANCE", "MICRONS"]:
                raise fail(self.source, line, up, "expected UNITS DISTANCE MICRONS value ;")
            dbu = coordinate(words[2], self.source, line, up)
            if dbu <= 0:
                raise fail(self.source, line, up, f"database units per micron must be positive, got {dbu}")
            self.header.dbu = dbu
        elif up == "DESIGN":
            words, _ = stream.statement(up)
            self.header.design = words[0] if words else ""
        elif up == "DIEAREA":
            words, _ = stream.statement(up)
            values = [coordinate(w, self.source, line, up) for w in words if w not in ("(", ")")]
            if len(values) < 4 or len(values) % 2:
                raise fail(self.source, line, up, "expected DIEAREA ( x y ) ( x y ) ... ;")
            box = bounding_box(list(zip(values[0::2], values[1::2])))
            self.header.die_area = (int(box[0]), int(box[1]), int(box[2]), int(box[3]))
        elif up == "VIAS":
            for words, marks in self._statements(up):
                self._via(words, marks)
        elif up == "NONDEFAULTRULES":
            for words, marks in self._statements(up):
                self._ndr(words, marks)
        elif up == "COMPONENTS":
            for words, marks in self._statements(up):
                self._component(words, marks)
        elif up == "PINS":
            for words, marks in self._statements(up):
                self._pin(words, marks)
        elif up == "SPECIALNETS":
            for _ in self._statements(up):
                self.header.special_nets += 1
            self.notes.warn(self.source, line, up, "special (power) nets are left out of antenna checks")
        elif up == "NETS":
            if not before_nets:
                raise stream.error(up, "a second NETS section")
            self._nets_declared = self._declared(up)
            self._in_nets = True
        elif up in _SKIPPED_SECTIONS:
            for _ in self._statements(up):
                pass
            self.notes.warn(self.source, line, up, "section skipped (not used by the antenna model)")
        elif up == "PROPERTYDEFINITIONS":
            while stream.peek() != "END":
                stream.statement(up)
            stream.next(up)
            stream.expect("PROPERTYDEFINITIONS", "END PROPERTYDEFINITIONS")
            self.notes.warn(self.source, line, up, "section skipped (not used by the antenna model)")
        elif up == "BEGINEXT":
            while stream.next("BEGINEXT").upper() != "ENDEXT":
                pass
            self.notes.warn(self.source, line, up, "extension skipped")
        else:
            stream.statement(up)
            if up not in _QUIET:
                self.notes.warn(self.source, line, up, "statement skipped (not used by the antenna model)")

    # -- nets -----------------------------------------------------------------------------

    def raw_nets(self) -> Iterator[RawNet]:
        """Stream the NETS section, then read the rest of the file to END DESIGN."""
        if not self._in_nets and not self._done:
            self.read_header()
        if self._in_nets:
            for words, marks in self._statements("NETS", self._nets_declared):
                net = self._net(words, marks)
                if net is not None:
                    yield net
            self._in_nets = False
        while not self._done:
            self._top_statement(before_nets=False)

    def _net(self, words: list[str], marks: list[tuple[int, int]]) -> RawNet | None:
        source, line = self.source, marks[0][1]
        if len(words) < 2:
            raise fail(source, line, "NETS", "a net needs a name")
        name = words[1]
        i, n = 2, len(words)
        if name == "MUSTJOIN" and i < n and words[i] == "(":
            self.notes.warn(source, line, "MUSTJOIN", "a must-join net has no wiring of its own; skipped")
            return None
        connections: list[tuple[str, str, int]] = []
        while i < n and words[i] == "(":
            try:
                close = words.index(")", i)
            except ValueError:
                raise fail(source, line_of(marks, i), "NETS", f"net {name}: '(' without ')'") from None
            if close - i < 3:
                raise fail(source, line_of(marks, i), "NETS", f"net {name}: expected ( component pin )")
            connections.append((words[i + 1], words[i + 2], line_of(marks, i)))
            i = close + 1
        net = RawNet(name, line, connections, [], None)
        try:
            groups = split_plus(words, i)
        except InputError as exc:
            raise fail(source, line_of(marks, i), "NETS", f"net {name}: {exc.message}") from None
        wiring: list[tuple[int, list[str]]] = []
        for start, group in groups:
            key = group[0].upper() if group else ""
            if key in _WIRING:
                wiring.append((start + 1, group[1:]))
            elif key in ("RECT", "VIRTUAL") and wiring:
                wiring[-1][1].extend(group)  # '+ RECT' / '+ VIRTUAL' continue a path
            elif key == "NONDEFAULTRULE" and len(group) == 2:
                net.rule = group[1]
            elif key == "SUBNET":
                self._subnet(net, group, start, marks)
            else:
                self.notes.warn(source, line_of(marks, start), key or "+", "net attribute skipped "
                                "(not used by the antenna model)")
        for start, group in wiring:
            self._paths(net, group, start, marks)
        return net

    def _subnet(self, net: RawNet, group: list[str], start: int, marks: list[tuple[int, int]]) -> None:
        """+ SUBNET name ( comp pin )... [NONDEFAULTRULE r] [wiring]: part of the net."""
        i = 2
        while i < len(group) and group[i] == "(":
            close = group.index(")", i)
            if group[i + 1] != "VPIN":
                net.connections.append((group[i + 1], group[i + 2], line_of(marks, start + i)))
            i = close + 1
        if i < len(group) and group[i].upper() == "NONDEFAULTRULE":
            self.notes.warn(self.source, line_of(marks, start + i), "SUBNET",
                            "a subnet's own non-default rule is not applied; the net's widths are used")
            i += 2
        if i < len(group) and group[i].upper() in _WIRING:
            self._paths(net, group[i + 1:], start + i + 1, marks)

    def _paths(self, net: RawNet, words: list[str], start: int, marks: list[tuple[int, int]]) -> None:
        """``layer [TAPER | TAPERRULE r] [STYLE n] points [NEW layer ...]...``"""
        source = self.source
        i, n = 0, len(words)
        while i < n:
            line = line_of(marks, start + i)
            layer = words[i]
            i += 1
            taper, taper_rule = False, None
            if i < n and words[i] == "TAPER":
                taper, i = True, i + 1
            elif i < n and words[i] == "TAPERRULE":
                taper_rule, i = words[i + 1], i + 2
            if i < n and words[i] == "STYLE":
                self.notes.warn(source, line, "STYLE", "a wire style has no term in the model; the "
                                "segment is taken as a rectangle of the path's width")
                i += 2
            items: list[tuple] = []
            try:
                i = self._points(net, words, i, items, line)
            except IndexError:
                raise fail(source, line_of(marks, start + n - 1), "NETS",
                           f"net {net.name}: the wiring ends inside a routing point") from None
            net.paths.append(RawPath(layer, line, taper, taper_rule, items))
            i += 1  # past NEW

    def _points(self, net: RawNet, words: list[str], i: int, items: list[tuple], line: int) -> int:
        """Routing points, vias, RECT and VIRTUAL up to NEW or the end; the index after."""
        n = len(words)
        point, via = Item.POINT, Item.VIA
        while i < n:
            word = words[i]
            if word == "(":
                wx, wy, close = words[i + 1], words[i + 2], words[i + 3]
                try:
                    x = None if wx == "*" else int(wx)
                    y = None if wy == "*" else int(wy)
                except ValueError:
                    x = None if wx == "*" else coordinate(wx, self.source, line, "NETS")
                    y = None if wy == "*" else coordinate(wy, self.source, line, "NETS")
                if close == ")":
                    items.append((point, x, y, None))
                    i += 4
                    continue
                ext = coordinate(close, self.source, line, "NETS")
                if ext < 0 or words[i + 4] != ")":
                    raise fail(self.source, line, "NETS", f"net {net.name}: expected ( x y [extension >= 0] )")
                items.append((point, x, y, ext))
                i += 5
            elif word == "NEW":
                return i
            elif word == "MASK":
                i += 2
            elif word in ("RECT", "VIRTUAL"):
                count = 4 if word == "RECT" else 2
                if words[i + 1] != "(" or words[i + 2 + count] != ")":
                    raise fail(self.source, line, word, f"net {net.name}: expected {word} ( {count} numbers )")
                values = tuple(coordinate(w, self.source, line, word) for w in words[i + 2:i + 2 + count])
                items.append((Item.RECT if word == "RECT" else Item.VIRTUAL, *values))
                i += 3 + count
            else:
                orient = ORIENTATIONS.get(words[i + 1]) if i + 1 < n else None
                items.append((via, word, orient))
                i += 2 if orient is not None else 1
        return i

    # -- header statements ------------------------------------------------------------------

    def _via(self, words: list[str], marks: list[tuple[int, int]]) -> None:
        source, line = self.source, marks[0][1]
        name = words[1]
        via = DefVia(name, Located(source, line))
        gen: dict[str, Words] = {}
        groups: list[tuple[int, list[str]]] = []
        for start, group in split_plus(words, 2):
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
            from ._lef import generated_via
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

    def _ndr(self, words: list[str], marks: list[tuple[int, int]]) -> None:
        widths: dict[str, tuple[float, int]] = {}
        for start, group in split_plus(words, 2):
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
            raise fail(self.source, line, keyword, f"expected {group[0]} ( x y ) orientation (N, S, E, W, FN, FS, FE, FW)")
        return (coordinate(values[0], self.source, line, keyword),
                coordinate(values[1], self.source, line, keyword), ORIENTATIONS[values[2]])

    def _component(self, words: list[str], marks: list[tuple[int, int]]) -> None:
        line = marks[0][1]
        if len(words) < 3:
            raise fail(self.source, line, "COMPONENTS", "expected - name macro")
        name, macro = words[1], words[2]
        if (len(words) == 10 and words[3] == "+" and words[4] in _PLACEMENT and words[5] == "("
                and words[8] == ")" and words[9] in ORIENTATIONS and name not in self.header.components):
            # the common form, "- name macro + PLACED ( x y ) orient", without the general walk
            self.header.components[name] = DefComponent(macro, line, (
                coordinate(words[6], self.source, line, "COMPONENTS"),
                coordinate(words[7], self.source, line, "COMPONENTS"), ORIENTATIONS[words[9]]))
            return
        placement = None
        i = 3
        while i < len(words) and words[i] != "+":
            i += 1  # 5.x net names after the macro: not used
        for start, group in split_plus(words, i):
            key = group[0].upper() if group else ""
            if key in _PLACEMENT:
                placement = self._placement(group, line_of(marks, start), "COMPONENTS")
            elif key != "UNPLACED":
                self.notes.warn(self.source, line_of(marks, start), key, "component attribute skipped "
                                "(not used by the antenna model)")
        if name in self.header.components:
            raise fail(self.source, line, "COMPONENTS", f"component {name} is defined twice")
        self.header.components[name] = DefComponent(macro, line, placement)

    def _pin(self, words: list[str], marks: list[tuple[int, int]]) -> None:
        line = marks[0][1]
        pin = DefPin(words[1], "", line, [DefPort()], PinAntenna())
        oxide = OXIDES["OXIDE1"]
        for start, group in split_plus(words, 2):
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
                port.shapes.extend((group[1], r) for r in self._shape_rects(kind, values, Located(self.source, at_line)))
            elif key == "VIA":
                words_at = [w for w in group[2:] if w not in ("(", ")")]
                if words_at and words_at[0].upper() == "MASK":
                    words_at = words_at[2:]
                if len(words_at) != 2:
                    raise fail(self.source, at_line, key, "expected VIA name [MASK n] ( x y )")
                port.vias.append((group[1], coordinate(words_at[0], self.source, at_line, key),
                                  coordinate(words_at[1], self.source, at_line, key)))
            elif key in _PLACEMENT:
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
