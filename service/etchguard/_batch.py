"""Batch what-if scores, the one-rectangle candidates vectorized with numpy.

``score_columns`` answers, for N candidates (one rectangle each, on any layers) against
one net state, what ``_whatif.score(state, assessment, [Shape(layer, rect)], costs,
detail=False)`` answers for each: the worst utilization among the changed ratios, the
net's worst after, the two verdicts, the router cost and the union area the candidate
adds on its layer. Candidates of the common case are answered with column arithmetic;
the others are handed, one by one, to the scalar ``score``.

The common case, and why the columns equal the scalar path
----------------------------------------------------------
Let the candidate be rectangle r on layer L. The scalar path walks the steps s >= L; at
each it gathers the set of existing components r touches (elements joined at step L:
the same-layer ones by edge contact, the adjacent layer below by area overlap; joined
at L+1: the adjacent layer above). The column path takes a candidate only when

1. at step L its touches lie in at most one component C_L, and at step L+1 all its
   touches (both layers) lie in at most one component C_{L+1}. Components only grow
   with the steps, so then every later step s also sees at most one component C_s,
   the one holding C_{L+1} (found from any member). Nothing is merged after step L,
   so the scalar path's term changes all happen at step L;
2. it meets at most ``MAX_LOCAL`` routed rectangles on L, and its coordinates stay
   within +-2^30 DBU (so every area below is an exact int64);
3. every oxide class present in C_L or a C_s has a gate pin in it (always so for pins
   the net parser builds; otherwise the scalar path decides what to do).

In that case the scalar path computes, step by step, only quantities that are either
constants of the pair (C_L, C_{L+1}) or functions of two integers per candidate, the
area dA and perimeter dP it adds to C_L on layer L:

* dA, dP: with no routed neighbour, area(r) and P(r); with one, q, the scalar's
  ``area(r) - area(r & q)`` and ``P(r) - _shared_perimeter(r, q)``, evaluated by the
  same integer formulas; with several, the exact change of union area and perimeter,
  computed on the compressed grid of the rectangles' coordinates (every cell inside or
  outside, the boundary counted cell edge by cell edge). That grid measure equals the
  plane sweep of ``union_measures`` (both are the exact measures of one closed set);
  the neighbours are first clipped to r grown by 1 DBU, which changes neither
  difference because the union changes only inside r.
* At step L the group is C_L with area + dA and perimeter + dP; its partial checks and
  the term change of each (measure, oxide) group follow by the same IEEE operations
  in the same order as ``StepModel.conductor``, ``Rule.ratio`` and ``utilization``
  (numpy ufuncs round each operation once, as Python floats do, and fuse nothing).
  Limits depend on D only, which does not change. Every gate of C_L has the same term
  change (one old component, one new group), so a cumulative check takes
  ``max(cars of C_L's gates) + delta``; rounding is monotone, so this equals the
  scalar's maximum over the gates of ``cars + delta``.
* At a later step s of L's lane, the scalar path re-evaluates C_s's cumulative checks
  only when some gate of C_L has a non-zero change in that lane (the same test on the
  same floats here, ``moved``); the best value is then
  ``max(max(cars of C_L's gates) + delta, max(cars of C_s's other gates))``. Otherwise,
  and at steps of the other lane, C_s is unchanged and contributes its worst entries.
* Every step also contributes the worst component not touched
  (``Assessment.worst_untouched``), and the net takes ``worst_below[L]`` from the steps
  under L. These are constants per (C_L, C_{L+1}) and are computed once per pair with
  the scalar path's own calls, then cached with the net's assessment.

Merges, by a traced replay of the scalar walk
---------------------------------------------
A candidate that touches several components at L or at L+1 (a merge) is keyed by its
signature: the set S_L of components it touches at L and the set S_{L+1} at L+1 (the
set at a later step s is that of S_{L+1}'s members at s, components only growing).
For one signature the scalar walk computes the same thing for every candidate except
dA and dP, which enter only as ``area + dA`` and ``perim + dP`` of the group at L. So
``_trace`` runs the scalar walk once per signature (the same loop, the same group
built by ``Comp.absorb`` from the same components, the same term changes per gate and
step, added in step order, the same checks): every operation on constants is done
there, in Python, exactly as the scalar does it; every operation that involves dA or
dP is recorded instead, and the record is replayed over the signature's candidates
with the numpy twin of the same IEEE operation (each rounds once, as Python's does).
Two rewrites keep the record short, both exact: gates whose change is the same
recorded column enter a cumulative check as ``max(cars) + change`` (rounding is
monotone); and a per-candidate branch of the scalar (a later component "moved" only
when a change is non-zero) is a select between the two outcomes, with 0.0 for the one
not taken, which cannot raise a maximum that starts at 0.0.

Candidates of several shapes, those that meet too many routed rectangles or lie far
out, and signatures the trace declines (a check without a gate of its oxide) go to
the scalar path, which is exact by construction.
"""

from __future__ import annotations

import threading
import weakref
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from ._assess import Assessment
from ._errors import InputError, LimitExceededError
from ._geometry import COORD_LIMIT
from ._netstate import Comp, NetState
from ._nets import Shape
from ._ratios import TOLERANCE, CheckKey, StepModel, utilization
from ._rules import Rule
from ._whatif import CostModel, _unchanged_worst, score

SAFE_COORD = 1 << 30  # candidate coordinates within +-2^30: areas are exact int64s
SAFE_AGGREGATE = 1 << 61  # component area/perimeter (DBU) that may take a candidate's change
MAX_LOCAL = 32  # routed rectangles on the candidate's layer the vectorized union takes
_LOCAL_BUCKETS = ((2, 3), (4, 7), (8, 15), (16, MAX_LOCAL))  # rows padded only within a bucket

_F8 = np.float64
_NONE = -1


@dataclass(frozen=True)
class BatchScores:
    """One entry per candidate, in the order given (see ``_reports.Score``)."""

    worst_change_utilization: np.ndarray  # float64
    worst_utilization: np.ndarray  # float64, the whole net after the candidate
    legal: np.ndarray  # bool
    breaks_limit: np.ndarray  # bool
    cost: np.ndarray  # float64
    added_area_um2: np.ndarray  # float64, union area the candidate adds, over its layers
    vectorized: np.ndarray  # bool: answered by the column path (else by the scalar score)

    def __len__(self) -> int:
        return len(self.cost)

    @property
    def vectorized_fraction(self) -> float:
        return float(self.vectorized.mean()) if len(self.vectorized) else 0.0


