"""The from-scratch baseline: one net's full antenna check, recomputed with shapely
(contacts, union areas and perimeters) and networkx (components per step).

Written from the project's antenna model (the contract), not from the engine. It is
what a router would pay per question without an incremental engine: every call
rebuilds every step. It is meant to be a fair baseline, not a slow one: contact
candidates come from one shapely STRtree query per net and the pair tests are
vectorised shapely calls; each step then adds only the links that exist at it.

Readings of the contract where it is silent (the same as tests/reference.py states):
a pin's rectangles are one conductor; two rectangles on one cut layer connect by the
same-layer rule; a cut step adds 0 to a side-wall sum; a step without a rule for
(measure, oxide) adds the plain A / G to a cumulative sum; a component's cumulative
check is the worst CAR among its gate pins of that oxide, with the limit at D of
that component.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import networkx as nx
import numpy as np
import shapely
from etchguard import Deck, Pin, Shape

TOLERANCE = 1e-9  # the contract: 1e-9 relative for the legality comparison


@dataclass(frozen=True)
class Check:
    """The worst case of one (layer, measure, kind, oxide) over a net's components."""

    layer: str
    measure: str
    kind: str
    oxide: str
    ratio: float
    limit: float
    utilization: float


@dataclass(frozen=True)
class Recomputed:
    checks: dict[tuple[str, str, str, str], Check]
    worst_utilization: float

    @property
    def legal(self) -> bool:
        return self.worst_utilization <= 1.0 + TOLERANCE


def _table(points: Sequence[tuple[float, float]], x: float) -> float:
    """Linear between points, held constant beyond the first and last (the contract)."""
    return float(np.interp(x, [p[0] for p in points], [p[1] for p in points]))


def _limit(plain: float | None, table: Sequence[tuple[float, float]], diff: float) -> float:
    if diff > 0 and table:
        return _table(table, diff)
    if plain is not None:
        return plain
    return _table(table, diff)


def _effective_ratio(rule, conductor: float, gate: float, diff: float) -> float:
    """A_eff / G_eff with A_eff = max(0, f*A - k_credit*D), G_eff = G + k_gate*D."""
    f = rule.area_factor
    if rule.factor_with_diode_only and not diff > 0:
        f = 1.0
    return max(0.0, f * conductor - rule.diode_area_credit * diff) / (gate + rule.diode_gate_factor * diff)


def _utilization(ratio: float, limit: float) -> float:
    if limit > 0:
        return ratio / limit
    return math.inf if ratio > 0 else 0.0


