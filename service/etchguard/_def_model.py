"""What a DEF reader keeps of a design, as the file states it (DBU, names unresolved).

``RawNet`` is one net of the NETS section: its connections and its regular wiring as
written (``RawPath``s, their routing points as words); the header records hold the VIAS,
COMPONENTS and PINS a net needs. ``coordinate`` and ``split_plus`` are the two word
helpers every DEF statement uses.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from ._errors import InputError
from ._geometry import Rect
from ._lef_model import GeneratedVia, Located, PinAntenna
from ._lefdef_geometry import Orientation
from ._lefdef_tokens import fail

WIRING = {"ROUTED", "FIXED", "COVER", "NOSHIELD"}
PLACEMENT = {"PLACED", "FIXED", "COVER"}


@dataclass(slots=True)
class RawPath:
    layer: str
    line: int
    taper: bool  # TAPER: the layer's default width whatever the net's rule
    taper_rule: str | None
    # routing points as written, up to the next NEW: "( x y [ext] )" ('*' repeats the
    # previous coordinate), "via [orientation]", "RECT ( dx1 dy1 dx2 dy2 )" relative to
    # the last point, "VIRTUAL ( x y )" (a jump without wire), "MASK n"
    words: list[str]


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
    if not math.isfinite(value) or value != int(value):
        raise fail(source, line, keyword, f"coordinates are whole DBU, got {word!r}")
    return int(value)


def split_plus(words: list[str], start: int) -> list[tuple[int, list[str]]]:
    """The '+'-separated groups of a statement from word ``start``: (index, words)."""
    n = len(words)
    if start < n and words[start] != "+":
        raise InputError(f"expected '+' before {words[start]!r}", "statement")
    groups: list[tuple[int, list[str]]] = []
    at = start
    left = words[start + 1:].count("+")  # the '+' words after the first
    while at < n:
        following = words.index("+", at + 1) if left else n  # (a missed index would raise: slower)
        left -= 1
        groups.append((at + 1, words[at + 1:following]))
        at = following
    return groups