# -- per-layer plan (depends on the deck only) -----------------------------------------

@dataclass(frozen=True)
class _Plan:
    """The checks a change of conductor on layer L can move, in a fixed order."""

    partial: tuple[CheckKey, ...]  # partial checks at L
    cumulative: tuple[tuple[CheckKey, int], ...]  # cumulative checks at L, with group index
    later: tuple[tuple[int, CheckKey, int], ...]  # (s, key, group) for s > L in L's lane
    terms: tuple[tuple[int, str, Rule | None], ...]  # (group, measure, factor rule at L)


def _plan(model: StepModel, layer: int) -> _Plan:
    lane = model.lane[layer]
    return _Plan(
        tuple(model.partial_checks[layer]),
        tuple((k, model.group_index[(k.measure, k.oxide)]) for k in model.cumulative_checks[layer]),
        tuple((s, k, model.group_index[(k.measure, k.oxide)])
              for s in range(layer + 1, model.steps) if model.lane[s] == lane
              for k in model.cumulative_checks[s]),
        tuple((gi, measure, model.term_rule[layer][gi])
              for gi, (measure, _oxide) in enumerate(model.groups)))


# -- per-assessment tables (depend on the net state) -----------------------------------

@dataclass(frozen=True)
class _LayerTables:
    """The net's elements a rectangle on layer L can touch, with their components."""

    same: np.ndarray  # (m, 4) int64, elements on L
    same_cols: tuple[np.ndarray, ...]  # its four coordinate columns, each contiguous
    routed: np.ndarray  # (m,) bool: a routed shape (pins add no area)
    below: tuple[np.ndarray, ...]  # columns of layer L-1 when it connects by overlap, else empty
    above: tuple[np.ndarray, ...]  # layer L+1 likewise (joined from step L+1)
    comp_l: np.ndarray  # (m + b,) component index at step L of same, then below
    comp_next: np.ndarray | None  # (m + b + a,) component index at step L+1, None at the top
    comps_l: list[Comp]
    comps_next: list[Comp] | None


@dataclass(frozen=True)
class _Group:
    """Everything about a (C_L, C_{L+1}) pair the columns need; see the module notes."""

    area: int
    perim: int
    cell: float
    gate: float  # 1.0 stands in when C_L has no gate (its checks are then all inactive)
    diff: float
    part_active: list[bool]
    part_limit: list[float]
    cum_active: list[bool]
    cum_best: list[float]
    cum_limit: list[float]
    present: list[bool]  # per (measure, oxide) group: some gate of C_L carries the oxide
    term_old: list[float]
    later_active: list[bool]
    later_own: list[float]  # best cumulative of C_L's gates at s (-inf: none)
    later_other: list[float]  # best of C_s's other gates (-inf: none)
    later_limit: list[float]
    base: float  # net worst from what the candidate cannot move
    if_moved: float  # extra net worst when C_L's terms change (changed path later)
    if_still: float  # extra net worst when they do not


class _GroupStack:
    """The groups met so far on one layer, and their fields stacked as arrays."""

    def __init__(self) -> None:
        self.row: dict[tuple[int, int], int] = {}  # (C_L, C_{L+1}) index -> row, -1: scalar
        self.groups: list[_Group] = []
        self.arrays: dict[str, np.ndarray] = {}

    def add(self, key: tuple[int, int], group: _Group | None) -> None:
        if group is None:
            self.row[key] = -1
            return
        self.row[key] = len(self.groups)
        self.groups.append(group)
        self.arrays.clear()

    def array(self, name: str, dtype: type = np.float64) -> np.ndarray:
        got = self.arrays.get(name)
        if got is None:
            got = self.arrays[name] = np.array([getattr(g, name) for g in self.groups], dtype=dtype)
        return got


class _Tables:
    def __init__(self, state: NetState) -> None:
        self.state = weakref.ref(state)
        self.version = state.version
        self.layers: dict[int, _LayerTables] = {}
        self.groups: dict[int, _GroupStack] = {}
        self.comp_lists: dict[int, tuple[list[Comp], dict[int, int]]] = {}
        self.programs: dict[int, dict[tuple, "_Program | None"]] = {}  # merges, per layer

    def comps(self, state: NetState, step: int) -> tuple[list[Comp], dict[int, int]]:
        got = self.comp_lists.get(step)
        if got is None:
            lst = list(state.comps[step])
            got = self.comp_lists[step] = (lst, {id(c): i for i, c in enumerate(lst)})
        return got


_CACHE: "weakref.WeakKeyDictionary[Assessment, _Tables]" = weakref.WeakKeyDictionary()
_CACHE_LOCK = threading.Lock()
_PLANS: "weakref.WeakKeyDictionary[StepModel, dict[int, _Plan]]" = weakref.WeakKeyDictionary()


def _tables(state: NetState, assessment: Assessment) -> _Tables:
    with _CACHE_LOCK:
        t = _CACHE.get(assessment)
        if t is None or t.state() is not state or t.version != state.version:
            t = _CACHE[assessment] = _Tables(state)
        return t


def _plan_for(model: StepModel, layer: int) -> _Plan:
    with _CACHE_LOCK:
        plans = _PLANS.get(model)
        if plans is None:
            plans = _PLANS[model] = {}
        p = plans.get(layer)
        if p is None:
            p = plans[layer] = _plan(model, layer)
        return p


def _rect_array(rects: list) -> np.ndarray:
    return np.array(rects, dtype=np.int64).reshape(-1, 4)


def _columns(rects: np.ndarray) -> tuple[np.ndarray, ...]:
    """xlo, ylo, xhi, yhi as contiguous arrays: a strided column makes every
    broadcast against it several times slower."""
    return tuple(np.ascontiguousarray(rects[:, i]) for i in range(4))