def recompute(deck: Deck, pins: Sequence[Pin], shapes: Sequence[Shape]) -> Recomputed:
    """Every check of the net made of ``pins`` and ``shapes``, from nothing."""
    steps = len(deck.layers)
    is_cut = [layer.kind == "cut" for layer in deck.layers]
    # Elements: routed shapes first, then pin rectangles (owner pin recorded).
    layer_of: list[int] = [s.layer for s in shapes]
    rects: list[tuple[int, int, int, int]] = [s.rect for s in shapes]
    pin_of: list[int] = [-1] * len(shapes)
    pin_anchor: list[int] = []
    for p, pin in enumerate(pins):
        pin_anchor.append(len(rects))
        for r in pin.rects:
            layer_of.append(pin.layer)
            rects.append(r)
            pin_of.append(p)
    n = len(rects)
    geoms = shapely.box(*np.array(rects, dtype=float).T) if n else np.array([])
    layer_arr = np.array(layer_of)

    # Links and the step from which each exists (shapely STRtree + vectorised tests).
    links: list[tuple[int, int, int]] = []
    if n:
        tree = shapely.STRtree(geoms)
        a, b = tree.query(geoms, predicate="intersects")
        keep = a < b
        a, b = a[keep], b[keep]
        la, lb = layer_arr[a], layer_arr[b]
        inter = shapely.intersection(geoms[a], geoms[b])
        area = shapely.area(inter)
        length = shapely.length(inter)
        cut_a = np.array(is_cut)[la]
        cut_b = np.array(is_cut)[lb]
        same = (la == lb) & ((area > 0) | (length > 0))  # area, or a shared edge
        cross = (np.abs(la - lb) == 1) & (cut_a != cut_b) & (area > 0)  # a cut landing
        for i, j, l1, l2, s_ok, c_ok in zip(a.tolist(), b.tolist(), la.tolist(), lb.tolist(),
                                            same.tolist(), cross.tolist()):
            if s_ok or c_ok:
                links.append((i, j, max(l1, l2)))
    for p, pin in enumerate(pins):  # a pin's rectangles are one conductor
        for k in range(1, len(pin.rects)):
            links.append((pin_anchor[p], pin_anchor[p] + k, pin.layer))

    # Components and their quantities, step by step.
    scale_area = 1.0 / deck.dbu_per_micron ** 2
    scale_length = 1.0 / deck.dbu_per_micron
    graph = nx.Graph()
    comp_of_pin: list[list[int]] = [[-1] * len(pins) for _ in range(steps)]
    quantities: list[list[tuple[float, dict[str, float], float, float, float, float, list[int]]]] = []
    for s in range(steps):
        graph.add_nodes_from(i for i in range(n) if layer_of[i] == s)
        graph.add_edges_from((i, j) for i, j, step in links if step == s)
        at_step = []
        for c, nodes in enumerate(nx.connected_components(graph)):
            pin_ids = sorted({pin_of[i] for i in nodes if pin_of[i] >= 0})
            for p in pin_ids:
                comp_of_pin[s][p] = c
            gate_ox: dict[str, float] = {}
            for p in pin_ids:
                for ox, g in pins[p].gate_area.items():
                    gate_ox[ox] = gate_ox.get(ox, 0.0) + g
            routed = [geoms[i] for i in nodes if layer_of[i] == s and pin_of[i] < 0]
            union = shapely.union_all(routed) if routed else None
            at_step.append((
                sum(gate_ox.values()), gate_ox, sum(pins[p].diff_area for p in pin_ids),
                union.area * scale_area if union is not None else 0.0,
                union.length * scale_length if union is not None else 0.0,  # holes included
                sum(pins[p].cell_area.get(s, 0.0) for p in pin_ids),
                [p for p in pin_ids if pins[p].gate_area]))
        quantities.append(at_step)

    def conductor(s: int, measure: str, comp: tuple) -> float:
        if measure == "area":
            return comp[3] + comp[5]
        if is_cut[s]:
            return 0.0
        return comp[4] * (deck.layers[s].thickness_um or 0.0)

    def lane(s: int) -> int:
        return 0 if deck.cumulative_includes_cuts or not is_cut[s] else 1

    groups = {(r.measure, r.oxide) for r in deck.rules if r.has_cumulative}
    cars: dict[tuple[int, str, str], list[float]] = {}
    for p, pin in enumerate(pins):
        for measure, oxide in groups:
            if oxide not in pin.gate_area:
                continue
            sums = [0.0, 0.0]
            row = [0.0] * steps
            for s in range(pin.layer, steps):
                comp = quantities[s][comp_of_pin[s][p]]
                rule = deck.rule(s, measure, oxide)
                a = conductor(s, measure, comp)
                sums[lane(s)] += a / comp[0] if rule is None else _effective_ratio(rule, a, comp[0], comp[2])
                row[s] = sums[lane(s)]
            cars[(p, measure, oxide)] = row

    worst: dict[tuple[str, str, str, str], Check] = {}

    def keep(check: Check) -> None:
        key = (check.layer, check.measure, check.kind, check.oxide)
        if key not in worst or check.utilization > worst[key].utilization:
            worst[key] = check

    for rule in deck.rules:
        s = rule.step
        for comp in quantities[s]:
            gate, gate_ox, diff = comp[0], comp[1], comp[2]
            if gate_ox.get(rule.oxide, 0.0) <= 0:
                continue
            if rule.has_partial:
                ratio = _effective_ratio(rule, conductor(s, rule.measure, comp), gate, diff)
                limit = _limit(rule.partial_max, rule.diode_partial_max, diff)
                keep(Check(rule.layer, rule.measure, "partial", rule.oxide, ratio, limit,
                           _utilization(ratio, limit)))
            if rule.has_cumulative:
                ratio = max(cars[(p, rule.measure, rule.oxide)][s] for p in comp[6]
                            if rule.oxide in pins[p].gate_area)
                limit = _limit(rule.cumulative_max, rule.diode_cumulative_max, diff)
                keep(Check(rule.layer, rule.measure, "cumulative", rule.oxide, ratio, limit,
                           _utilization(ratio, limit)))
    return Recomputed(worst, max((c.utilization for c in worst.values()), default=0.0))


def added_area_um2(deck: Deck, shapes: Sequence[Shape], candidate: Sequence[Shape]) -> dict[str, float]:
    """Union area the candidate adds per layer (shapely), um^2."""
    scale = 1.0 / deck.dbu_per_micron ** 2
    out: dict[str, float] = {}
    for layer in sorted({c.layer for c in candidate}):
        before = [shapely.box(*s.rect) for s in shapes if s.layer == layer]
        after = before + [shapely.box(*c.rect) for c in candidate if c.layer == layer]
        base = shapely.union_all(before).area if before else 0.0
        out[deck.layers[layer].name] = (shapely.union_all(after).area - base) * scale
    return out


def disagreements(engine_report, ref: Recomputed) -> list[str]:
    """How an engine NetReport differs from the recomputation; empty when equal."""
    def close(x: float, y: float) -> bool:
        return math.isclose(x, y, rel_tol=TOLERANCE, abs_tol=1e-12)

    problems = []
    got = {(c.layer, c.measure, c.kind, c.oxide): c for c in engine_report.checks}
    if set(got) != set(ref.checks):
        problems.append(f"check keys differ: engine only {sorted(set(got) - set(ref.checks))}, "
                        f"baseline only {sorted(set(ref.checks) - set(got))}")
    for key in sorted(set(got) & set(ref.checks)):
        if not close(got[key].utilization, ref.checks[key].utilization):
            problems.append(f"{key}: utilization {got[key].utilization!r} vs {ref.checks[key].utilization!r}")
    if not close(engine_report.worst_utilization, ref.worst_utilization):
        problems.append(f"worst {engine_report.worst_utilization!r} vs {ref.worst_utilization!r}")
    return problems
