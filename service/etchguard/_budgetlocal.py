"""A budget evaluated where the router is: no call, and a plain "not covered" for a
candidate the budget cannot answer, so the router asks the service instead.

A ``LocalBudget`` is built from the service's BudgetReply (see ``_budget`` for what its
coefficients mean and why they are exact). ``evaluate(shapes)`` takes a candidate
extension as (layer name, rectangle) pairs and returns what the service's score of
common + extension would say, or None when the budget does not cover it:

* a shape on another layer than the budget's (a via, a jump to another layer);
* a shape outside the reply's window (the lists are complete only inside it);
* a shape that touches a ``foreign`` rectangle (it would merge another component);
* a shape not connected, on the layer, to the component (own or own_pins rectangles,
  directly or through the candidate's other shapes): it would start a component.

What a covered candidate adds is the exact union measure against the component's own
rectangles on the layer (rectangles that do not meet it cannot change its union's area
or perimeter there).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import NamedTuple

from ._geometry import Rect, edge_touch, union_measures
from ._ratios import is_legal
from .v1 import etchguard_pb2 as pb


class LocalScore(NamedTuple):
    """The service's ScoreReply figures for common + the candidate (no per-ratio detail).
    A named tuple: a router builds one per candidate priced."""

    worst_change_utilization: float
    worst_utilization: float
    legal: bool
    breaks_limit: bool
    cost: float
    added_area_um2: float


def _rect(msg: pb.Rect) -> Rect:
    return (msg.xlo, msg.ylo, msg.xhi, msg.yhi)


def _touches_any(r: Rect, rects: Sequence[Rect]) -> bool:
    """``edge_touch(r, o)`` for any o, spelled out: a router calls this per candidate."""
    x0, y0, x1, y1 = r
    for o in rects:
        ix = (x1 if x1 < o[2] else o[2]) - (x0 if x0 > o[0] else o[0])
        if ix < 0:
            continue
        iy = (y1 if y1 < o[3] else o[3]) - (y0 if y0 > o[1] else o[1])
        if iy >= 0 and (ix > 0 or iy > 0):
            return True
    return False


def _overlaps_any(r: Rect, rects: Sequence[Rect]) -> bool:
    """``overlap(r, o)`` for any o, spelled out."""
    x0, y0, x1, y1 = r
    for o in rects:
        if (x1 if x1 < o[2] else o[2]) > (x0 if x0 > o[0] else o[0]) and \
                (y1 if y1 < o[3] else o[3]) > (y0 if y0 > o[1] else o[1]):
            return True
    return False


def _utilization(ratio: float, limit: float) -> float:
    if limit <= 0:
        return math.inf if ratio > 0 else 0.0
    return ratio / limit


class LocalBudget:
    """One BudgetReply, ready to evaluate candidate extensions on its layer."""

    def __init__(self, reply: pb.BudgetReply) -> None:
        if not reply.found:
            raise ValueError("the budget found no component at the point (reply.found is false)")
        self.layer = reply.layer
        self.scale_area = 1.0 / (reply.dbu_per_micron * reply.dbu_per_micron)
        self.scale_length = 1.0 / reply.dbu_per_micron
        # (conductor, per_area, per_perimeter, factor, credit, gate) per term
        self.terms = [(t.conductor_um2, t.per_area, t.per_perimeter_um, t.factor, t.credit_um2, t.gate_um2)
                      for t in reply.terms]
        # (term or -1, spent, floor, limit, always, step)
        self.ratios = [(r.term if r.HasField("term") else -1, r.spent, r.floor, r.limit, r.always, r.step)
                       for r in reply.ratios]
        # (term or -1, spent, floor, held, step): a step's ratios count when one moves
        self.watches = [(w.term if w.HasField("term") else -1, w.spent, w.floor, w.held, w.step)
                        for w in reply.watches]
        self.rest = reply.rest_worst_utilization
        self.fixed = reply.fixed_change_utilization
        self.common_added = reply.common_added_area_um2
        self.own = [_rect(r) for r in reply.own]
        self.connects = self.own + [_rect(r) for r in reply.own_pins]
        self.same_layer = [_rect(f.rect) for f in reply.foreign if f.layer == reply.layer]
        self.other_layer = [_rect(f.rect) for f in reply.foreign if f.layer != reply.layer]
        self.window = _rect(reply.window)
        c = reply.cost
        self.curve = (c.knee, c.exponent, c.scale, c.violation, c.over_slope)

    # -- what the budget covers -------------------------------------------------------------

    def covers(self, shapes: Sequence[tuple[str, Rect]]) -> bool:
        """True when the budget answers this extension exactly (see the module doc)."""
        if not shapes:
            return False
        wx0, wy0, wx1, wy1 = self.window
        rects = []
        for layer, r in shapes:
            if layer != self.layer or not (wx0 <= r[0] and wy0 <= r[1] and r[2] <= wx1 and r[3] <= wy1):
                return False
            if _touches_any(r, self.same_layer) or _overlaps_any(r, self.other_layer):
                return False
            rects.append(r)
        joined = [_touches_any(r, self.connects) for r in rects]
        grew = True
        while grew and not all(joined):
            grew = False
            for i, r in enumerate(rects):
                if not joined[i] and any(joined[j] and edge_touch(r, rects[j]) for j in range(len(rects))):
                    joined[i] = grew = True
        return all(joined)

    def added(self, rects: Sequence[Rect]) -> tuple[int, int]:
        """(area DBU^2, perimeter DBU) the rectangles add to the component's union on
        the layer."""
        if len(rects) == 1:
            x0, y0, x1, y1 = rects[0]
            near = [o for o in self.own if o[0] <= x1 and x0 <= o[2] and o[1] <= y1 and y0 <= o[3]]
        else:
            near = [o for o in self.own if any(o[0] <= r[2] and r[0] <= o[2] and o[1] <= r[3] and r[1] <= o[3]
                                               for r in rects)]
        if len(rects) == 1 and len(near) <= 1:  # by inclusion-exclusion, as the service does
            x0, y0, x1, y1 = rects[0]
            area, perimeter = (x1 - x0) * (y1 - y0), 2 * ((x1 - x0) + (y1 - y0))
            if not near:
                return area, perimeter
            o = near[0]
            ix, iy = min(x1, o[2]) - max(x0, o[0]), min(y1, o[3]) - max(y0, o[1])
            inside = ix * iy if ix > 0 and iy > 0 else 0
            return area - inside, perimeter - 2 * (ix + iy)
        area_before, perimeter_before = union_measures(near) if near else (0, 0)
        area_after, perimeter_after = union_measures(near + list(rects))
        return area_after - area_before, perimeter_after - perimeter_before

    # -- evaluation -------------------------------------------------------------------------

    def evaluate(self, shapes: Sequence[tuple[str, Rect]]) -> LocalScore | None:
        """The service's figures for common + ``shapes``, or None when not covered."""
        if not self.covers(shapes):
            return None
        area, perimeter = self.added([r for _, r in shapes])
        return self.evaluate_added(area, perimeter)

    def evaluate_added(self, area_dbu2: int, perimeter_dbu: int) -> LocalScore:
        """The figures for a covered extension that adds ``area_dbu2`` of union area and
        ``perimeter_dbu`` of union perimeter on the layer."""
        a = area_dbu2 * self.scale_area
        p = perimeter_dbu * self.scale_length
        values = [max(0.0, factor * (conductor + per_area * a + per_perimeter * p) - credit) / gate
                  for conductor, per_area, per_perimeter, factor, credit, gate in self.terms]
        moved = set()
        for term, spent, floor, held, step in self.watches:
            if term >= 0:
                grown = spent + values[term]
                if grown > floor:
                    floor = grown
            if floor != held:
                moved.add(step)
        change, worst = self.fixed, self.rest
        for term, spent, floor, limit, always, step in self.ratios:
            ratio = floor
            if term >= 0:
                grown = spent + values[term]
                if grown > floor:
                    ratio = grown
            u = ratio / limit if limit > 0 else _utilization(ratio, limit)
            if u > worst:
                worst = u
            if u > change and (always or step in moved):
                change = u
        return LocalScore(change, worst, is_legal(worst), not is_legal(change),
                          self.cost(change), self.common_added + a)

    def cost(self, u: float) -> float:
        """The server's router cost at utilization u (its CostCurve)."""
        knee, exponent, scale, violation, over_slope = self.curve
        if u <= knee:
            return 0.0
        if u <= 1.0:
            return scale * ((u - knee) / (1.0 - knee)) ** exponent
        return violation + scale * over_slope * (u - 1.0)