def _layer_tables(tab: _Tables, state: NetState, layer: int) -> _LayerTables:
    lt = tab.layers.get(layer)
    if lt is not None:
        return lt
    model = state.model
    is_cut = model.is_cut

    def elements(other: int) -> tuple[list[int], list]:
        if not 0 <= other < model.steps or is_cut[other] == is_cut[layer]:
            return [], []
        items = list(state.index[other].rects.items())
        return [e for e, _ in items], [r for _, r in items]

    same_items = list(state.index[layer].rects.items())
    same_ids = [e for e, _ in same_items]
    below_ids, below_rects = elements(layer - 1)
    above_ids, above_rects = elements(layer + 1)
    comps_l, index_l = tab.comps(state, layer)
    at_l = state.comp_at[layer]
    comp_l = np.array([index_l[id(at_l[e])] for e in same_ids + below_ids], dtype=np.int64)
    comp_next = comps_next = None
    if layer + 1 < model.steps:
        comps_next, index_next = tab.comps(state, layer + 1)
        at_next = state.comp_at[layer + 1]
        comp_next = np.array([index_next[id(at_next[e])] for e in same_ids + below_ids + above_ids],
                             dtype=np.int64)
    same = _rect_array([r for _, r in same_items])
    lt = _LayerTables(same, _columns(same),
                      np.array([e not in state.pin_of for e in same_ids], dtype=bool),
                      _columns(_rect_array(below_rects)), _columns(_rect_array(above_rects)),
                      comp_l, comp_next, comps_l, comps_next)
    tab.layers[layer] = lt
    return lt


def _consistent(comp: Comp, pins_ox: list[dict[str, float]]) -> bool:
    """Every oxide of the component has a gate pin carrying it (so that the scalar
    check code finds a gate for each of its checks)."""
    return all(any(ox in pins_ox[p] for p in comp.gates) for ox in comp.gate_ox)


def _build_group(state: NetState, assessment: Assessment, plan: _Plan, layer: int,
                 c_l: Comp | None, c_next: Comp | None) -> _Group | None:
    """The pair's constants, by the scalar path's own calls; None: leave it to score()."""
    model = state.model
    pins_ox = assessment.pins_ox
    cars = assessment.cars
    later_comps: dict[int, Comp | None] = {}
    rep = next(iter(c_next.members)) if c_next is not None else None
    for s in range(layer + 1, model.steps):
        later_comps[s] = state.comp_at[s][rep] if rep is not None else None
    has_gate = c_l is not None and c_l.gate > 0
    if has_gate and not _consistent(c_l, pins_ox):  # type: ignore[arg-type]
        return None
    for c in later_comps.values():
        if c is not None and c.gate > 0 and not _consistent(c, pins_ox):
            return None
    if c_l is not None and not (abs(c_l.area) < SAFE_AGGREGATE and abs(c_l.perim) < SAFE_AGGREGATE):
        return None
    area = c_l.area if c_l is not None else 0
    perim = c_l.perim if c_l is not None else 0
    cell = c_l.cell if c_l is not None else 0.0
    gate = c_l.gate if has_gate else 1.0
    diff = c_l.diff if c_l is not None else 0.0
    gate_ox = c_l.gate_ox if has_gate else {}  # type: ignore[union-attr]
    gates_l = list(c_l.gates) if has_gate else []  # type: ignore[union-attr]
    own_set = set(gates_l)

    def best_of(pins, oxide: str, gi: int, s: int) -> float:
        return max((cars[(p, gi)][s] for p in pins if oxide in pins_ox[p]), default=-np.inf)

    part_active = [has_gate and k.oxide in gate_ox for k in plan.partial]
    part_limit = [k.rule.partial_limit(diff) if a else 1.0 for k, a in zip(plan.partial, part_active)]
    cum_active = [has_gate and k.oxide in gate_ox for k, _ in plan.cumulative]
    cum_best = [best_of(gates_l, k.oxide, gi, layer) if a else 0.0
                for (k, gi), a in zip(plan.cumulative, cum_active)]
    cum_limit = [k.rule.cumulative_limit(diff) if a else 1.0
                 for (k, _), a in zip(plan.cumulative, cum_active)]
    present = [has_gate and any(model.groups[gi][1] in pins_ox[p] for p in gates_l)
               for gi, _, _ in plan.terms]
    term_old = [model.term(layer, gi, area, cell, perim, gate, diff) if pr else 0.0
                for (gi, _, _), pr in zip(plan.terms, present)]
    has_deltas = any(present)
    later_active, later_own, later_other, later_limit = [], [], [], []
    for s, k, gi in plan.later:
        c = later_comps[s]
        active = has_deltas and c is not None and c.gate > 0 and k.oxide in c.gate_ox
        later_active.append(active)
        if active:
            later_own.append(best_of(gates_l, k.oxide, gi, s))
            later_other.append(best_of([p for p in c.gates if p not in own_set], k.oxide, gi, s))  # type: ignore[union-attr]
            later_limit.append(k.rule.cumulative_limit(c.diff))  # type: ignore[union-attr]
        else:
            later_own.append(0.0)
            later_other.append(0.0)
            later_limit.append(1.0)

    base = assessment.worst_below[layer]
    base = max(base, assessment.worst_untouched(layer, {c_l} if c_l is not None else set()))
    if_moved = if_still = 0.0
    lane = model.lane[layer]
    for s in range(layer + 1, model.steps):
        c = later_comps[s]
        if c is not None and c.gate > 0:
            pw = assessment.partial_worst[s].get(c, 0.0)
            uw = assessment.comp_worst[s].get(c, 0.0)
            if has_deltas and model.lane[s] == lane:
                if_moved = max(if_moved, pw)
                if_still = max(if_still, pw, uw)
            else:
                base = max(base, pw, uw)
        base = max(base, assessment.worst_untouched(s, {c} if c is not None else set()))
    return _Group(area, perim, cell, gate, diff, part_active, part_limit, cum_active, cum_best,
                  cum_limit, present, term_old, later_active, later_own, later_other, later_limit,
                  base, if_moved, if_still)


# -- vectorized twins of the scalar formulas --------------------------------------------

def _ratio(rule: Rule, conductor: np.ndarray, gate: np.ndarray, diff: np.ndarray) -> np.ndarray:
    """Rule.ratio, elementwise: max(0, f*A - k_credit*D) / (G + k_gate*D)."""
    factor = np.where(diff <= 0, 1.0, rule.area_factor) if rule.factor_with_diode_only else rule.area_factor
    a = factor * conductor - rule.diode_area_credit * diff
    a_eff = np.where(a > 0.0, a, 0.0)  # Python's max(0.0, a): a only when a > 0
    return a_eff / (gate + rule.diode_gate_factor * diff)


def _utilization(ratio: np.ndarray, limit: np.ndarray) -> np.ndarray:
    """_ratios.utilization, elementwise."""
    with np.errstate(divide="ignore", invalid="ignore"):
        q = ratio / limit
    return np.where(limit > 0, q, np.where(ratio > 0, np.inf, 0.0))


