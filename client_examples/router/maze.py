"""A* maze search over (layer, x, y) track nodes, from a gate pin to the net's tree.

Moves: one base pitch along a layer's preferred direction, or a via to the layer above
or below where both layers have a track. Costs are in um of wire: length times the
layer's factor, a fixed cost per via, the rip-up history of the node, and (soft search
only) a penalty per node another net already uses.

The search runs from the sink (a gate) towards the tree that already holds the driver,
so the start of every partial path is the gate side: while a path has only climbed, all
of it is connected to the gate when its current layer is etched (nothing above exists
yet). In antenna-aware mode a ``Pricer`` prices two kinds of moves with the service's
router cost (0 below the deck's knee, steep near a limit, >= 1e6 above), added to the
A* cost as its increase over the partial path's cost so far:

* gate-side wire moves: the partial path plus the run being extended, priced from the
  budget of the path's component on its current layer (one Budget per partial path
  and layer, then evaluated locally), the service asked only where the budget does not
  cover the move. A run is sampled, not priced at every step (see Costs.quiet);
* moves that join the tree (the complete path): priced lazily. Such a move enters the
  heap at its cost without antenna (a lower bound); when one comes out of the heap
  unpriced, every unpriced join gathered so far is priced in one ScoreBatch message
  (each partial path sent once as a shared part), and those that cost more go back at
  their full cost. A* then still takes the cheapest complete path, and one message
  carries the joins of many waves.
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Protocol

from grid import Node, Occupancy, TrackGrid

# A path element: ("run", layer k, x1, y1, x2, y2) on a routing layer, or
# ("via", cut c, x, y) between routing layers c and c + 1 (both DBU).
Item = tuple


class Pricer(Protocol):
    """The service's router cost of candidates (the partial path ``before`` followed by
    ``extension``), and the worst utilization among the ratios they change."""

    def gate_side(self, asks: Sequence[tuple[tuple[Item, ...], int, Item]]) -> list[tuple[float, float]]:
        """Per ask (before, layer k, run item on k from the path's end): cost, utilization."""

    def joins(self, asks: Sequence[tuple[tuple[Item, ...], tuple[Item, ...]]]) -> list[float]:
        """Per ask (before, extension items): cost of the complete path."""

    def prefetch(self, before: tuple[Item, ...], k: int, run: Item) -> None:
        """A gate-side run on layer k starts from ``before``: it will likely be priced."""

    def flush(self) -> None:
        """Send what ``prefetch`` noted (without waiting for the answer)."""


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
    wave: int = 48  # nodes popped per expansion wave
    # Joins are priced in one ScoreBatch when an unpriced one comes out of the heap; the
    # search first expands up to `join_defer` more waves (nodes that cost at least as
    # much, which A* may need anyway) while fewer than `join_batch` are gathered, so a
    # message carries many joins. A join found meanwhile can only make the path cheaper.
    join_batch: int = 64
    join_defer: int = 16
    # Weighted A*: the heuristic times this (> 1 trades a little path cost for far
    # fewer expansions; a found path costs at most this factor more than the cheapest).
    greed: float = 1.4
    # Gate-side paths with less metal than this are not priced (so little conductor is
    # far below any knee of the demo deck; the complete path is checked before it is
    # committed whatever the search did).
    min_scored_um: float = 6.0
    sample: int = 12  # gate-side runs are priced every `sample` base steps of length
    # Along one gate-side run every ratio the run changes is affine in its length with
    # a non-negative intercept (pads, in-cell area, earlier steps' terms), so after a
    # sample with utilization u at length l no length l' >= l exceeds u * l' / l. The
    # next sample is taken where that bound reaches `quiet` (below the cost knee).
    quiet: float = 0.5
    # A run's budget is asked (not waited for) when the run reaches this many steps, a
    # few before its first price: the reply travels while the search goes on. Sooner
    # asks more budgets that are never used; later waits more.
    prefetch_at: int = 11
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
    # The screened aware mode searches a sink with prices only when its plain path
    # breaks a limit, and keeps that path (for the advice repair) when the priced search
    # runs out: its budget stops here. On blk_r, with the weight and via price below,
    # the priced searches that found a path took 4 000-19 000 expansions; one (n231)
    # found none within 150 000 and its plain path took a diode. At 60 000 every net
    # ends legal with the same paths, 90 000 expansions fewer; at 30 000 one stays
    # illegal. (With the plain search's weight and via price, legal paths took up to
    # 135 000 and 60 000 left a net illegal.)
    repriced_ceiling: int = 60_000
    # ... and its effort follows the plain search's: at most `repriced_effort` times the
    # expansions the plain search took (at least `repriced_floor`). On blk_r the priced
    # searches that found a legal path took 1.0-2.9 times the plain search's expansions.
    repriced_effort: float = 4.0
    repriced_floor: int = 10_000
    # ... and it looks for a legal path only, in a corridor in cost around the plain
    # path: no dearer (without antenna cost) than the plain path plus `detour_um` or
    # `detour_share` of its cost, whichever is more (maze.search's `within`). On blk_r the
    # legal paths it found cost 1-8 um more than the plain path, antenna cost included.
    detour_um: float = 10.0
    detour_share: float = 0.15
    # ... with its own heuristic weight: the detour bound, not the weight, bounds what
    # its path may cost, so it may be greedier than the plain search. On blk_r 2.0
    # against 1.4 took the priced searches from 0.53 to 0.32 million expansions, with
    # the same wirelength and 4 fewer vias, and one more legal path found (n139); 3.0
    # expanded more in all (its paths changed what later nets met) for 3 more vias.
    repriced_greed: float = 2.0
    # ... and its own price of a via (um of wire): a path that climbs to keep a gate's
    # low-layer metal under its limit adds cuts the plain path did not need, so the
    # priced search counts them dearer and takes, among the legal paths within the
    # detour, one that climbs with fewer cuts. On blk_r (aware against blind): 2 um
    # (the plain search's) +31 vias (+1.4%) and wirelength +0.30%; 3 um +18 vias and
    # +0.44%; 4 um +3 vias (+0.13%) and +0.44%, with 0.25 million more expansions in
    # all (one sink's priced search ran to its ceiling and its plain path took a diode).
    repriced_via: float = 4.0


@dataclass
class SearchResult:
    items: tuple[Item, ...] | None  # from the sink to the tree; None: no path found
    cost: float
    expanded: int
    scored: int  # candidates priced (locally from budgets or by the service)
    # No path: True when the expansion budget ran out (a path may exist), False when
    # every reachable node was expanded (none exists at this occupancy).
    out_of_budget: bool = False
    # Out of budget: antenna cost (um) of the cheapest priced path to the tree the
    # search had reached but not yet accepted, None if none. At the cap it means that
    # path breaks a limit, so the search must first expand everything within the cap.
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
        self.next_sample: dict[Node, int] = {}  # run length (base steps) of the next price


@dataclass
class _Join:
    """A move onto the tree: the complete path is ``before + extension``."""

    before: tuple[Item, ...]
    extension: tuple[Item, ...]
    g_base: float  # path cost with the antenna cost of the partial path only
    antenna_before: float  # router cost of the partial path (the max so far)
    g: float = 0.0  # current key: g_base until priced, then the full cost
    priced: bool = False
    cost: float = 0.0  # the complete path's router cost, once priced


@dataclass
class _Heap:
    """Nodes (>= 0) and joins (-1 - index) in one heap, ordered by (f, -g, seq)."""

    entries: list[tuple[float, float, int, int]] = field(default_factory=list)
    seq: int = 0

    def push(self, f: float, g: float, key: int) -> None:
        self.seq += 1
        heapq.heappush(self.entries, (f, -g, self.seq, key))

    def pop(self) -> tuple[float, float, int]:
        f, neg_g, _, key = heapq.heappop(self.entries)
        return f, -neg_g, key


def search(grid: TrackGrid, occ: Occupancy, net: str, sources: set[Node], targets: set[Node],
           costs: Costs, pricer: Pricer | None = None, soft: bool = False,
           max_expansions: int = 400_000, within: float | None = None) -> SearchResult:
    """The cheapest path (weighted A*) from ``sources`` to ``targets``. With ``within``
    (um) the search looks for a legal path only, within a corridor in cost: a node or
    join whose cost without antenna plus the unweighted heuristic passes it is
    dropped, and so is every partial or complete path that pays the antenna cap (it
    breaks a limit, in the search's own model where antenna cost never falls). No path
    within it: not found, every node within it expanded."""
    layers = grid.layers
    pitch_um = grid.pitch / 1000.0
    step_cost = [pitch_um * f for f in costs.layer_factor[:len(layers)]]
    min_step = min(step_cost)
    plane, ny = grid.plane, grid.ny
    wire_tab, pad_tab, history = occ.wire, occ.pad, occ.history
    fixed_wire, fixed_pad = occ.fixed_wire, occ.fixed_pad
    if sources & targets:
        return SearchResult((), 0.0, 0, 0)

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

    def paid(antenna: float) -> float:
        return min(costs.antenna * antenna, costs.antenna_cap)

    def outside(base: float, antenna: float) -> bool:
        """Outside ``within``: the cost without antenna (plus a lower bound on the rest)
        passes it, or the path pays the antenna cap."""
        return within is not None and (base > within or paid(antenna) >= costs.antenna_cap)

    L = _Labels()
    heap = _Heap()
    for s in sources:
        L.g[s], L.run_start[s], L.before[s], L.gate_side[s], L.antenna[s] = 0.0, s, (), True, 0.0
        L.metal[s] = 0.0
        L.next_sample[s] = costs.sample
        heap.push(h(s), 0.0, s)
    joins: list[_Join] = []
    unpriced: list[int] = []
    held: list[tuple[float, float, int]] = []  # unpriced joins popped, held back this wave
    deferred = 0  # waves expanded since an unpriced join first came out of the heap
    expanded = scored = 0

    def run_item(a: Node, b: Node) -> tuple[Item, ...]:
        if a == b:
            return ()
        k, ia, ja = grid.split(a)
        _, ib, jb = grid.split(b)
        return (("run", k, *grid.xy(ia, ja), *grid.xy(ib, jb)),)

    def price_joins() -> None:
        nonlocal scored, deferred
        deferred = 0
        values = pricer.joins([(joins[j].before, joins[j].extension) for j in unpriced])  # type: ignore[union-attr]
        scored += len(unpriced)
        for j, value in zip(unpriced, values):
            join = joins[j]
            join.priced, join.cost = True, max(join.antenna_before, float(value))
            full = join.g_base + paid(join.cost) - paid(join.antenna_before)
            if outside(0.0, join.cost):
                join.g = math.inf  # it breaks a limit: dropped (its entry in the heap is stale)
            elif full > join.g + 1e-9:
                join.g = full
                heap.push(full, full, -1 - j)
        unpriced.clear()

    while heap.entries:
        wave: list[Node] = []
        while heap.entries and len(wave) < costs.wave:
            f, g_popped, key = heap.pop()
            if key < 0:  # a join onto the tree
                join = joins[-1 - key]
                if g_popped < join.g - 1e-9:
                    continue  # stale: it went back at its full cost
                if not join.priced and len(unpriced) < costs.join_batch and deferred < costs.join_defer:
                    held.append((f, g_popped, key))  # gather more joins before pricing
                    continue
                if wave:
                    heap.push(f, g_popped, key)
                    break
                if not join.priced:
                    price_joins()
                    if join.g > g_popped + 1e-9:
                        continue  # it costs more: back in the heap
                return SearchResult(join.before + join.extension, join.g, expanded, scored)
            if g_popped < L.g[key] - 1e-9:
                continue  # stale entry
            wave.append(key)
        if held:  # the held joins go back; after `join_defer` waves they are priced
            deferred += 1
            for entry in held:
                heap.push(*entry)
            held.clear()
        if not wave:
            continue
        expanded += len(wave)
        if expanded > max_expansions:
            best = min(joins, key=lambda j: j.g, default=None)
            spent = None if best is None else paid(best.cost if best.priced else best.antenna_before)
            return SearchResult(None, math.inf, expanded, scored, True, spent)
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
        # the wave's gate-side wire moves, priced together
        antenna: dict[int, float] = {}
        sampled_next: dict[int, int] = {}  # move -> the next sample length on its run
        if pricer is not None:
            asks, which, lengths = [], [], []
            for m, (u, v, _c, is_via) in enumerate(moves):
                if is_via or v in targets or not L.gate_side[u] or L.metal[u] + pitch_um < costs.min_scored_um:
                    continue
                along = ny if layers[u // plane].horizontal else 1  # node-id stride of a step
                length = abs(v - L.run_start[u]) // along
                if length < L.next_sample[u]:
                    if length == costs.prefetch_at:  # the run's first price is near: ask its budget
                        pricer.prefetch(L.before[u], u // plane, run_item(L.run_start[u], v)[0])
                    continue
                asks.append((L.before[u], u // plane, run_item(L.run_start[u], v)[0]))
                which.append(m)
                lengths.append(length)
            pricer.flush()
            if asks:
                for m, length, (value, util) in zip(which, lengths, pricer.gate_side(asks)):
                    antenna[m] = value
                    bound = math.ceil(length * costs.quiet / util) if util > 0 else 1 << 30
                    sampled_next[m] = max(length + costs.sample, bound)
                scored += len(asks)
        for m, (u, v, c, is_via) in enumerate(moves):
            a_u = L.antenna[u]
            if v in targets:  # a join: its antenna cost is priced when it leaves the heap
                ku, iu, ju = grid.split(u)
                extension = (run_item(L.run_start[u], u) + (("via", min(ku, v // plane), *grid.xy(iu, ju)),)
                             if is_via else run_item(L.run_start[u], v))
                g = L.g[u] + c
                if outside(g - paid(a_u), a_u):
                    continue
                join = _Join(L.before[u], extension, g, a_u, g, pricer is None)
                joins.append(join)
                if pricer is not None:
                    unpriced.append(len(joins) - 1)
                heap.push(g, g, -len(joins))
                continue
            a_v = max(a_u, antenna.get(m, 0.0))
            g = L.g[u] + c + paid(a_v) - paid(a_u)
            if g < L.g.get(v, float("inf")) - 1e-9:
                h_v = h(v)
                if outside(g - paid(a_v) + h_v / costs.greed, a_v):
                    continue
                L.g[v] = g
                L.antenna[v] = a_v
                L.metal[v] = L.metal[u] + (0.0 if is_via else pitch_um)
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
                heap.push(g + h_v, g, v)
    return SearchResult(None, math.inf, expanded, scored)
