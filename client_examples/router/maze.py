"""A* maze search over (layer, x, y) track nodes, from a gate pin to the net's tree.

Moves: one base pitch along a layer's preferred direction, or a via to the layer above
or below where both layers have a track. Costs are in um of wire: length times the
layer's factor, a fixed cost per via, the rip-up history of the node, and (soft search
only) a penalty per node another net already uses.

The search runs from the sink (a gate) towards the tree that already holds the driver,
so the start of every partial path is the gate side: while a path has only climbed, all
of it is connected to the gate when its current layer is etched (nothing above exists
yet). In antenna-aware mode those gate-side wire moves are scored by the service, as
the whole partial path plus the run being extended, and so is every move that joins
the tree (the complete path). Nodes are popped in waves; each wave's candidates go to
the service in one ScoreBatch message. The returned router cost (0 below the deck's
knee, steep near a limit, >= 1e6 above) is added, as its increase over the partial
path's cost so far, to the A* cost.
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from grid import Node, Occupancy, TrackGrid

# A path element: ("run", layer k, x1, y1, x2, y2) on a routing layer, or
# ("via", cut c, x, y) between routing layers c and c + 1 (both DBU).
Item = tuple
# candidates -> (router cost, worst utilization among the ratios they change), per candidate
Scorer = Callable[[Sequence[tuple[Item, ...]]], tuple[np.ndarray, np.ndarray]]


@dataclass(frozen=True)
class Costs:
    layer_factor: tuple[float, ...] = (3.0, 1.0, 1.0, 0.8, 0.8)  # M1 is for pin access
    via: float = 2.0  # um of wire a via is worth
    history: float = 1.0  # um per unit of rip-up history on a node
    other_net: float = 40.0  # um per node shared with another net (soft search)
    antenna: float = 4.0  # um per unit of the service's router cost
    # The most a path pays for antenna cost (um): over a limit the service's cost is
    # >= 1e6, which would make the search flood the whole block before it accepts a
    # path it cannot avoid; such a path is repaired from advice before it is committed.
    antenna_cap: float = 400.0
    wave: int = 48  # nodes popped per expansion wave (one score message)
    # Weighted A*: the heuristic times this (> 1 trades a little path cost for far
    # fewer expansions; a found path costs at most this factor more than the cheapest).
    greed: float = 1.4
    sample: int = 12  # gate-side runs are scored every `sample` base steps of length
    # Gate-side paths with less metal than this are not scored (a saving of calls: so
    # little conductor is far below any knee of the demo deck; the complete path is
    # checked before it is committed whatever the search did).
    min_scored_um: float = 6.0
    # Along one gate-side run every ratio the run changes is affine in its length with
    # a non-negative intercept (pads, in-cell area, earlier steps' terms), so after a
    # sample with utilization u at length l no length l' >= l exceeds u * l' / l. The
    # next sample is taken where that bound reaches `quiet` (below the cost knee).
    quiet: float = 0.5
    # Expansion budgets. A search whose every way to the tree breaks a limit pays the
    # antenna cap on every path, so it expands every node within the cap of the
    # cheapest path: for the cap above that is most of the block, and the search ran
    # out of budget and left the net unrouted. The scored search's budget therefore
    # follows the net's span (maze.expansion_budget); past it the path is searched
    # again without scores (the blind search) and repaired from advice before commit.
    max_expansions: int = 400_000  # any search
    scored_margin_um: float = 10.0  # the box around sink and tree, widened by this
    scored_per_node: float = 2.0  # budget per node of that box (all layers)
    scored_floor: int = 40_000


@dataclass
class SearchResult:
    items: tuple[Item, ...] | None  # from the sink to the tree; None: no path found
    cost: float
    expanded: int
    scored: int  # candidates sent to the service
    # No path: True when the expansion budget ran out (a path may exist), False when
    # every reachable node was expanded (none exists at this occupancy).
    out_of_budget: bool = False
    # Out of budget: antenna cost (um) of the cheapest path to the tree the search had
    # reached but not yet accepted, None if none. At the cap it means that path breaks
    # a limit, so the search must first expand everything within the cap of it.
    best_join_antenna: float | None = None

    @property
    def found(self) -> bool:
        return self.items is not None


def expansion_budget(grid: TrackGrid, sources: set[Node], targets: set[Node], margin_um: float,
                     per_node: float, floor: int, ceiling: int) -> int:
    """An expansion budget in proportion to the net's span: ``per_node`` times the
    nodes (all layers) of the box around the sink and the tree, widened by
    ``margin_um`` on each side, within [floor, ceiling]."""
    plane, ny = grid.plane, grid.ny
    cols = [(n % plane) // ny for n in (*sources, *targets)]
    rows = [n % ny for n in (*sources, *targets)]
    pad = int(margin_um * 1000 / grid.pitch)
    width = min(max(cols) + pad, grid.nx - 1) - max(min(cols) - pad, 0) + 1
    height = min(max(rows) + pad, ny - 1) - max(min(rows) - pad, 0) + 1
    return max(floor, min(ceiling, int(per_node * width * height * len(grid.layers))))


class _Labels:
    """Per-node search labels; ``before`` holds the path elements ahead of the current
    run, shared between labels (tuples), so a candidate is ``before + current run``."""

    def __init__(self) -> None:
        self.g: dict[Node, float] = {}
        self.run_start: dict[Node, Node] = {}
        self.before: dict[Node, tuple[Item, ...]] = {}
        self.gate_side: dict[Node, bool] = {}
        self.antenna: dict[Node, float] = {}
        self.metal: dict[Node, float] = {}  # um of run in the partial path
        self.next_sample: dict[Node, int] = {}  # run length (base steps) of the next score


def search(grid: TrackGrid, occ: Occupancy, net: str, sources: set[Node], targets: set[Node],
           costs: Costs, scorer: Scorer | None = None, soft: bool = False,
           max_expansions: int = 400_000) -> SearchResult:
    layers = grid.layers
    pitch_um = grid.pitch / 1000.0
    step_cost = [pitch_um * f for f in costs.layer_factor[:len(layers)]]
    min_step = min(step_cost)
    plane, ny = grid.plane, grid.ny
    wire_tab, pad_tab, history = occ.wire, occ.pad, occ.history
    fixed_wire, fixed_pad = occ.fixed_wire, occ.fixed_pad

    ti = [(t % plane) // ny for t in targets]
    tj = [t % ny for t in targets]
    bi0, bi1, bj0, bj1 = min(ti), max(ti), min(tj), max(tj)

    def h(n: Node) -> float:
        rest = n % plane
        i, j = rest // ny, rest % ny
        dx = bi0 - i if i < bi0 else (i - bi1 if i > bi1 else 0)
        dy = bj0 - j if j < bj0 else (j - bj1 if j > bj1 else 0)
        return costs.greed * ((dx + dy) * min_step + (costs.via if dx and dy else 0.0))

    def blocked(table, fixed, n: Node) -> float | None:
        """None: not usable; else the extra cost of using node n."""
        users = table.get(n)
        if not users or (len(users) == 1 and net in users):
            return 0.0
        if not soft:
            return None
        owner = fixed.get(n)
        if owner is not None and owner != net:
            return None
        return costs.other_net

    L = _Labels()
    heap: list[tuple[float, float, Node]] = []
    for s in sources:
        L.g[s], L.run_start[s], L.before[s], L.gate_side[s], L.antenna[s] = 0.0, s, (), True, 0.0
        L.metal[s] = 0.0
        L.next_sample[s] = costs.sample
        heapq.heappush(heap, (h(s), 0.0, s))
    parent: dict[Node, Node] = {}
    expanded = scored = 0

    def run_item(a: Node, b: Node) -> tuple[Item, ...]:
        if a == b:
            return ()
        k, ia, ja = grid.split(a)
        _, ib, jb = grid.split(b)
        return (("run", k, *grid.xy(ia, ja), *grid.xy(ib, jb)),)

    while heap:
        wave: list[Node] = []
        while heap and len(wave) < costs.wave:
            f, neg_g, u = heapq.heappop(heap)
            if -neg_g > L.g[u] + 1e-9:
                continue  # stale entry
            if u in targets:
                if not wave:
                    items = L.before[u] + run_item(L.run_start[u], u)
                    return SearchResult(items, L.g[u], expanded, scored)
                heapq.heappush(heap, (f, neg_g, u))
                break
            wave.append(u)
        if not wave:
            continue
        expanded += len(wave)
        if expanded > max_expansions:
            joins = [t for t in targets if t in L.g]
            best = min(joins, key=L.g.__getitem__) if joins else None
            paid = None if best is None else min(costs.antenna * L.antenna[best], costs.antenna_cap)
            return SearchResult(None, math.inf, expanded, scored, True, paid)
        # moves: (u, v, base cost, via between u's and v's layer?)
        moves: list[tuple[Node, Node, float, bool]] = []
        for u in wave:
            k, rest = divmod(u, plane)
            i, j = divmod(rest, ny)
            layer = layers[k]
            if layer.horizontal:
                steps = ((i - 1, j), (i + 1, j))
            else:
                steps = ((i, j - 1), (i, j + 1))
            for ni, nj in steps:
                if 0 <= ni < grid.nx and 0 <= nj < ny:
                    v = k * plane + ni * ny + nj
                    extra = blocked(wire_tab, fixed_wire, v)
                    if extra is not None:
                        moves.append((u, v, step_cost[k] + extra + costs.history * history.get(v, 0.0), False))
            for nk in (k - 1, k + 1):
                if 0 <= nk < len(layers) and grid.on_track(nk, i, j):
                    v = nk * plane + rest
                    a = blocked(pad_tab, fixed_pad, u)
                    b = blocked(pad_tab, fixed_pad, v)
                    if a is not None and b is not None:
                        moves.append((u, v, costs.via + a + b + costs.history * history.get(v, 0.0), True))
        # the wave's antenna candidates, one message
        antenna = [0.0] * len(moves)
        sampled: dict[int, int] = {}  # candidate -> its run length, for gate-side samples
        sampled_next: dict[int, int] = {}  # move -> the next sample length on its run
        if scorer is not None:
            asks: list[int] = []
            cands: list[tuple[Item, ...]] = []
            for m, (u, v, _c, is_via) in enumerate(moves):
                joins = v in targets
                if is_via:
                    if not joins:
                        continue
                    ku, iu, ju = grid.split(u)
                    cand = (L.before[u] + run_item(L.run_start[u], u)
                            + (("via", min(ku, v // plane), *grid.xy(iu, ju)),))
                else:
                    if not joins:
                        if not L.gate_side[u]:
                            continue
                        along = ny if layers[u // plane].horizontal else 1  # node-id stride of a step
                        length = abs(v - L.run_start[u]) // along
                        if length < L.next_sample[u] or L.metal[u] + pitch_um < costs.min_scored_um:
                            continue
                        sampled[len(cands)] = length
                    cand = L.before[u] + run_item(L.run_start[u], v)
                if cand:
                    asks.append(m)
                    cands.append(cand)
            if cands:
                values, utils = scorer(cands)
                scored += len(cands)
                for q, (m, c) in enumerate(zip(asks, values)):
                    antenna[m] = float(c)
                    if q in sampled:
                        length, u = sampled[q], float(utils[q])
                        bound = math.ceil(length * costs.quiet / u) if u > 0 else 1 << 30
                        sampled_next[m] = max(length + costs.sample, bound)
        for m, (u, v, c, is_via) in enumerate(moves):
            a_u = L.antenna[u]
            a_v = max(a_u, antenna[m])
            g = L.g[u] + c + min(costs.antenna * a_v, costs.antenna_cap) - min(costs.antenna * a_u, costs.antenna_cap)
            if g < L.g.get(v, float("inf")) - 1e-9:
                L.g[v] = g
                L.antenna[v] = a_v
                L.metal[v] = L.metal[u] + (0.0 if is_via else pitch_um)
                parent[v] = u
                if is_via:
                    ku, iu, ju = grid.split(u)
                    kv = v // plane
                    L.before[v] = (L.before[u] + run_item(L.run_start[u], u)
                                   + (("via", min(ku, kv), *grid.xy(iu, ju)),))
                    L.run_start[v] = v
                    L.gate_side[v] = L.gate_side[u] and kv > ku
                    L.next_sample[v] = costs.sample
                else:
                    L.before[v] = L.before[u]
                    L.run_start[v] = L.run_start[u]
                    L.gate_side[v] = L.gate_side[u]
                    L.next_sample[v] = sampled_next.get(m, L.next_sample[u])
                heapq.heappush(heap, (g + h(v), -g, v))
    return SearchResult(None, math.inf, expanded, scored)