def _union_measures(rects: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Exact (area, perimeter) of the union of K closed rectangles per row, (n, K, 4).

    The K rectangles' x and y coordinates cut the plane into (2K-1)^2 cells (some of
    zero width or height when coordinates repeat); a cell is covered when some
    rectangle holds it (closed: its low edges at or below the cell's, its high edges
    at or above). Area is the sum of covered cells; the horizontal boundary
    is, per column, its width times the changes between covered and uncovered along y
    (outside counts as uncovered), the vertical one likewise per row. A repeated
    coordinate gives a zero-size cell that is covered exactly when a rectangle reaching
    it is, so touching rectangles merge as closed sets do. Padding a row with copies of
    one of its own rectangles changes nothing.
    """
    k = rects.shape[1]
    # Each (K, n), C-contiguous: n last, so that every operation below runs along it
    # (ufunc results keep their inputs' memory order, so a strided start stays slow).
    x0, y0, x1, y1 = np.ascontiguousarray(rects.transpose(2, 1, 0))
    xs = np.sort(np.concatenate([x0, x1]), axis=0)
    ys = np.sort(np.concatenate([y0, y1]), axis=0)
    in_col = (x0[None] <= xs[:-1, None]) & (x1[None] >= xs[1:, None])  # (columns, K, n)
    in_row = (y0[None] <= ys[:-1, None]) & (y1[None] >= ys[1:, None])  # (rows, K, n)
    cov = in_col[:, None, 0] & in_row[None, :, 0]  # (columns, rows, n)
    for j in range(1, k):
        cov |= in_col[:, None, j] & in_row[None, :, j]
    wx, wy = xs[1:] - xs[:-1], ys[1:] - ys[:-1]
    area = ((cov * wy[None]).sum(axis=1) * wx).sum(axis=0)
    changes_y = cov[:, 0].astype(np.int64) + cov[:, -1] + (cov[:, 1:] != cov[:, :-1]).sum(axis=1)
    changes_x = cov[0].astype(np.int64) + cov[-1] + (cov[1:] != cov[:-1]).sum(axis=0)
    return area, (changes_y * wx).sum(axis=0) + (changes_x * wy).sum(axis=0)


def _single_component(touch: np.ndarray, comp: np.ndarray, count: int) -> tuple[np.ndarray, np.ndarray]:
    """Per row: whether the touched elements lie in at most one component, and its
    index (-1 when nothing is touched)."""
    if touch.shape[1] == 0:
        none = np.full(touch.shape[0], _NONE, dtype=np.int64)
        return np.ones(touch.shape[0], dtype=bool), none
    lo = np.where(touch, comp[None, :], count).min(axis=1)
    hi = np.where(touch, comp[None, :], _NONE).max(axis=1)
    return (hi == _NONE) | (lo == hi), hi


def _add_union_change(many: np.ndarray, rows: np.ndarray, k_local: np.ndarray, local: np.ndarray,
                      same: np.ndarray, rr: np.ndarray, d_area: np.ndarray, d_perim: np.ndarray) -> None:
    """d_area, d_perim of rows ``many`` (two or more routed neighbours): the exact change
    of union area and perimeter, in one grid measure for without and with r."""
    s = same
    sub = local[rows[many]]
    k = int(k_local[many].max())
    hit_row, hit_col = np.nonzero(sub)
    start = np.concatenate([[0], np.cumsum(k_local[many])[:-1]])
    slot = np.arange(len(hit_row)) - start[hit_row]
    q = np.empty((len(many), k, 4), dtype=np.int64)
    q[:] = s[hit_col[start]][:, None, :]  # pad with the row's first neighbour
    q[hit_row, slot] = s[hit_col]
    box = rr[many]  # clip to r grown by 1 DBU: the change lies inside r
    q[:, :, 0] = np.maximum(q[:, :, 0], box[:, None, 0] - 1)
    q[:, :, 1] = np.maximum(q[:, :, 1], box[:, None, 1] - 1)
    q[:, :, 2] = np.minimum(q[:, :, 2], box[:, None, 2] + 1)
    q[:, :, 3] = np.minimum(q[:, :, 3], box[:, None, 3] + 1)
    # One call for both unions: without r (q padded with its first rectangle) and with.
    both = np.concatenate([np.concatenate([q, q[:, :1, :]], axis=1),
                           np.concatenate([q, box[:, None, :]], axis=1)])
    a, p = _union_measures(both)
    d_area[many] = a[len(many):] - a[:len(many)]
    d_perim[many] = p[len(many):] - p[:len(many)]


# -- merges: the scalar walk replayed once per signature, as a program over columns ------

class _Node:
    """A per-candidate column inside a traced program (its slot in the value list)."""

    __slots__ = ("slot",)

    def __init__(self, slot: int) -> None:
        self.slot = slot


Value = float | int | bool | _Node  # a constant of the signature, or a column


def _arg_key(a: object) -> tuple:
    if isinstance(a, _Node):
        return ("n", a.slot)
    if isinstance(a, float):
        return ("f", a.hex())  # bit-exact: 0.0 and -0.0 stay apart
    if isinstance(a, (bool, int)):
        return (type(a).__name__, a)
    return ("o", id(a))


class _Tape:
    """A straight-line program recorded while the scalar walk is replayed.

    Every operation whose operands are all constants is done at once, in Python, by
    the same expression the scalar path evaluates; only operations that involve a
    per-candidate column are recorded. Equal operations are recorded once (so gates
    whose sums change alike share one column)."""

    def __init__(self, inputs: int) -> None:
        self.inputs = [_Node(i) for i in range(inputs)]
        self.size = inputs
        self.ops: list[tuple[int, Callable[..., np.ndarray], tuple[tuple[bool, object], ...]]] = []
        self.memo: dict[tuple, _Node] = {}

    def op(self, fn: Callable[..., np.ndarray], *args: object) -> _Node:
        key = (fn, tuple(_arg_key(a) for a in args))
        got = self.memo.get(key)
        if got is None:
            got = self.memo[key] = _Node(self.size)
            self.size += 1
            self.ops.append((got.slot, fn, tuple((isinstance(a, _Node), a.slot if isinstance(a, _Node) else a)
                                                 for a in args)))
        return got

    def run(self, inputs: list[np.ndarray]) -> list:
        values: list = list(inputs) + [None] * (self.size - len(inputs))
        for slot, fn, args in self.ops:
            values[slot] = fn(*[values[a] if is_node else a for is_node, a in args])
        return values


def _is_col(*values: object) -> bool:
    return any(isinstance(v, _Node) for v in values)


def _t_add(t: _Tape, a: Value, b: Value) -> Value:
    return t.op(np.add, a, b) if _is_col(a, b) else a + b  # type: ignore[operator]


def _t_sub(t: _Tape, a: Value, b: Value) -> Value:
    return t.op(np.subtract, a, b) if _is_col(a, b) else a - b  # type: ignore[operator]


def _t_max(t: _Tape, a: Value, b: Value) -> Value:
    return t.op(np.maximum, a, b) if _is_col(a, b) else max(a, b)  # type: ignore[type-var]


def _t_where(t: _Tape, cond: Value, a: Value, b: Value) -> Value:
    if isinstance(cond, _Node):
        return t.op(np.where, cond, a, b)
    return a if cond else b


def _t_or(t: _Tape, a: Value, b: Value) -> Value:
    if a is True or b is True:
        return True
    if a is False:
        return b
    if b is False:
        return a
    return t.op(np.logical_or, a, b)


def _t_nonzero(t: _Tape, a: Value) -> Value:
    """The scalar's truth test of a sum change (``if d[lane]``)."""
    return t.op(np.not_equal, a, 0.0) if isinstance(a, _Node) else bool(a)


