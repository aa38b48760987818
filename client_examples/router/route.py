"""A small multi-layer grid router that talks to etchguard while it routes.

Nets are routed shortest first; each net grows a tree from its driver, adding its gate
pins nearest first, each by an A* search from the gate to the tree (maze.py). A net the
search cannot route around other nets is searched again allowed to cross them at a
price; the nets it crosses are ripped up (their shapes removed from the service too),
their nodes get rip-up history cost, and they go back to the queue. Each net may be
ripped up a bounded number of times; one still failing stays unrouted.

Every routed segment is committed to the service as a run rectangle, every via as the
deck's default via (pads and cut). Two modes:

* blind: antenna ratios are not looked at while routing; the service's check after
  routing tells how many nets break a limit;
* aware: the search scores its gate-side candidates through ScoreBatch, and a path
  that would still break a limit is repaired from the service's advice before it is
  committed: a free, legal layer hop first, else a jumper (part of the run kept, the
  rest hopped), else the suggested diode at the gate.
"""

from __future__ import annotations

import json
import time
from collections import deque
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from etchguard import run_rect
from etchguard.client import Client, Session, candidate_columns, pb, pin, rect, via

from grid import Node, Occupancy, Rect, TrackGrid
from maze import Costs, Item, SearchResult, expansion_budget, search

TOLERANCE = 1e-9  # the contract's relative tolerance on utilization


# -- the block ---------------------------------------------------------------------------

@dataclass(frozen=True)
class PinData:
    name: str
    layer: str
    rects: tuple[Rect, ...]
    gate_area: dict[str, float]
    diff_area: float
    cell_area: dict[str, float]

    def message(self) -> pb.Pin:
        return pin(self.name, self.layer, self.rects, self.gate_area, self.diff_area, self.cell_area)


@dataclass(frozen=True)
class NetData:
    name: str
    pins: tuple[PinData, ...]

    @property
    def driver(self) -> PinData:
        return next(p for p in self.pins if p.diff_area > 0 and not p.gate_area)

    @property
    def sinks(self) -> list[PinData]:
        return [p for p in self.pins if p.gate_area]


@dataclass(frozen=True)
class Block:
    name: str
    size: tuple[int, int]
    layer_range: tuple[str, str]
    nets: tuple[NetData, ...]


def load_block(path: str | Path) -> Block:
    raw = json.loads(Path(path).read_text(encoding="utf-8"))
    nets = tuple(NetData(n["name"], tuple(
        PinData(p["name"], p["layer"], tuple(tuple(r) for r in p["rects"]),
                dict(p.get("gate_area", {})), float(p.get("diff_area", 0.0)),
                dict(p.get("cell_area", {}))) for p in n["pins"])) for n in raw["nets"])
    return Block(raw["block"], tuple(raw["size_dbu"]), tuple(raw["layer_range"]), nets)


# -- what the router holds per net -----------------------------------------------------------

@dataclass
class Committed:
    shape_id: int
    layer: str
    rect: Rect
    run_um: float = 0.0  # centre-line length when the shape is a run


@dataclass
class NetRoute:
    data: NetData
    shapes: list[Committed] = field(default_factory=list)
    diodes: list[PinData] = field(default_factory=list)  # diodes placed from advice
    tree: set[Node] = field(default_factory=set)
    ripups: int = 0
    routed: bool = False

    @property
    def pins(self) -> list[PinData]:
        return list(self.data.pins) + self.diodes


@dataclass
class Stats:
    mode: str
    nets: int = 0
    routed: int = 0  # nets whose pins the engine finds in one component at the top step
    wirelength_um: float = 0.0
    vias: int = 0
    violations: int = 0  # nets the service's check finds not legal after routing
    fix_diode_um2: float = 0.0  # post-route fix: sum of the smallest diode per violating net
    fix_no_diode: int = 0  # violating nets no single diode makes legal
    hops: int = 0
    jumpers: int = 0
    diodes: int = 0
    diode_um2: float = 0.0  # diodes placed while routing (aware mode)
    ripups: int = 0
    # aware mode: sink searches whose scored search ran out of budget and were searched
    # again without scores (their paths then go through the advice repair)
    plain_searches: int = 0
    scored: int = 0  # candidates scored through the service
    seconds: float = 0.0
    unrepaired: list[str] = field(default_factory=list)


