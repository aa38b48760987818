"""Evaluate a net's state against the deck: per-gate cumulative sums and every check.

An ``Assessment`` is computed once per state version and reused by every what-if
question until the net changes; it holds, per gate pin and (measure, oxide) group,
the cumulative ratio at every step, and per step the components ranked by their
worst utilization (so a what-if can find the worst component it did not touch).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from ._netstate import Comp, NetState
from ._ratios import CUMULATIVE, PARTIAL, StepModel, is_legal, utilization
from ._reports import CheckResult, NetReport

CarTable = dict[tuple[int, int], list[float]]


@dataclass(slots=True)
class Entry:
    """One check on one component: the values a report or a what-if needs."""

    step: int
    measure: str
    kind: str
    oxide: str
    ratio: float
    limit: float
    utilization: float
    gate: int  # pin index
    conductor: float  # A of the measure on the step's layer
    spent: float  # the rest of the cumulative sum (0 for partial)
    gate_um2: float  # G of the component
    diff_um2: float  # D of the component


_NO_CHANGE = (0.0, 0.0)


def _utilization_only(step: int, measure: str, kind: str, oxide: str, ratio: float, limit: float,
                      util: float, *_rest: object) -> float:
    return util


utilization_only: Callable[..., float] = _utilization_only


def comp_entries(model: StepModel, step: int, comp: Comp, cars: CarTable,
                 deltas: dict[tuple[int, int], list[float]], pins_ox: list[dict[str, float]],
                 partial: bool = True, make: Callable[..., Any] = Entry) -> list[Any]:
    """Every check of ``comp`` at ``step``. A gate's cumulative ratio is its value in
    ``cars`` plus, for a what-if, its change in ``deltas`` (per lane). ``make`` builds
    each result from Entry's fields; ``utilization_only`` keeps just the utilization,
    which is all the hot path of a what-if without detail needs."""
    out: list[Any] = []
    if comp.gate <= 0:
        return out
    if partial:
        for key in model.partial_checks[step]:
            if key.oxide not in comp.gate_ox:
                continue
            rule = key.rule
            conductor = model.conductor(step, key.measure, comp.area, comp.cell, comp.perim)
            ratio = rule.ratio(conductor, comp.gate, comp.diff)
            limit = rule.partial_limit(comp.diff)
            gate = min(p for p in comp.gates if key.oxide in pins_ox[p])
            out.append(make(step, key.measure, PARTIAL, key.oxide, ratio, limit,
                             utilization(ratio, limit), gate, conductor, 0.0, comp.gate, comp.diff))
    lane = model.lane[step]
    for key in model.cumulative_checks[step]:
        if key.oxide not in comp.gate_ox:
            continue
        gi = model.group_index[(key.measure, key.oxide)]
        best_p, best = -1, -1.0
        for p in comp.gates:
            if key.oxide in pins_ox[p]:
                value = cars[(p, gi)][step] + deltas.get((p, gi), _NO_CHANGE)[lane]
                if value > best or (value == best and p < best_p):
                    best_p, best = p, value
        rule = key.rule
        limit = rule.cumulative_limit(comp.diff)
        conductor = model.conductor(step, key.measure, comp.area, comp.cell, comp.perim)
        term = rule.ratio(conductor, comp.gate, comp.diff)
        out.append(make(step, key.measure, CUMULATIVE, key.oxide, best, limit,
                         utilization(best, limit), best_p, conductor, best - term,
                         comp.gate, comp.diff))
    return out


def _kind_and_util(step: int, measure: str, kind: str, oxide: str, ratio: float, limit: float,
                   util: float, *_rest: object) -> tuple[bool, float]:
    return kind == PARTIAL, util


_NO_DELTAS: dict[tuple[int, int], list[float]] = {}


class _StepEntries:
    """One step's full entries per component, built on first request."""

    __slots__ = ("model", "step", "cars", "pins_ox", "comps", "built")

    def __init__(self, model: StepModel, step: int, cars: CarTable, pins_ox: list[dict[str, float]],
                 comps: list[Comp]) -> None:
        self.model, self.step, self.cars, self.pins_ox = model, step, cars, pins_ox
        self.comps = comps  # the step's gate-connected components
        self.built: dict[Comp, list[Entry]] = {}

    def items(self):
        for comp in self.comps:
            yield comp, self.get(comp)

    def values(self):
        for comp in self.comps:
            yield self.get(comp)

    def get(self, comp: Comp, default: tuple = ()) -> list[Entry] | tuple:
        if comp.gate <= 0:
            return default
        es = self.built.get(comp)
        if es is None:
            es = self.built[comp] = comp_entries(self.model, self.step, comp, self.cars, _NO_DELTAS,
                                                 self.pins_ox)
        return es