def _scaled_area(area: np.ndarray, scale: float, cell: float) -> np.ndarray:
    return area * scale + cell  # int64 * float: converted once, then two roundings


def _scaled_side(perim: np.ndarray, scale: float, thickness: float) -> np.ndarray:
    return perim * scale * thickness


def _t_conductor(t: _Tape, model: StepModel, step: int, measure: str, area: Value, cell: float,
                 perim: Value) -> Value:
    """StepModel.conductor."""
    if measure == "area":
        if isinstance(area, _Node):
            return t.op(_scaled_area, area, model.scale_area, cell)
        return model.conductor(step, measure, area, cell, 0)  # type: ignore[arg-type]
    if model.is_cut[step]:
        return 0.0
    if isinstance(perim, _Node):
        return t.op(_scaled_side, perim, model.scale_length, model.thickness[step])
    return model.conductor(step, measure, 0, cell, perim)  # type: ignore[arg-type]


def _ratio_column(conductor: np.ndarray, factor: float, credit: float, g_eff: float) -> np.ndarray:
    a = factor * conductor - credit
    return np.where(a > 0.0, a, 0.0) / g_eff  # Python's max(0.0, a): a only when a > 0


def _t_ratio(t: _Tape, rule: Rule, conductor: Value, gate: float, diff: float) -> Value:
    """Rule.ratio with the component's G and D constant: the factor, the credit and
    the effective gate are the scalar's own subexpressions."""
    if not isinstance(conductor, _Node):
        return rule.ratio(conductor, gate, diff)  # type: ignore[arg-type]
    factor = rule.area_factor
    if rule.factor_with_diode_only and diff <= 0:
        factor = 1.0
    return t.op(_ratio_column, conductor, factor, rule.diode_area_credit * diff,
                gate + rule.diode_gate_factor * diff)


def _t_term(t: _Tape, model: StepModel, step: int, gi: int, area: Value, cell: float, perim: Value,
            gate: float, diff: float) -> Value:
    """StepModel.term."""
    conductor = _t_conductor(t, model, step, model.groups[gi][0], area, cell, perim)
    rule = model.term_rule[step][gi]
    if rule is None:
        return t.op(np.divide, conductor, gate) if isinstance(conductor, _Node) else conductor / gate  # type: ignore[operator]
    return _t_ratio(t, rule, conductor, gate, diff)


def _nonpositive_limit(ratio: np.ndarray) -> np.ndarray:
    return np.where(ratio > 0, np.inf, 0.0)


def _t_utilization(t: _Tape, ratio: Value, limit: float) -> Value:
    """_ratios.utilization."""
    if not isinstance(ratio, _Node):
        return utilization(ratio, limit)  # type: ignore[arg-type]
    return t.op(np.divide, ratio, limit) if limit > 0 else t.op(_nonpositive_limit, ratio)


_NO_CHANGE: tuple[Value, Value] = (0.0, 0.0)


def _t_entries(t: _Tape, model: StepModel, step: int, comp: Comp, area: Value, perim: Value,
               cars: dict, deltas: dict[tuple[int, int], list[Value]], pins_ox: list[dict[str, float]],
               partial: bool) -> list[Value]:
    """The utilizations ``_assess.comp_entries`` gives (``utilization_only``).

    A cumulative check takes the best of ``cars + delta`` over the gates; gates whose
    change is one column are taken together as ``max(cars) + column``, which equals
    the best of the per-gate sums because rounding to nearest is monotone."""
    out: list[Value] = []
    if partial:
        for key in model.partial_checks[step]:
            if key.oxide not in comp.gate_ox:
                continue
            conductor = _t_conductor(t, model, step, key.measure, area, comp.cell, perim)
            ratio = _t_ratio(t, key.rule, conductor, comp.gate, comp.diff)
            out.append(_t_utilization(t, ratio, key.rule.partial_limit(comp.diff)))
    lane = model.lane[step]
    for key in model.cumulative_checks[step]:
        if key.oxide not in comp.gate_ox:
            continue
        gi = model.group_index[(key.measure, key.oxide)]
        best: Value = -1.0  # comp_entries starts from -1.0 as well
        by_column: dict[int, tuple[float, _Node]] = {}
        for p in comp.gates:
            if key.oxide in pins_ox[p]:
                car = cars[(p, gi)][step]
                d = deltas.get((p, gi), _NO_CHANGE)[lane]
                if isinstance(d, _Node):
                    prior = by_column.get(d.slot)
                    if prior is None or car > prior[0]:
                        by_column[d.slot] = (car, d)
                else:
                    best = max(best, car + d)  # type: ignore[operator]
        for car, d in by_column.values():
            best = _t_max(t, best, _t_add(t, car, d))
        out.append(_t_utilization(t, best, key.rule.cumulative_limit(comp.diff)))
    return out