class Router:
    def __init__(self, client: Client, block: Block, aware: bool, costs: Costs = Costs(),
                 max_ripups: int = 4, log=None, search_scores: bool = True) -> None:
        self.client = client
        # aware mode without scores in the search: only the advice repairs (tests use it
        # to see the repairs at work on their own)
        self.search_scores = search_scores
        self.deck = client.deck
        self.block = block
        self.aware = aware
        self.costs = costs
        self.max_ripups = max_ripups
        self.log = log or (lambda *_: None)
        self.grid = TrackGrid(self.deck, block.size, *block.layer_range)
        self.occ = Occupancy(self.grid)
        self.session: Session = client.session()
        mode = ("aware" if search_scores else "repair") if aware else "blind"
        self.prefix = f"{mode}:"  # the modes may share a server
        self.nets = {n.name: NetRoute(n) for n in block.nets}
        self.stats = Stats("antenna-aware" if aware else "antenna-blind", len(block.nets))
        self._rects: dict[Item, list[tuple[str, Rect]]] = {}
        self.width = {layer.name: layer.width for layer in self.grid.layers}
        self.cut_names = {layer.name for layer in self.deck.layers if layer.kind == pb.LAYER_KIND_CUT}

    def service_name(self, net: str) -> str:
        return self.prefix + net

    # -- geometry -----------------------------------------------------------------------

    def item_rects(self, item: Item) -> list[tuple[str, Rect]]:
        """Layer names and rectangles of one path element (cached: items repeat)."""
        out = self._rects.get(item)
        if out is None:
            if item[0] == "run":
                _, k, x1, y1, x2, y2 = item
                name = self.grid.layers[k].name
                out = [(name, run_rect(x1, y1, x2, y2, self.width[name]))]
            else:
                _, c, x, y = item
                out = [(s.layer, (s.rect.xlo, s.rect.ylo, s.rect.xhi, s.rect.yhi))
                       for s in via(self.deck, self.grid.cuts[c].name, x, y)]
            self._rects[item] = out
        return out

    def path_nodes(self, items: Sequence[Item]) -> list[tuple[str, Node]]:
        """Nodes a path uses: ("wire", node) along runs, ("pad", node) at vias."""
        g = self.grid
        out: list[tuple[str, Node]] = []
        for item in items:
            if item[0] == "run":
                _, k, x1, y1, x2, y2 = item
                i1, j1 = (x1 - g.origin) // g.pitch, (y1 - g.origin) // g.pitch
                i2, j2 = (x2 - g.origin) // g.pitch, (y2 - g.origin) // g.pitch
                for i in range(min(i1, i2), max(i1, i2) + 1):
                    for j in range(min(j1, j2), max(j1, j2) + 1):
                        out.append(("wire", g.node(k, i, j)))
            else:
                _, c, x, y = item
                i, j = (x - g.origin) // g.pitch, (y - g.origin) // g.pitch
                out += [("pad", g.node(c, i, j)), ("pad", g.node(c + 1, i, j))]
        return out

    # -- service and occupancy together ------------------------------------------------------

    def open_all(self) -> None:
        for route in self.nets.values():
            self._open(route)
            for p in route.data.pins:
                k = self.grid.layer_of_name[p.layer]
                for r in p.rects:
                    self.occ.add_pin(route.data.name, k, r)

    def _open(self, route: NetRoute, shapes: Sequence[pb.Shape] = ()) -> list[int]:
        return self.session.open_net(self.service_name(route.data.name),
                                     [p.message() for p in route.pins], shapes)

    def commit(self, route: NetRoute, rects: Sequence[tuple[str, Rect]],
               runs_um: Sequence[float] | None = None) -> None:
        if not rects:
            return
        ids = self.session.commit(self.service_name(route.data.name), [rect(n, *r) for n, r in rects])
        lengths = runs_um or [_run_length(self.width.get(n), r) for n, r in rects]
        for sid, (name, r), length in zip(ids, rects, lengths):
            route.shapes.append(Committed(sid, name, r, length))
            k = self.grid.layer_of_name.get(name)
            if k is not None:
                self.occ.add(route.data.name, k, r)
                route.tree.update(self.grid.nodes_inside(k, r))

    def rip_up(self, route: NetRoute) -> None:
        name = route.data.name
        if route.shapes:
            self.session.remove(self.service_name(name), [s.shape_id for s in route.shapes])
        for s in route.shapes:
            k = self.grid.layer_of_name.get(s.layer)
            if k is not None:
                self.occ.remove(name, k, s.rect)
        route.shapes.clear()
        route.tree.clear()
        route.routed = False
        if route.diodes:  # diodes belong to the geometry they protected: drop them too
            self.stats.diodes -= len(route.diodes)
            self.stats.diode_um2 -= sum(d.diff_area for d in route.diodes)
            route.diodes.clear()
            self.session.close_net(self.service_name(name))
            self._open(route)

    # -- scoring -------------------------------------------------------------------------

    def scorer_for(self, net: str):
        service_net = self.service_name(net)

        def score(cands: Sequence[tuple[Item, ...]]) -> tuple[np.ndarray, np.ndarray]:
            rects: list[Rect] = []
            layers: list[str] = []
            counts: list[int] = []
            for cand in cands:
                n = 0
                for item in cand:
                    for name, r in self.item_rects(item):
                        layers.append(name)
                        rects.append(r)
                        n += 1
                counts.append(n)
            request = pb.ScoreBatchRequest(net=service_net, candidates=candidate_columns(
                np.array(rects, dtype=np.int64), np.array(layers), counts))
            reply = self.session.ask("score_batch", request)
            self.stats.scored += len(cands)
            return (np.asarray(reply.cost, dtype=np.float64),
                    np.asarray(reply.worst_change_utilization, dtype=np.float64))

        return score

    # -- routing ---------------------------------------------------------------------------

    def route_all(self) -> Stats:
        start = time.perf_counter()
        self.open_all()
        order = sorted(self.nets.values(), key=lambda r: _half_perimeter(r.data))
        queue = deque(r.data.name for r in order)
        while queue:
            name = queue.popleft()
            route = self.nets[name]
            if self.route_net(route, soft=False):
                continue
            if route.ripups >= self.max_ripups:
                self.log(f"{name}: left unrouted after {route.ripups} rip-ups")
                continue
            route.ripups += 1
            if not self.route_net(route, soft=True):
                self.log(f"{name}: no path even across other nets")
                continue
            victims = self.crossed_nets(route)
            for v in victims:
                self.log(f"{name}: rips up {v}")
                self.rip_up(self.nets[v])
                self.stats.ripups += 1
                queue.append(v)
        self.stats.seconds = time.perf_counter() - start
        return self.stats

    def crossed_nets(self, route: NetRoute) -> set[str]:
        """Other nets whose shapes come too close to this net's wires or via pads, and
        a history cost on the nodes where they do (so the next searches avoid them)."""
        name = route.data.name
        victims: set[str] = set()
        for s in route.shapes:
            k = self.grid.layer_of_name.get(s.layer)
            if k is None:
                continue
            for n in self.grid.nodes_inside(k, s.rect):
                others = (Occupancy.others(self.occ.wire, n, name)
                          if s.layer in self.width and s.run_um > 0 else
                          Occupancy.others(self.occ.pad, n, name))
                others = [o for o in others if self.nets[o].shapes]
                if others:
                    self.occ.history[n] = self.occ.history.get(n, 0.0) + 1.0
                    victims.update(others)
        return victims

    def route_net(self, route: NetRoute, soft: bool) -> bool:
        data = route.data
        g = self.grid
        for p in (data.driver,):
            for r in p.rects:
                route.tree.update(g.nodes_inside(g.layer_of_name[p.layer], r))
        sinks = sorted(data.sinks, key=lambda p: _distance(p, data.driver))
        scorer = self.scorer_for(data.name) if self.aware and self.search_scores else None
        for sink in sinks:
            k = g.layer_of_name[sink.layer]
            sources = {n for r in sink.rects for n in g.nodes_inside(k, r)}
            found = self._search(route, sources, scorer, soft)
            if not found.found:
                self.rip_up(route)
                return False
            if self.aware:
                self.commit_aware(route, list(found.items))
            else:
                self.commit(route, [x for item in found.items for x in self.item_rects(item)])
            route.tree.update(sources)
        route.routed = True
        return True

    def _search(self, route: NetRoute, sources: set[Node], scorer, soft: bool) -> SearchResult:
        """One sink's search. Scored, within a budget that follows the net's span; if
        that runs out, the same search without scores (the advice repairs the path)."""
        g, c, name = self.grid, self.costs, route.data.name
        if scorer is None:
            return search(g, self.occ, name, sources, route.tree, c, None, soft, c.max_expansions)
        budget = expansion_budget(g, sources, route.tree, c.scored_margin_um, c.scored_per_node,
                                  c.scored_floor, c.max_expansions)
        found = search(g, self.occ, name, sources, route.tree, c, scorer, soft, budget)
        if found.found or not found.out_of_budget:
            return found
        self.stats.plain_searches += 1
        paid = ("no path to the tree reached" if found.best_join_antenna is None else
                f"the cheapest path reached pays {found.best_join_antenna:.0f} um of antenna cost")
        self.log(f"{name}: scored search out of budget ({found.expanded} of {budget} expansions, "
                 f"{paid}); searched again without scores")
        return search(g, self.occ, name, sources, route.tree, c, None, soft, c.max_expansions)

    # -- antenna-aware commit: check the path, repair from advice --------------------------------

    def commit_aware(self, route: NetRoute, items: list[Item]) -> None:
        net = self.service_name(route.data.name)
        rects = [x for item in items for x in self.item_rects(item)]
        if not rects:
            return
        verdict = self.session.score(net, [rect(n, *r) for n, r in rects])
        if verdict.legal:
            self.commit(route, rects)
            return
        at = self._offending_run(items, verdict)
        if at is None:
            self.commit(route, rects)
            self.stats.unrepaired.append(f"{route.data.name}: no run to repair on the violated layer")
            return
        # Commit what comes before the run, so the run's joining end is on the net, then
        # ask where it may go instead.
        self.commit(route, [x for item in items[:at] for x in self.item_rects(item)])
        _, k, x1, y1, x2, y2 = items[at]
        layer = self.grid.layers[k].name
        advice = self.session.advise(net, layer, x1, y1, x2, y2)
        rest = [x for item in items[at + 1:] for x in self.item_rects(item)]
        run_as_is = self.item_rects(items[at])
        if advice.legal_as_is:  # the run alone is fine: what breaks comes with the rest
            self.commit(route, run_as_is + rest)
            self._note_unrepaired(route, "the rest of the path breaks a limit")
            return
        if advice.HasField("best_option"):
            option = advice.options[advice.best_option]
            self.commit(route, [(s.layer, _rect(s.rect)) for s in option.shapes] + rest)
            self.stats.hops += 1
            self.log(f"{route.data.name}: {layer} run hops to {option.layer}")
        elif (advice.HasField("jumper") and advice.jumper.legal and not advice.jumper.blocked
              and advice.jumper.hop_layer):
            self.commit(route, [(s.layer, _rect(s.rect)) for s in advice.jumper.shapes] + rest)
            self.stats.jumpers += 1
            self.log(f"{route.data.name}: {layer} run keeps {advice.jumper.kept_length_dbu} DBU, "
                     f"jumps to {advice.jumper.hop_layer}")
        elif advice.HasField("diode") and advice.diode.found:
            self.commit(route, run_as_is + rest)
            self.place_diode(route, advice.diode)
        else:
            self.commit(route, run_as_is + rest)
            self._note_unrepaired(route, "no free hop, jumper or diode")
            return
        if not self.session.check(net).legal:
            self._note_unrepaired(route, "still breaks a limit after the repair")

    def _note_unrepaired(self, route: NetRoute, why: str) -> None:
        if not self.session.check(self.service_name(route.data.name)).legal:
            self.stats.unrepaired.append(f"{route.data.name}: {why}")

    def _offending_run(self, items: list[Item], verdict: pb.ScoreReply) -> int | None:
        """Index of the run to repair: on the lowest layer with a ratio over its limit,
        the longest run of the gate-side part of the path (before it first descends),
        else the longest run on that layer anywhere in the path."""
        over = [c for c in verdict.changes if c.utilization > 1.0 + TOLERANCE]
        names = {layer.name: k for k, layer in enumerate(self.grid.layers)}
        for change in sorted(over, key=lambda c: c.step):
            k = names.get(change.layer)
            if k is None:
                continue  # a cut layer: the runs around it are what can move
            gate_side: list[int] = []
            top = -1
            for i, item in enumerate(items):
                layer_k = item[1] + (1 if item[0] == "via" else 0)
                if item[0] == "via" and item[1] < top:
                    break  # the path descends: the rest is the tree's side
                top = max(top, layer_k)
                if item[0] == "run" and item[1] == k:
                    gate_side.append(i)
            runs = gate_side or [i for i, it in enumerate(items) if it[0] == "run" and it[1] == k]
            if runs:
                return max(runs, key=lambda i: abs(items[i][4] - items[i][2]) + abs(items[i][5] - items[i][3]))
        return None

    def place_diode(self, route: NetRoute, diode: pb.DiodeAdvice) -> None:
        """Add the advised diode as a pin of the net (a net's pins are given when it
        opens, so the net is reopened with its shapes)."""
        net = self.service_name(route.data.name)
        gate = next(p for p in route.pins if p.name == diode.gate)
        route.diodes.append(PinData(f"{gate.name}.diode{len(route.diodes)}", diode.layer,
                                    tuple(_rect(r) for r in diode.rects), {}, diode.diff_area_um2, {}))
        self.session.close_net(net)
        ids = self._open(route, [rect(s.layer, *s.rect) for s in route.shapes])
        for s, sid in zip(route.shapes, ids):
            s.shape_id = sid
        self.stats.diodes += 1
        self.stats.diode_um2 += diode.diff_area_um2
        self.log(f"{route.data.name}: diode of {diode.diff_area_um2:.4f} um^2 at {diode.gate}")

    # -- after routing -------------------------------------------------------------------------

    def finish(self, deck_path: Path) -> Stats:
        """Figures of the routed block: connectivity by the engine, violations by the
        service, and what a post-route diode fix would need."""
        from verify import connected_nets

        stats = self.stats
        stats.routed = len(connected_nets(deck_path, self.nets.values()))
        stats.wirelength_um = sum(s.run_um for r in self.nets.values() for s in r.shapes)
        stats.vias = sum(1 for r in self.nets.values() for s in r.shapes if s.layer in self.cut_names)
        mine = {self.service_name(n): n for n in self.nets}
        bad = [rep for rep in self.client.check_all(violations_only=True) if rep.net in mine]
        stats.violations = len(bad)
        for rep in bad:
            area = self.post_route_diode(self.nets[mine[rep.net]], rep)
            if area is None:
                stats.fix_no_diode += 1
            else:
                stats.fix_diode_um2 += area
        return stats

    def post_route_diode(self, route: NetRoute, report: pb.NetReport) -> float | None:
        """The smallest diode that makes a routed net legal: take out one run on the
        violated layer, ask the diode answer for it (net + run = the routed net), put
        the run back."""
        net = self.service_name(route.data.name)
        worst = max((c for c in report.checks if not c.legal), key=lambda c: c.utilization)
        runs = [s for s in route.shapes if s.layer == worst.layer and s.run_um > 0]
        if not runs:
            runs = [s for s in route.shapes if s.run_um > 0]
        if not runs:
            return None
        run = max(runs, key=lambda s: s.run_um)
        line = _centre_line(run.rect, self.width[run.layer])
        self.session.remove(net, [run.shape_id])
        try:
            advice = self.session.advise(net, run.layer, *line, want=["diode"])
        finally:
            (run.shape_id,) = self.session.commit(net, [rect(run.layer, *run.rect)])
        if advice.diode.found:
            return advice.diode.diff_area_um2
        return None

    def close(self) -> None:
        for name in self.nets:
            try:
                self.session.close_net(self.service_name(name))
            except Exception:  # noqa: BLE001 - a net that never opened
                pass
        self.session.close()


