"""Columnar candidates: validation at the edge, and the per-candidate result columns.

A batch is shape rows (``layers[k]``, ``rects[k]`` = xlo, ylo, xhi, yhi in DBU) with an
optional ``shape_count`` per candidate; it is checked as a whole, naming the first bad
row, before the core scores it. Shapes several candidates share (``CommonShapes``, such
as the partial path a search extends) travel once: candidate i is its shared part
followed by its own rows.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from ._errors import EtchguardError, InputError, LimitExceededError
from ._geometry import COORD_LIMIT


@dataclass(frozen=True)
class BatchScores:
    """One entry per candidate, in the order given (see ``_results.Score``)."""

    worst_change_utilization: np.ndarray  # float64
    worst_utilization: np.ndarray  # float64, the whole net after the candidate
    legal: np.ndarray  # bool
    breaks_limit: np.ndarray  # bool
    cost: np.ndarray  # float64
    added_area_um2: np.ndarray  # float64, union area the candidate adds, over its layers
    # From a server, when asked for: each candidate's full ScoreReply (protobuf), in order.
    details: tuple[Any, ...] = ()

    def __len__(self) -> int:
        return len(self.cost)



def checked_columns(steps: int, layers: Sequence[int] | np.ndarray, rects: np.ndarray,
                    shape_count: Sequence[int] | np.ndarray | None, max_candidates: int,
                    max_shapes_per_net: int) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Validate candidate columns as a whole, naming the first bad row (``rects[k]``,
    ``layers[k]``, ``shape_count[i]``); returns int64 layers, rects and counts."""
    rect_arr = np.asarray(rects)
    if rect_arr.ndim != 2 or rect_arr.shape[1] != 4:
        raise InputError(f"rects must be an (N, 4) array, got shape {rect_arr.shape}", "rects")
    count = rect_arr.shape[0]
    counts = None
    if shape_count is not None:
        counts = np.asarray(shape_count)
        if counts.ndim != 1 or (len(counts) and counts.dtype.kind not in "iu"):
            raise InputError(f"shape_count must list integer counts, got shape {counts.shape}",
                             "shape_count")
        counts = counts.astype(np.int64, copy=False)
        low = np.nonzero(counts < 1)[0]
        if len(low):
            raise InputError("a candidate needs at least one shape", f"shape_count[{int(low[0])}]")
        if int(counts.sum()) != count:
            raise InputError(f"shape counts add up to {int(counts.sum())}, but there are {count} "
                             "rectangles", "shape_count")
        big = np.nonzero(counts > max_shapes_per_net)[0]
        if len(big):
            raise LimitExceededError(f"{int(counts[big[0]])} shapes would exceed the limit of "
                                     f"{max_shapes_per_net} per net",
                                     f"shape_count[{int(big[0])}]")
    candidates = count if counts is None else len(counts)
    if candidates > max_candidates:
        raise LimitExceededError(f"{candidates} candidates exceed the limit of "
                                 f"{max_candidates} per batch",
                                 "rects" if counts is None else "shape_count")
    if rect_arr.dtype.kind not in "iu":
        raise InputError(f"coordinates are integer DBU (int64), got {rect_arr.dtype}", "rects")
    layer_arr = np.asarray(layers)
    if layer_arr.ndim != 1 or layer_arr.shape[0] != count:
        raise InputError(f"layers must list one layer per rectangle ({count}), got shape "
                         f"{layer_arr.shape}", "layers")
    if count and layer_arr.dtype.kind not in "iu":
        raise InputError(f"layers are integer step indices, got {layer_arr.dtype}", "layers")
    bad = np.nonzero((layer_arr < 0) | (layer_arr >= steps))[0]
    if len(bad):
        raise InputError(f"unknown layer {int(layer_arr[bad[0]])} (deck has "
                         f"{steps})", f"layers[{int(bad[0])}]")
    limit = COORD_LIMIT
    if rect_arr.dtype.kind == "u":
        far_rows = np.nonzero((rect_arr >= limit).any(axis=1))[0]
        if len(far_rows):
            raise InputError("a coordinate is outside +-2^62 DBU", f"rects[{int(far_rows[0])}]")
    rect_arr = rect_arr.astype(np.int64, copy=False)
    far = (rect_arr <= -limit) | (rect_arr >= limit)
    empty = (rect_arr[:, 0] >= rect_arr[:, 2]) | (rect_arr[:, 1] >= rect_arr[:, 3])
    bad = np.nonzero(far.any(axis=1) | empty)[0]
    if len(bad):
        i = int(bad[0])
        why = ("a coordinate is outside +-2^62 DBU" if far[i].any() else
               f"rectangle {rect_arr[i].tolist()} is empty or inverted (need xlo < xhi, ylo < yhi)")
        raise InputError(why, f"rects[{i}]")
    return layer_arr.astype(np.int64, copy=False), rect_arr, counts


@dataclass(frozen=True)
class CommonShapes:
    """Shapes candidates share, sent once: part k is the next ``shape_count[k]`` rows
    (default: one part of every row); candidate i starts with part ``part[i]`` (-1:
    none; default: every candidate starts with part 0)."""

    layers: Sequence[int] | np.ndarray
    rects: np.ndarray
    shape_count: Sequence[int] | np.ndarray | None = None
    part: Sequence[int] | np.ndarray | None = None


@dataclass(frozen=True)
class CheckedCommon:
    """CommonShapes validated: int64 columns, one part index per candidate."""

    layers: np.ndarray
    rects: np.ndarray
    shape_count: np.ndarray
    part: np.ndarray


def checked_common(steps: int, common: CommonShapes, candidate_counts: np.ndarray, max_parts: int,
                   max_shapes_per_net: int) -> CheckedCommon:
    """Validate shared parts against the candidates they start (``candidate_counts``:
    own rows per candidate), naming the first bad row as ``common.rects[k]``,
    ``common.layers[k]``, ``common.shape_count[k]`` or ``common.part[i]``."""
    rows = np.asarray(common.rects)
    counts = common.shape_count
    if counts is None:
        counts = np.array([rows.shape[0] if rows.ndim == 2 else 0], dtype=np.int64)
    try:
        layers, rects, part_counts = checked_columns(steps, common.layers, rows, counts, max_parts,
                                                     max_shapes_per_net)
    except EtchguardError as exc:
        message = exc.message.replace("a candidate needs", "a shared part needs").replace(
            "candidates exceed", "shared parts exceed")
        raise type(exc)(message, f"common.{exc.field}" if exc.field else "common") from None
    assert part_counts is not None
    n = len(candidate_counts)
    if common.part is None:
        part = np.zeros(n, dtype=np.int64)
    else:
        part = np.asarray(common.part)
        if part.shape != (n,) or (n and part.dtype.kind not in "iu"):
            raise InputError(f"common.part must give one integer part per candidate ({n}), got shape "
                             f"{part.shape}", "common.part")
        part = part.astype(np.int64, copy=False)
        bad = np.nonzero((part < -1) | (part >= len(part_counts)))[0]
        if len(bad):
            raise InputError(f"no shared part {int(part[bad[0]])} (there are {len(part_counts)}; -1 = none)",
                             f"common.part[{int(bad[0])}]")
    sizes = np.concatenate([part_counts, [0]])  # part -1 (none) adds nothing
    whole = candidate_counts + sizes[part]
    big = np.nonzero(whole > max_shapes_per_net)[0]
    if len(big):
        raise LimitExceededError(f"{int(whole[big[0]])} shapes would exceed the limit of "
                                 f"{max_shapes_per_net} per net", f"common.part[{int(big[0])}]")
    return CheckedCommon(layers, rects, part_counts, part)