@dataclass(frozen=True)
class _Program:
    """A signature's scores as a function of the per-candidate columns."""

    tape: _Tape
    worst_change: Value
    worst_net: Value

    def run(self, inputs: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
        n = len(inputs[0])
        values = self.tape.run(inputs) if self.tape.ops else inputs

        def out(v: Value) -> np.ndarray:
            got = values[v.slot] if isinstance(v, _Node) else v
            return np.broadcast_to(np.asarray(got, dtype=_F8), (n,))

        return out(self.worst_change), out(self.worst_net)


StepGroups = list[list[tuple[list[Comp], int | None]]]  # per step from the first: (comps, local)


def _trace(state: NetState, assessment: Assessment, first: int, steps: StepGroups,
           locals_count: int) -> _Program | None:
    """Replay ``_whatif.score`` (detail=False) for every candidate of one signature.

    ``steps[s - first]`` lists the candidate groups at step s: the existing components
    each joins, and which local change (dA, dP inputs 2j, 2j+1) it adds on layer s.
    Everything else is a constant of the signature and is folded while tracing; None
    when the scalar path should decide (a check without a gate to carry it, or
    aggregates too large for exact int64 columns)."""
    model = state.model
    pins_ox = assessment.pins_ox
    cars = assessment.cars
    anchor = state.anchor_of_pin
    t = _Tape(2 * locals_count)
    deltas: dict[tuple[int, int], list[Value]] = {}
    worst_change: Value = 0.0
    worst_net: Value = assessment.worst_below[first]
    for s in range(first, model.steps):
        at_s = state.comp_at[s]
        lane = model.lane[s]
        touched: set[Comp] = set()
        for comps, local in steps[s - first]:
            touched.update(comps)
            merged = len(comps) != 1 or local is not None
            if merged:
                group = Comp()
                for c in comps:
                    group.absorb(c)
            else:
                (group,) = comps
            area: Value = group.area
            perim: Value = group.perim
            if local is not None:
                if not (abs(group.area) < SAFE_AGGREGATE and abs(group.perim) < SAFE_AGGREGATE):
                    return None
                area = _t_add(t, area, t.inputs[2 * local])
                perim = _t_add(t, perim, t.inputs[2 * local + 1])
            if group.gate <= 0:
                continue
            if not _consistent(group, pins_ox):
                return None
            if merged:  # this step's term changes for every gate in the group
                new_terms: dict[int, Value] = {}
                for p in group.gates:
                    old = at_s[anchor[p]]
                    for gi, (_measure, oxide) in enumerate(model.groups):
                        if oxide not in pins_ox[p]:
                            continue
                        if gi not in new_terms:
                            new_terms[gi] = _t_term(t, model, s, gi, area, group.cell, perim,
                                                    group.gate, group.diff)
                        d = deltas.get((p, gi))
                        if d is None:
                            d = deltas[(p, gi)] = [0.0, 0.0]
                        change = _t_sub(t, new_terms[gi], model.term(s, gi, old.area, old.cell, old.perim,
                                                                     old.gate, old.diff))
                        d[lane] = _t_add(t, d[lane], change)
                for u in _t_entries(t, model, s, group, area, perim, cars, deltas, pins_ox, True):
                    worst_change = _t_max(t, worst_change, u)
                continue
            gates = set(group.gates)
            moved: Value = False
            for (p, _gi), d in deltas.items():
                if p in gates:
                    moved = _t_or(t, moved, _t_nonzero(t, d[lane]))
            worst_net = _t_max(t, worst_net, assessment.partial_worst[s].get(group, 0.0))
            if moved is not True:  # unchanged: its own worst entries count as they are
                still = _unchanged_worst(assessment, s, group)
                worst_net = _t_max(t, worst_net, _t_where(t, moved, 0.0, still))
            if moved is False:
                continue
            for u in _t_entries(t, model, s, group, area, perim, cars, deltas, pins_ox, False):
                worst_change = _t_max(t, worst_change, _t_where(t, moved, u, 0.0))
        worst_net = _t_max(t, worst_net, assessment.worst_untouched(s, touched))
    # The scalar raises its net worst to the change worst after every change; all
    # utilizations here are >= 0, so doing it once at the end gives the same maximum.
    worst_net = _t_max(t, worst_net, worst_change)
    return _Program(t, worst_change, worst_net)


# -- one layer's candidates ---------------------------------------------------------------

def _score_layer(tab: _Tables, state: NetState, assessment: Assessment, layer: int,
                 r: np.ndarray, merges: bool = True) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Column scores of the candidates on one layer: (done, worst change, worst net,
    added area); rows not done are left to the scalar path."""
    model = state.model
    lt = _layer_tables(tab, state, layer)
    plan = _plan_for(model, layer)
    n = len(r)
    xlo, ylo, xhi, yhi = (c[:, None] for c in _columns(r))
    s = lt.same
    sx0, sy0, sx1, sy1 = lt.same_cols
    ix = np.minimum(xhi, sx1) - np.maximum(xlo, sx0)
    iy = np.minimum(yhi, sy1) - np.maximum(ylo, sy0)
    edge = (ix >= 0) & (iy >= 0) & ((ix > 0) | (iy > 0))  # _geometry.edge_touch

    def overlapping(q: tuple[np.ndarray, ...]) -> np.ndarray:  # _geometry.overlap
        return ((np.minimum(xhi, q[2]) > np.maximum(xlo, q[0]))
                & (np.minimum(yhi, q[3]) > np.maximum(ylo, q[1])))

    touch_l = np.concatenate([edge, overlapping(lt.below)], axis=1)
    ok, c_l = _single_component(touch_l, lt.comp_l, len(lt.comps_l))
    if lt.comp_next is not None:
        touch_next = np.concatenate([touch_l, overlapping(lt.above)], axis=1)
        ok_next, c_next = _single_component(touch_next, lt.comp_next, len(lt.comps_next or ()))
        ok &= ok_next
    else:
        c_next = np.full(n, _NONE, dtype=np.int64)
    local = edge & lt.routed[None, :]
    n_local = local.sum(axis=1)
    fits = (n_local <= MAX_LOCAL) & ((r > -SAFE_COORD) & (r < SAFE_COORD)).all(axis=1)
    merge_rows = np.nonzero(fits & ~ok)[0] if merges else np.zeros(0, dtype=np.int64)  # several components at L or L+1
    ok &= fits

    # Group the candidates by the pair of components they join.
    span = len(lt.comps_next or ()) + 1
    keys = (c_l + 1) * span + (c_next + 1)
    uniq, inverse = np.unique(keys[ok], return_inverse=True)
    stack = tab.groups.get(layer)
    if stack is None:
        stack = tab.groups[layer] = _GroupStack()
    where = np.empty(len(uniq), dtype=np.int64)
    for j, key in enumerate(uniq.tolist()):
        pair = (key // span - 1, key % span - 1)
        if pair not in stack.row:
            cl, cn = pair
            comp_l = lt.comps_l[cl] if cl >= 0 else None
            comp_n = lt.comps_next[cn] if cn >= 0 and lt.comps_next is not None else None
            stack.add(pair, _build_group(state, assessment, plan, layer, comp_l, comp_n))
        where[j] = stack.row[pair]
    rows = np.nonzero(ok)[0]
    inverse = where[inverse]  # row of each candidate's group in the stack, -1: scalar
    if (inverse < 0).any():
        keep = inverse >= 0
        rows, inverse = rows[keep], inverse[keep]
    merge_rows, programs, program_of = _merge_programs(
        tab, state, assessment, layer, lt, touch_l, touch_next if lt.comp_next is not None else None,
        merge_rows)
    done = np.zeros(n, dtype=bool)
    done[rows] = True
    done[merge_rows] = True
    zeros = np.zeros(n, dtype=_F8)
    out_change, out_net, out_added = zeros.copy(), zeros.copy(), zeros.copy()
    singles = len(rows)
    rows = np.concatenate([rows, merge_rows])
    if len(rows) == 0:
        return done, zeros, zeros, zeros

    # Area and perimeter each candidate adds on layer L (NetState.local_delta); the
    # single-component rows first, then the merges.
    rr = r[rows]
    w, h = rr[:, 2] - rr[:, 0], rr[:, 3] - rr[:, 1]
    d_area = w * h
    d_perim = 2 * (w + h)
    k_local = n_local[rows]
    one = np.nonzero(k_local == 1)[0]
    if len(one):
        col = np.argmax(local[rows[one]], axis=1)
        qx, qy = ix[rows[one], col], iy[rows[one], col]
        d_area[one] -= np.where((qx > 0) & (qy > 0), qx * qy, 0)
        d_perim[one] -= 2 * (qx + qy)  # _shared_perimeter: qx, qy >= 0 for a contact
    for low, high in _LOCAL_BUCKETS:
        many = np.nonzero((k_local >= low) & (k_local <= high))[0]
        if len(many):
            _add_union_change(many, rows, k_local, local, s, rr, d_area, d_perim)
    if not model.side_needed[layer]:
        d_perim[:] = 0
    out_added[rows] = d_area.astype(_F8) * model.scale_area
    for j, program in enumerate(programs):
        at = singles + np.nonzero(program_of == j)[0]
        wc, wn = program.run([d_area[at], d_perim[at]])
        out_change[rows[at]] = wc
        out_net[rows[at]] = wn
    if singles == 0:
        return done, out_change, out_net, out_added
    rows, d_area, d_perim = rows[:singles], d_area[:singles], d_perim[:singles]

    # The pair's constants, one row per candidate.
    def column(name: str, dtype: type = _F8) -> np.ndarray:
        return stack.array(name, dtype)[inverse]

    columns = column  # a list field gives (n, its length)

    area = column("area", np.int64) + d_area
    perim = column("perim", np.int64) + d_perim
    gate, diff = column("gate"), column("diff")
    conductor = {"area": area.astype(_F8) * model.scale_area + column("cell")}
    if model.is_cut[layer]:
        conductor["side"] = np.zeros(len(rows), dtype=_F8)
    else:
        conductor["side"] = perim.astype(_F8) * model.scale_length * model.thickness[layer]

    worst_change = np.zeros(len(rows), dtype=_F8)
    if plan.partial:
        active, limit = columns("part_active", bool), columns("part_limit")
        for i, key in enumerate(plan.partial):
            if active[:, i].any():
                u = _utilization(_ratio(key.rule, conductor[key.measure], gate, diff), limit[:, i])
                worst_change = np.maximum(worst_change, np.where(active[:, i], u, 0.0))
    deltas: dict[int, np.ndarray] = {}
    moved = np.zeros(len(rows), dtype=bool)
    if plan.terms:
        present, term_old = columns("present", bool), columns("term_old")
    for i, (gi, measure, rule) in enumerate(plan.terms):
        if present[:, i].any():
            c = conductor[measure]
            new = c / gate if rule is None else _ratio(rule, c, gate, diff)
            d = np.where(present[:, i], new - term_old[:, i], 0.0)
            deltas[gi] = d
            moved |= d != 0
    no_change = np.zeros(len(rows), dtype=_F8)
    if plan.cumulative:
        active, best, limit = columns("cum_active", bool), columns("cum_best"), columns("cum_limit")
        for i, (_key, gi) in enumerate(plan.cumulative):
            if active[:, i].any():
                u = _utilization(best[:, i] + deltas.get(gi, no_change), limit[:, i])
                worst_change = np.maximum(worst_change, np.where(active[:, i], u, 0.0))
    if plan.later and moved.any():
        active = columns("later_active", bool) & moved[:, None]
        own, other, limit = columns("later_own"), columns("later_other"), columns("later_limit")
        for i, (_s, _key, gi) in enumerate(plan.later):
            if active[:, i].any():
                best = np.maximum(own[:, i] + deltas.get(gi, no_change), other[:, i])
                u = _utilization(best, limit[:, i])
                worst_change = np.maximum(worst_change, np.where(active[:, i], u, 0.0))
    worst_net = np.maximum(np.maximum(column("base"), np.where(moved, column("if_moved"),
                                                                  column("if_still"))), worst_change)
    out_change[rows] = worst_change
    out_net[rows] = worst_net
    return done, out_change, out_net, out_added


def _touched_sets(touch: np.ndarray, comp: np.ndarray) -> list[tuple[int, ...]]:
    """Per row of ``touch``, the sorted indices of the components its elements lie in."""
    hit_row, hit_col = np.nonzero(touch)
    span = int(comp.max()) + 1 if len(comp) else 1
    pairs = np.unique(hit_row * span + comp[hit_col])
    bounds = np.searchsorted(pairs // span, np.arange(touch.shape[0] + 1)).tolist()
    comps = (pairs % span).tolist()
    return [tuple(comps[bounds[i]:bounds[i + 1]]) for i in range(touch.shape[0])]


def _merge_programs(tab: _Tables, state: NetState, assessment: Assessment, layer: int,
                    lt: _LayerTables, touch_l: np.ndarray, touch_next: np.ndarray | None,
                    rows: np.ndarray) -> tuple[np.ndarray, list[_Program], np.ndarray]:
    """The merge rows a traced program answers, the programs, and each row's program.

    A one-rectangle candidate's signature is the set of components it touches at L
    and the set at L+1 (the sets at later steps follow: components only grow)."""
    if len(rows) == 0:
        return rows, [], rows
    sets_l = _touched_sets(touch_l[rows], lt.comp_l)
    sets_next = (_touched_sets(touch_next[rows], lt.comp_next) if touch_next is not None
                 and lt.comp_next is not None else [()] * len(rows))
    cache = tab.programs.setdefault(layer, {})
    index: dict[tuple, int] = {}
    programs: list[_Program] = []
    program_of = np.empty(len(rows), dtype=np.int64)
    for i, key in enumerate(zip(sets_l, sets_next)):
        j = index.get(key)
        if j is None:
            if key not in cache:
                cache[key] = _trace_one_rect(state, assessment, layer, lt, *key)
            program = cache[key]
            j = index[key] = len(programs) if program is not None else -1
            if program is not None:
                programs.append(program)
        program_of[i] = j
    keep = program_of >= 0
    return rows[keep], programs, program_of[keep]


def _trace_one_rect(state: NetState, assessment: Assessment, layer: int, lt: _LayerTables,
                    set_l: tuple[int, ...], set_next: tuple[int, ...]) -> _Program | None:
    """The program of a one-rectangle candidate on ``layer`` touching the components
    ``set_l`` at L and ``set_next`` at L+1 (indices into the layer tables' lists)."""
    comps_l = [lt.comps_l[i] for i in set_l]
    steps: StepGroups = [[(comps_l, 0)]]
    if lt.comps_next is not None:
        comps_next = [lt.comps_next[i] for i in set_next]
        steps.append([(comps_next, None)])
        reps = [next(iter(c.members)) for c in comps_next]
        for s in range(layer + 2, state.model.steps):
            at_s = state.comp_at[s]
            steps.append([(list({id(at_s[e]): at_s[e] for e in reps}.values()), None)])
    return _trace(state, assessment, layer, steps, 1)


def _costs(costs: CostModel, u: np.ndarray) -> np.ndarray:
    """CostModel.cost per entry: the flat and the linear parts in columns, the curved
    part (knee < u <= 1, a power) by the model itself so that it rounds the same."""
    out = np.zeros(len(u), dtype=_F8)
    if type(costs) is not CostModel:  # a subclass may cost differently: ask it
        out[:] = [costs.cost(x) for x in u.tolist()]
        return out
    flat = u <= costs.knee
    within = u <= 1.0
    over = ~flat & ~within
    out[over] = costs.violation + costs.scale * costs.over_slope * (u[over] - 1.0)
    curved = ~flat & within
    if curved.any():
        out[curved] = [costs.cost(x) for x in u[curved].tolist()]
    return out


def _score_one_rect(state: NetState, assessment: Assessment, layers: np.ndarray, rects: np.ndarray,
                    costs: CostModel, merges: bool
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(worst change, worst net, cost, added area, vectorized) of one-rectangle candidates."""
    n = len(layers)
    worst_change = np.zeros(n, dtype=_F8)
    worst_net = np.zeros(n, dtype=_F8)
    added = np.zeros(n, dtype=_F8)
    cost = np.zeros(n, dtype=_F8)
    vectorized = np.zeros(n, dtype=bool)
    if n:
        tab = _tables(state, assessment)
        for layer in np.unique(layers).tolist():
            idx = np.nonzero(layers == layer)[0]
            done, wc, wn, aa = _score_layer(tab, state, assessment, layer, rects[idx], merges)
            hit = idx[done]
            vectorized[hit] = True
            worst_change[hit], worst_net[hit], added[hit] = wc[done], wn[done], aa[done]
        cost[vectorized] = _costs(costs, worst_change[vectorized])
        names = [l.name for l in state.model.deck.layers]
        for i in np.nonzero(~vectorized)[0].tolist():
            layer = int(layers[i])
            rect = tuple(int(v) for v in rects[i])
            s = score(state, assessment, [Shape(layer, rect)], costs, detail=False)  # type: ignore[arg-type]
            worst_change[i], worst_net[i], cost[i] = s.worst_change_utilization, s.worst_utilization, s.cost
            added[i] = s.added_area_um2.get(names[layer], 0.0)
    return worst_change, worst_net, cost, added, vectorized


def score_columns(state: NetState, assessment: Assessment, layers: np.ndarray, rects: np.ndarray,
                  costs: CostModel, shape_count: np.ndarray | None = None,
                  merges: bool = True) -> BatchScores:
    """Score candidates against the net: candidate i is the ``shape_count[i]`` rows of
    (``layers``, ``rects``) after those of the candidates before it (one row each when
    ``shape_count`` is None); entry i equals ``score(state, assessment, its shapes,
    costs, detail=False)``, its added area summed over its layers. One-rectangle
    candidates take the column path; the others are scored one by one, from Shape
    objects built directly (the engine validated the columns as a whole).
    ``merges=False`` hands merges to the scalar path as well (a baseline for the bench).
    Inputs are trusted."""
    layers = np.asarray(layers, dtype=np.int64).reshape(-1)
    rects = np.asarray(rects, dtype=np.int64).reshape(-1, 4)
    if shape_count is None:
        wc, wn, cost, added, vectorized = _score_one_rect(state, assessment, layers, rects, costs, merges)
    else:
        counts = np.asarray(shape_count, dtype=np.int64).reshape(-1)
        first = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.int64)
        single = np.nonzero(counts == 1)[0]
        n = len(counts)
        wc, wn = np.zeros(n, dtype=_F8), np.zeros(n, dtype=_F8)
        cost, added = np.zeros(n, dtype=_F8), np.zeros(n, dtype=_F8)
        vectorized = np.zeros(n, dtype=bool)
        rows = first[single]
        (wc[single], wn[single], cost[single], added[single],
         vectorized[single]) = _score_one_rect(state, assessment, layers[rows], rects[rows], costs, merges)
        layer_list, rect_list = layers.tolist(), rects.tolist()
        for i in np.nonzero(counts != 1)[0].tolist():
            start, stop = int(first[i]), int(first[i] + counts[i])
            shapes = [Shape(layer_list[k], tuple(rect_list[k])) for k in range(start, stop)]  # type: ignore[arg-type]
            s = score(state, assessment, shapes, costs, detail=False)
            wc[i], wn[i], cost[i] = s.worst_change_utilization, s.worst_utilization, s.cost
            added[i] = sum(s.added_area_um2.values())  # as the servicer's batch_into sums it
    limit = 1.0 + TOLERANCE  # _ratios.is_legal
    return BatchScores(wc, wn, wn <= limit, ~(wc <= limit), cost, added, vectorized)


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
        far = np.nonzero((rect_arr >= limit).any(axis=1))[0]
        if len(far):
            raise InputError("a coordinate is outside +-2^62 DBU", f"rects[{int(far[0])}]")
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