def _severity(e: Entry) -> tuple[float, float, float, int]:
    """Order of 'worse' between entries; ties go to the tighter limit, then the first
    pin, so that a report does not depend on the order components were built in."""
    return (e.utilization, e.ratio, -e.limit, -e.gate)


class Assessment:
    def __init__(self, state: NetState) -> None:
        model = state.model
        self.version = state.version
        self.join_plans: dict[tuple[int, int], object] = {}  # what-if constants (see _whatif)
        self.pins_ox = [dict(p.gate_area) for p in state.pins]
        n = model.steps
        cars: CarTable = {}
        for p, pin in enumerate(state.pins):
            if pin.total_gate_area <= 0:
                continue
            anchor = state.anchor_of_pin[p]
            for gi, (_measure, oxide) in enumerate(model.groups):
                if oxide not in pin.gate_area:
                    continue
                sums = [0.0, 0.0]
                row = [0.0] * n
                for s in range(pin.layer, n):
                    c = state.comp_at[s][anchor]
                    lane = model.lane[s]
                    sums[lane] += model.term(s, gi, c.area, c.cell, c.perim, c.gate, c.diff)
                    row[s] = sums[lane]
                cars[(p, gi)] = row
        self.cars = cars
        # Per step and component, only the worst figures are computed here (cheap); the
        # full entries are built when a report, a detailed what-if or advice asks.
        self.entries = [_StepEntries(model, s, cars, self.pins_ox, [c for c in state.comps[s] if c.gate > 0])
                        for s in range(n)]
        self.comp_worst: list[dict[Comp, float]] = []
        self.partial_worst: list[dict[Comp, float]] = []
        self.ranked: list[list[tuple[float, Comp]]] = []
        for s in range(n):
            comp_worst = {}
            partial_worst = {}
            ranked = []
            for c in state.comps[s]:
                if c.gate > 0:
                    utils = comp_entries(model, s, c, cars, _NO_DELTAS, self.pins_ox, True, _kind_and_util)
                    partial_worst[c] = max((u for partial, u in utils if partial), default=0.0)
                    if utils:
                        worst_here = max(u for _partial, u in utils)
                        comp_worst[c] = worst_here
                        ranked.append((worst_here, c))
            ranked.sort(key=lambda t: -t[0])
            self.comp_worst.append(comp_worst)
            self.partial_worst.append(partial_worst)
            self.ranked.append(ranked)
        worst = [r[0][0] if r else 0.0 for r in self.ranked]
        self.step_worst = worst
        self.worst_below = [0.0] * (n + 1)  # worst over steps < s
        for s in range(n):
            self.worst_below[s + 1] = max(self.worst_below[s], worst[s])

    def worst_untouched(self, step: int, touched: set[Comp]) -> float:
        for util, c in self.ranked[step]:
            if c not in touched:
                return util
        return 0.0

    def report(self, name: str, state: NetState) -> NetReport:
        layers = state.model.deck.layers
        best: dict[tuple[int, str, str, str], Entry] = {}
        for per_comp in self.entries:
            for es in per_comp.values():
                for e in es:
                    key = (e.step, e.measure, e.kind, e.oxide)
                    if key not in best or _severity(e) > _severity(best[key]):
                        best[key] = e
        checks = tuple(
            CheckResult(layers[e.step].name, e.step, e.measure, e.kind, e.oxide, e.ratio, e.limit,
                        e.utilization, is_legal(e.utilization), state.pins[e.gate].name)
            for _, e in sorted(best.items(), key=lambda kv: kv[0]))
        worst = max((c.utilization for c in checks), default=0.0)
        return NetReport(name, is_legal(worst), worst, checks)