# -- small helpers ---------------------------------------------------------------------------

def _rect(r: pb.Rect) -> Rect:
    return (r.xlo, r.ylo, r.xhi, r.yhi)


def _run_length(width: int | None, r: Rect) -> float:
    """Centre-line length (um) of a run rectangle extended width/2 past each end; 0 for
    a square (a via pad) or a cut."""
    if width is None:
        return 0.0
    w, h = r[2] - r[0], r[3] - r[1]
    length = max(w, h) - min(w, h)
    return length / 1000.0 if min(w, h) <= width and length > 0 else 0.0


def _centre_line(r: Rect, width: int) -> tuple[int, int, int, int]:
    w, h = r[2] - r[0], r[3] - r[1]
    if w >= h:
        y = r[1] + h // 2
        return r[0] + h // 2, y, r[2] - (h - h // 2), y
    x = r[0] + w // 2
    return x, r[1] + w // 2, x, r[3] - (w - w // 2)


def _centre(p: PinData) -> tuple[float, float]:
    r = p.rects[0]
    return (r[0] + r[2]) / 2, (r[1] + r[3]) / 2


def _distance(a: PinData, b: PinData) -> float:
    (ax, ay), (bx, by) = _centre(a), _centre(b)
    return abs(ax - bx) + abs(ay - by)


def _half_perimeter(net: NetData) -> float:
    xs = [_centre(p)[0] for p in net.pins]
    ys = [_centre(p)[1] for p in net.pins]
    return max(xs) - min(xs) + max(ys) - min(ys)
