"""union_measures against shapely on random rectangle sets.

Reference: shapely (``shapely.ops.unary_union`` of ``box``es; ``.area``, and
``.length``, which sums the exterior and every interior ring, so holes count, as the
contract's side-wall measure requires: "perimeter of that union, holes included").
Coordinates sit on a coarse grid so that shared edges, corners and holes are common;
a second strategy uses free coordinates (large and negative) for the general case.
"""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import box
from shapely.ops import unary_union

import etchguard as eg

GRID = 50


@st.composite
def grid_rect(draw: st.DrawFn) -> tuple[int, int, int, int]:
    x, y = draw(st.integers(-4, 8)), draw(st.integers(-4, 8))
    w, h = draw(st.integers(1, 5)), draw(st.integers(1, 5))
    return (x * GRID, y * GRID, (x + w) * GRID, (y + h) * GRID)


@st.composite
def free_rect(draw: st.DrawFn) -> tuple[int, int, int, int]:
    x, y = draw(st.integers(-10**9, 10**9)), draw(st.integers(-10**9, 10**9))
    w, h = draw(st.integers(1, 10**6)), draw(st.integers(1, 10**6))
    return (x, y, x + w, y + h)


def shapely_measures(rects: list[tuple[int, int, int, int]]) -> tuple[float, float]:
    if not rects:
        return 0.0, 0.0
    union = unary_union([box(*r) for r in rects])
    return union.area, union.length


@settings(max_examples=400, deadline=None)
@given(st.lists(grid_rect(), max_size=14))
def test_union_measures_match_shapely_on_a_grid(rects: list[tuple[int, int, int, int]]) -> None:
    area, perimeter = eg.union_measures(rects)
    ref_area, ref_perimeter = shapely_measures(rects)
    # Grid coordinates are small integers: shapely is exact here, so equality is exact.
    assert area == ref_area
    assert perimeter == ref_perimeter
    assert isinstance(area, int) and isinstance(perimeter, int)


@settings(max_examples=200, deadline=None)
@given(st.lists(free_rect(), max_size=8))
def test_union_measures_match_shapely_anywhere(rects: list[tuple[int, int, int, int]]) -> None:
    area, perimeter = eg.union_measures(rects)
    ref_area, ref_perimeter = shapely_measures(rects)
    # Large coordinates: shapely works in doubles, the engine in exact integers.
    assert abs(area - ref_area) <= 1e-9 * max(1.0, ref_area)
    assert abs(perimeter - ref_perimeter) <= 1e-9 * max(1.0, ref_perimeter)


@settings(max_examples=200, deadline=None)
@given(st.lists(grid_rect(), min_size=1, max_size=10), st.randoms())
def test_union_measures_do_not_depend_on_order_or_repeats(rects: list[tuple[int, int, int, int]], rnd) -> None:
    shuffled = list(rects) + [rects[0]]  # a repeated rectangle adds nothing
    rnd.shuffle(shuffled)
    assert eg.union_measures(shuffled) == eg.union_measures(rects)


def test_ring_counts_its_hole() -> None:
    # 3 x 3 cells with the middle one missing: area 8, outer perimeter 12 + hole 4 = 16
    # (in GRID units); shapely agrees (one polygon with one interior ring).
    ring = [(0, 0, 150, 50), (0, 100, 150, 150), (0, 50, 50, 100), (100, 50, 150, 100)]
    union = unary_union([box(*r) for r in ring])
    assert len(union.interiors) == 1
    assert eg.union_measures(ring) == (8 * GRID * GRID, 16 * GRID) == (union.area, union.length)


def test_corner_touch_keeps_both_boundaries() -> None:
    # Two squares meeting at one point: no shared edge, so both perimeters count.
    pair = [(0, 0, 50, 50), (50, 50, 100, 100)]
    assert eg.union_measures(pair) == (5000, 400) == shapely_measures(pair)


def test_abutting_edges_leave_no_inner_boundary() -> None:
    pair = [(0, 0, 50, 50), (50, 0, 100, 50)]
    assert eg.union_measures(pair) == (5000, 300) == shapely_measures(pair)
