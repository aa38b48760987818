"""Geometry of the LEF/DEF standard in integer DBU: orientations, placement, vias.

Orientations (LEF/DEF 5.8 language reference, "Specifying Orientation"; quoted from
memory): N is as drawn; W is rotated 90 degrees counterclockwise, S 180 degrees, E 90
degrees clockwise; FN is mirrored about the y axis; FW, FS and FE are FN followed by
the rotation of W, S and E. As point maps about the origin:

    N (x, y)    W (-y, x)    S (-x, -y)    E (y, -x)
    FN (-x, y)  FW (-y, -x)  FS (x, -y)    FE (y, x)

A placed component's macro box (0, 0, width, height) is oriented and then moved so
that its lower-left corner lands on the placement point (DEF COMPONENTS, PLACED/FIXED:
"the lower-left corner of the component's bounding box after orientation"). A via or
a DEF pin is oriented about its own origin and moved by the point.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from enum import Enum
from itertools import pairwise

from ._geometry import Rect


class Orientation(Enum):
    N = (1, 0, 0, 1)
    W = (0, -1, 1, 0)
    S = (-1, 0, 0, -1)
    E = (0, 1, -1, 0)
    FN = (-1, 0, 0, 1)
    FW = (0, -1, -1, 0)
    FS = (1, 0, 0, -1)
    FE = (0, 1, 1, 0)

    # Members are singletons compared by identity, so identity hashing is the same
    # equality; Enum's own __hash__ runs in Python, and a DEF read looks up a cache
    # keyed by orientation for every pin and via it places.
    __hash__ = object.__hash__

    def point(self, x: int, y: int) -> tuple[int, int]:
        a, b, c, d = self.value
        return a * x + b * y, c * x + d * y

    def rect(self, r: Rect) -> Rect:
        x1, y1 = self.point(r[0], r[1])
        x2, y2 = self.point(r[2], r[3])
        return (min(x1, x2), min(y1, y2), max(x1, x2), max(y1, y2))


ORIENTATIONS = {o.name: o for o in Orientation}


def placement_shift(orient: Orientation, width: int, height: int, x: int, y: int) -> tuple[int, int]:
    """The translation that puts the oriented macro box's lower-left corner on (x, y)."""
    box = orient.rect((0, 0, width, height))
    return x - box[0], y - box[1]


def place(rects: Iterable[Rect], orient: Orientation, dx: int, dy: int) -> list[Rect]:
    out = []
    for r in rects:
        o = orient.rect(r)
        out.append((o[0] + dx, o[1] + dy, o[2] + dx, o[3] + dy))
    return out


def to_dbu(value_um: float, dbu: int) -> int | None:
    """Microns to DBU, or None when the value is off the DBU grid."""
    scaled = value_um * dbu
    nearest = round(scaled)
    if abs(scaled - nearest) > 1e-6 * max(1.0, abs(scaled)):
        return None
    return int(nearest)


def normalized(x1: int, y1: int, x2: int, y2: int) -> Rect | None:
    """The rectangle spanned by two corners, or None when it has no area."""
    r = (min(x1, x2), min(y1, y2), max(x1, x2), max(y1, y2))
    return r if r[0] < r[2] and r[1] < r[3] else None


def rectilinear_pieces(points: Sequence[tuple[float, float]]) -> list[tuple[float, float, float, float]] | None:
    """A rectilinear polygon cut into rectangles (vertical slabs, even-odd rule), or None
    when an edge is not horizontal or vertical. Units are those of the points."""
    pts = list(points)
    if len(pts) > 1 and pts[0] == pts[-1]:
        pts.pop()
    if len(pts) < 4:
        return None
    edges = list(zip(pts, pts[1:] + pts[:1]))
    if any(a[0] != b[0] and a[1] != b[1] for a, b in edges):
        return None
    horizontal = [(a[1], min(a[0], b[0]), max(a[0], b[0])) for a, b in edges if a[1] == b[1] and a[0] != b[0]]
    xs = sorted({p[0] for p in pts})
    pieces = []
    for x0, x1 in pairwise(xs):
        ys = sorted(y for y, lo, hi in horizontal if lo <= x0 and hi >= x1)
        for y0, y1 in zip(ys[0::2], ys[1::2]):
            if y0 < y1:
                pieces.append((x0, y0, x1, y1))
    return pieces


def bounding_box(points: Sequence[tuple[float, float]]) -> tuple[float, float, float, float]:
    xs = [p[0] for p in points]
    ys = [p[1] for p in points]
    return (min(xs), min(ys), max(xs), max(ys))


def cut_array(cut_x: int, cut_y: int, space_x: int, space_y: int, rows: int, cols: int,
              enclosure: tuple[int, int, int, int], origin: tuple[int, int] = (0, 0),
              offset: tuple[int, int, int, int] = (0, 0, 0, 0)) -> tuple[Rect, list[Rect], Rect] | None:
    """A generated via (DEF VIAS ``+ VIARULE``, LEF ``VIA ... VIARULE``; quoted from
    memory): a rows x cols array of cuts centred on the via origin, each metal the array
    grown by its (x, y) enclosure and moved by its offset, then everything moved by the
    origin. Returns (bottom metal, cuts, top metal), or None when the centring puts a
    shape off the integer grid (an odd array extent)."""
    width = cols * cut_x + (cols - 1) * space_x
    height = rows * cut_y + (rows - 1) * space_y
    if width % 2 or height % 2:
        return None
    left, bottom = -width // 2 + origin[0], -height // 2 + origin[1]
    cuts = []
    for row in range(rows):
        for col in range(cols):
            x = left + col * (cut_x + space_x)
            y = bottom + row * (cut_y + space_y)
            cuts.append((x, y, x + cut_x, y + cut_y))
    ex_b, ey_b, ex_t, ey_t = enclosure
    ox_b, oy_b, ox_t, oy_t = offset
    below = (left - ex_b + ox_b, bottom - ey_b + oy_b, left + width + ex_b + ox_b, bottom + height + ey_b + oy_b)
    above = (left - ex_t + ox_t, bottom - ey_t + oy_t, left + width + ex_t + ox_t, bottom + height + ey_t + oy_t)
    return below, cuts, above
