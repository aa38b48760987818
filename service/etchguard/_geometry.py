"""Rectangles in integer database units (DBU) and the exact measures of their unions.

A rectangle is a tuple ``(xlo, ylo, xhi, yhi)`` of ints, closed, with ``xlo < xhi`` and
``ylo < yhi``. Areas come out in DBU^2 and perimeters in DBU, as exact integers, so
that callers convert to um once, at the edge.

Union measures are the compiled core's plane sweep (core/src/geometry.cpp, which states
the method and cites it): holes are counted, and touching rectangles (shared edges)
contribute no boundary inside.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

from . import _core
from ._errors import InputError
from ._names import shown

Rect = tuple[int, int, int, int]

# Coordinates stay well inside int64 even after squaring differences for areas,
# computed in Python ints anyway, but a C++ router speaks int64: keep to +-2^62.
COORD_LIMIT = 1 << 62


def checked_rect(values: Sequence[object], field: str) -> Rect:
    """Validate four coordinates and return them as a rectangle, or raise InputError."""
    if not isinstance(values, (list, tuple)):
        raise InputError(f"a rectangle is a list of 4 integer DBU coordinates, got {shown(values)}", field)
    if len(values) != 4:
        raise InputError(f"a rectangle needs 4 coordinates, got {len(values)}", field)
    out = []
    for value in values:
        if isinstance(value, bool) or not isinstance(value, int):
            if isinstance(value, float) and value.is_integer():
                value = int(value)
            else:
                raise InputError(f"coordinates are integer DBU, got {shown(value)}", field)
        if not -COORD_LIMIT < value < COORD_LIMIT:
            raise InputError(f"coordinate {shown(value)} is not strictly inside +-2^62 DBU", field)
        out.append(value)
    xlo, ylo, xhi, yhi = out
    if xlo >= xhi or ylo >= yhi:
        raise InputError(f"rectangle {out} is empty or inverted (need xlo < xhi, ylo < yhi)", field)
    return (xlo, ylo, xhi, yhi)


def edge_touch(a: Rect, b: Rect) -> bool:
    """Same-layer contact: positive-area overlap or a shared edge of positive length."""
    ix = min(a[2], b[2]) - max(a[0], b[0])
    iy = min(a[3], b[3]) - max(a[1], b[1])
    return ix >= 0 and iy >= 0 and (ix > 0 or iy > 0)


def overlap(a: Rect, b: Rect) -> bool:
    """Positive-area overlap (a cut landing on metal)."""
    return min(a[2], b[2]) > max(a[0], b[0]) and min(a[3], b[3]) > max(a[1], b[1])


def union_measures(rects: Iterable[Rect]) -> tuple[int, int]:
    """Exact (area DBU^2, perimeter DBU) of the union of closed rectangles (the core's
    sweep: one implementation of the union measures in the package)."""
    return _core.union_measures([tuple(r) for r in rects])


def run_rect(x1: int, y1: int, x2: int, y2: int, width: int, extension: int | None = None) -> Rect:
    """The rectangle of a straight run along its centre line.

    The run extends ``extension`` DBU past each end point (``width // 2`` when None,
    as routed wires usually do). The centre line must be horizontal or vertical; an
    odd width leans one DBU to the upper or right side.
    """
    if width <= 0:
        raise InputError(f"width must be positive DBU, got {width}", "width")
    if extension is not None and extension < 0:
        raise InputError(f"end extension must be >= 0 DBU, got {extension}", "extension")
    ext = width // 2 if extension is None else extension
    below = width // 2
    if y1 == y2:
        lo, hi = min(x1, x2), max(x1, x2)
        return (lo - ext, y1 - below, hi + ext, y1 - below + width)
    if x1 == x2:
        lo, hi = min(y1, y2), max(y1, y2)
        return (x1 - below, lo - ext, x1 - below + width, hi + ext)
    raise InputError("a run's centre line must be horizontal or vertical", "run")


def square(x: int, y: int, size: int) -> Rect:
    """A square of side ``size`` centred on (x, y) (odd sizes lean to the upper right)."""
    lo = size // 2
    return (x - lo, y - lo, x - lo + size, y - lo + size)
