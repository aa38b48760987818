"""A per-layer spatial lookup for one net's rectangles.

Small layers are scanned (a plain scan of 16 rectangles costs about 3 us from Python,
cheaper than any index call); past ``SCAN_LIMIT`` entries a uniform bucket grid keyed
by ``(x >> shift, y >> shift)`` keeps lookups proportional to the local density. The
design-wide obstacle index (rtree) lives elsewhere: it is not on the per-query path.
"""

from __future__ import annotations

from collections.abc import Iterator

from ._geometry import Rect

SCAN_LIMIT = 16
GRID_SHIFT = 12  # 4096 DBU buckets
WIDE_CELLS = 64


class LayerIndex:
    __slots__ = ("rects", "grid", "wide")

    def __init__(self) -> None:
        self.rects: dict[int, Rect] = {}
        self.grid: dict[tuple[int, int], list[int]] | None = None
        self.wide: set[int] = set()  # entries spanning too many buckets: always scanned

    def __len__(self) -> int:
        return len(self.rects)

    @staticmethod
    def _cell_count(r: Rect) -> int:
        return (((r[2] >> GRID_SHIFT) - (r[0] >> GRID_SHIFT) + 1)
                * ((r[3] >> GRID_SHIFT) - (r[1] >> GRID_SHIFT) + 1))

    def _file(self, eid: int, r: Rect) -> None:
        assert self.grid is not None
        if self._cell_count(r) > WIDE_CELLS:
            self.wide.add(eid)
            return
        for cell in self._cells(r):
            self.grid.setdefault(cell, []).append(eid)

    @staticmethod
    def _cells(r: Rect) -> Iterator[tuple[int, int]]:
        for cx in range(r[0] >> GRID_SHIFT, (r[2] >> GRID_SHIFT) + 1):
            for cy in range(r[1] >> GRID_SHIFT, (r[3] >> GRID_SHIFT) + 1):
                yield cx, cy

    def add(self, eid: int, r: Rect) -> None:
        self.rects[eid] = r
        if self.grid is not None:
            self._file(eid, r)
        elif len(self.rects) > SCAN_LIMIT:
            self.grid = {}
            for other, rr in self.rects.items():
                self._file(other, rr)

    def remove(self, eid: int) -> None:
        r = self.rects.pop(eid)
        if eid in self.wide:
            self.wide.discard(eid)
        elif self.grid is not None:
            for cell in self._cells(r):
                bucket = self.grid[cell]
                bucket.remove(eid)
                if not bucket:
                    del self.grid[cell]

    def near(self, r: Rect) -> Iterator[tuple[int, Rect]]:
        """Entries whose closed rectangle may meet the closed rectangle r."""
        if self.grid is None or self._cell_count(r) > max(WIDE_CELLS, len(self.rects)):
            yield from self.rects.items()
            return
        rects = self.rects
        seen: set[int] = set(self.wide)
        for eid in self.wide:
            yield eid, rects[eid]
        for cell in self._cells(r):
            for eid in self.grid.get(cell, ()):
                if eid not in seen:
                    seen.add(eid)
                    yield eid, rects[eid]
