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
* aware: each sink's path is searched as in the blind mode and scored whole; only a
  sink whose path would break a limit is searched again with prices (gate-side
  candidates from the service's budgets, joins onto the tree through ScoreBatch), and
  a path that would still break a limit is repaired from the service's advice before
  it is committed: a free, legal layer hop first, else a jumper (part of the run kept,
  the rest hopped), else the suggested diode at the gate.
"""

from __future__ import annotations

import json
import math
import time
from collections import deque
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path

from etchguard import run_rect
from etchguard.client import Client, ServiceError, pb, pin, rect, via

from grid import Node, Occupancy, Rect, TrackGrid
from maze import Costs, Item, SearchResult, expansion_budget, search
from pricing import Meter, MeteredSession, ServicePricer

TOLERANCE = 1e-9  # the contract's relative tolerance on utilization
DECK_PATH = Path(__file__).resolve().parents[2] / "service" / "etchguard" / "data" / "lumen-6m.toml"


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
    hops: int = 0
    jumpers: int = 0
    diodes: int = 0
    diode_um2: float = 0.0  # diodes placed while routing (aware mode)
    ripups: int = 0
    # aware mode: sink searches whose scored search ran out of budget and were searched
    # again without scores, or (screened) kept the plain path found first; those paths
    # then go through the advice repair
    plain_searches: int = 0
    scored: int = 0  # candidates priced while searching (from budgets or by the service)
    # screened aware mode: sink paths searched without prices and scored whole, and of
    # those, the sinks searched again with prices (their plain path broke a limit)
    sinks_screened: int = 0
    sinks_repriced: int = 0
    # per sink searched again with prices: (net, plain search's expansions and path
    # cost, priced search's expansions and path cost, its outcome)
    repriced: list[tuple[str, int, float, int, float, str]] = field(default_factory=list)
    added_vias: int = 0  # cut shapes the repairs added (hops and jumpers)
    expanded: int = 0  # search nodes expanded
    seconds: float = 0.0
    # CPU seconds of the router's own process over the same span: other jobs on a shared
    # machine stretch wall time much more than this (the server's work is not in it)
    cpu_seconds: float = 0.0
    meter: Meter = field(default_factory=Meter)  # service calls of the run
    # (net, why) a repair left a net illegal; at the end only nets still illegal
    unrepaired: list[tuple[str, str]] = field(default_factory=list)
    notes_outdated: int = 0  # such notes about nets legal at the end (dropped)
    advice_failures: list[str] = field(default_factory=list)  # advice the service failed to give

    @property
    def repairs(self) -> int:
        return self.hops + self.jumpers + self.diodes


class Router:
    def __init__(self, client: Client, block: Block, aware: bool, costs: Costs = Costs(),
                 max_ripups: int = 4, log=None, search_scores: bool = True,
                 repair_after: bool = False, deck_path: Path = DECK_PATH, screen: bool = True) -> None:
        self.client = client
        # aware mode without scores in the search: only the advice repairs (tests use it
        # to see the repairs at work on their own)
        self.search_scores = search_scores
        # aware mode: each sink is searched first without prices and its path scored
        # whole; only a path that would break a limit is searched again with prices.
        # False: every sink's search is priced.
        self.screen = screen
        self.deck = client.deck
        self.block = block
        self.aware = aware
        self.costs = costs
        self.max_ripups = max_ripups
        self.log = log or (lambda *_: None)
        self.grid = TrackGrid(self.deck, block.size, *block.layer_range)
        self.occ = Occupancy(self.grid)
        mode = ("aware" if search_scores else "repair") if aware else ("fixed" if repair_after else "blind")
        self.prefix = f"{mode}:"  # the modes may share a server
        self.repair_after = repair_after and not aware
        self.deck_path = deck_path  # for the router's own connectivity check (verify.py)
        self.nets = {n.name: NetRoute(n) for n in block.nets}
        title = "antenna-aware" if aware else ("blind + repair" if self.repair_after else "antenna-blind")
        self.stats = Stats(title, len(block.nets))
        self.session = MeteredSession(client.session(), self.stats.meter)
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
        self._held(route, rects, ids, runs_um)

    def _held(self, route: NetRoute, rects: Sequence[tuple[str, Rect]], ids: Sequence[int],
              runs_um: Sequence[float] | None = None) -> None:
        """Note shapes the service committed (ids in the order of ``rects``)."""
        lengths = runs_um or [_run_length(n not in self.cut_names, r) for n, r in rects]
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

    def pricer_for(self, net: str) -> ServicePricer:
        """Prices one sink search's candidates (budgets held for that search only: the
        net changes when its path is committed)."""
        return ServicePricer(self.session, self.service_name(net), self.item_rects,
                             [layer.name for layer in self.grid.layers])

    # -- routing ---------------------------------------------------------------------------

    def route_all(self) -> Stats:
        start, cpu = time.perf_counter(), time.process_time()
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
        self.stats.cpu_seconds = time.process_time() - cpu
        if self.repair_after:
            self.repair_after_routing()
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
        for sink in sinks:
            k = g.layer_of_name[sink.layer]
            sources = {n for r in sink.rects for n in g.nodes_inside(k, r)}
            priced = self.aware and self.search_scores
            found = self._search(route, sources, None if self.screen else self._pricer(route, priced), soft)
            if not found.found:
                self.rip_up(route)
                return False
            items = list(found.items)
            if not self.aware:
                self.commit(route, [x for item in items for x in self.item_rects(item)])
            elif not (priced and self.screen):
                self.commit_aware(route, items)
            else:
                self._commit_screened(route, sources, items, soft, found)
            route.tree.update(sources)
        route.routed = True
        return True

    def _pricer(self, route: NetRoute, priced: bool) -> ServicePricer | None:
        return self.pricer_for(route.data.name) if priced else None

    def _commit_screened(self, route: NetRoute, sources: set[Node], items: list[Item], soft: bool,
                         plain: SearchResult) -> None:
        """The screened aware mode: the sink's path was searched without prices, as the
        blind router does; it is scored whole and committed when legal, in one call (the
        score every aware commit takes, and the commit). Only a path that would break a
        limit has its sink searched again with prices, and that path goes through the
        advice repair if needed."""
        rects = [x for item in items for x in self.item_rects(item)]
        if not rects:
            return
        self.stats.sinks_screened += 1
        # scored and, when legal, committed in one call
        verdict, ids = self.session.commit_if_legal(self.service_name(route.data.name),
                                                    [rect(n, *r) for n, r in rects])
        if ids:
            self._held(route, rects, ids)
            return
        if plain.expanded > self.costs.repriced_ceiling:
            # A priced search expands at least about what the plain one did (on blk_r
            # those that found a legal path took 1.0-3.1 times as many), so past the
            # ceiling it would run out: the plain path goes straight to the repair.
            self.stats.repriced.append((route.data.name, plain.expanded, round(plain.cost, 1), 0,
                                        math.inf, "skipped"))
            self.commit_aware(route, items, verdict)
            return
        self.stats.sinks_repriced += 1
        expanded = self.stats.expanded
        found = self._search(route, sources, self._pricer(route, True), soft, plain)
        spent = self.stats.expanded - expanded
        outcome = "found" if found.found else ("out of budget" if found.out_of_budget else "none")
        self.stats.repriced.append((route.data.name, plain.expanded, round(plain.cost, 1), spent,
                                    round(found.cost, 1), outcome))
        self.log(f"{route.data.name}: plain path breaks a limit, priced search: {spent} expansions")
        if found.found:
            self.commit_aware(route, list(found.items))
        else:  # no legal path within the detour, or out of budget: the plain path is repaired
            self.commit_aware(route, items, verdict)

    def _search(self, route: NetRoute, sources: set[Node], pricer: ServicePricer | None,
                soft: bool, plain: SearchResult | None = None) -> SearchResult:
        """One sink's search. Scored, within a budget that follows the net's span; if
        that runs out, the same search without scores (the advice repairs the path),
        unless the caller holds that path already (``plain``, the sink's search without
        prices: the priced search then looks for a legal path within a detour of it and
        an effort that follows its own, and says when it ran out)."""
        g, c, name = self.grid, self.costs, route.data.name
        if pricer is None:
            found = search(g, self.occ, name, sources, route.tree, c, None, soft, c.max_expansions)
            self.stats.expanded += found.expanded
            return found
        budget = expansion_budget(g, sources, route.tree, c.scored_margin_um, c.scored_per_node,
                                  c.scored_floor, c.max_expansions if plain is None else c.repriced_ceiling)
        within = None
        if plain is not None:
            budget = min(budget, max(c.repriced_floor, int(c.repriced_effort * plain.expanded)))
            # the detour bound is taken on the plain path costed as the priced search
            # costs it (its vias at the priced search's price)
            vias = sum(1 for item in plain.items or () if item[0] == "via")
            base = plain.cost + (c.repriced_via - c.via) * vias
            within = base + max(c.detour_um, c.detour_share * base)
            c = replace(c, greed=c.repriced_greed, via=c.repriced_via)
        found = search(g, self.occ, name, sources, route.tree, c, pricer, soft, budget, within)
        pricer.drain()
        self.stats.scored += found.scored
        self.stats.expanded += found.expanded
        if found.found or not found.out_of_budget:
            return found
        self.stats.plain_searches += 1
        paid = ("no path to the tree reached" if found.best_join_antenna is None else
                f"the cheapest path reached pays {found.best_join_antenna:.0f} um of antenna cost")
        self.log(f"{name}: scored search out of budget ({found.expanded} of {budget} expansions, "
                 f"{paid}); {'its plain path is kept' if plain is not None else 'searched again without scores'}")
        if plain is not None:
            return found
        return search(g, self.occ, name, sources, route.tree, c, None, soft, c.max_expansions)

    # -- antenna-aware commit: check the path, repair from advice --------------------------------

    def commit_aware(self, route: NetRoute, items: list[Item], verdict: pb.ScoreReply | None = None) -> None:
        """Commit a path scored whole (``verdict``, asked here when not given), repaired
        from advice when it would break a limit."""
        net = self.service_name(route.data.name)
        rects = [x for item in items for x in self.item_rects(item)]
        if not rects:
            return
        if verdict is None:
            verdict = self.session.score(net, [rect(n, *r) for n, r in rects])
        if verdict.legal:
            self.commit(route, rects)
            return
        at = self._offending_run(items, verdict)
        if at is None:
            self.commit(route, rects)
            self.stats.unrepaired.append((route.data.name, "no run to repair on the violated layer"))
            return
        # Commit what comes before the run, so the run's joining end is on the net, then
        # ask where it may go instead.
        self.commit(route, [x for item in items[:at] for x in self.item_rects(item)])
        _, k, x1, y1, x2, y2 = items[at]
        layer = self.grid.layers[k].name
        rest = [x for item in items[at + 1:] for x in self.item_rects(item)]
        run_as_is = self.item_rects(items[at])
        used = self._apply_advice(route, layer, (x1, y1, x2, y2), run_as_is, rest)
        if used == "legal as is":  # the run alone is fine: what breaks comes with the rest
            self._note_unrepaired(route, "the rest of the path breaks a limit")
        elif used == "none":
            self._note_unrepaired(route, "no free hop, jumper or diode")
        elif not self.session.check(net).legal:
            self._note_unrepaired(route, "still breaks a limit after the repair")

    def _apply_advice(self, route: NetRoute, layer: str, line: tuple[int, int, int, int],
                      as_is: list[tuple[str, Rect]], rest: list[tuple[str, Rect]],
                      skip: frozenset[str] = frozenset()) -> str:
        """Ask where a run (not committed; its joining end is) may go and commit the
        first free, legal answer with ``rest``: a layer hop, else a jumper, else the
        run as it is with the advised diode; else the run as it is. The hop and jumper
        are asked first and the diode only when neither serves (the diode search is the
        dearest answer); answers in ``skip`` are passed over. Returns what was used."""
        net = self.service_name(route.data.name)
        advice = self._advise(route, layer, line, ("hop", "jumper"))
        if advice is not None and advice.legal_as_is:
            self.commit(route, as_is + rest)
            return "legal as is"
        if advice is not None and advice.HasField("best_option") and "hop" not in skip:
            option = advice.options[advice.best_option]
            self.commit(route, [(s.layer, _rect(s.rect)) for s in option.shapes] + rest)
            self.stats.hops += 1
            self.stats.added_vias += option.cuts
            self.log(f"{route.data.name}: {layer} run hops to {option.layer}")
            return "hop"
        if (advice is not None and "jumper" not in skip and advice.HasField("jumper") and advice.jumper.legal
                and not advice.jumper.blocked and advice.jumper.hop_layer):
            self.commit(route, [(s.layer, _rect(s.rect)) for s in advice.jumper.shapes] + rest)
            self.stats.jumpers += 1
            self.stats.added_vias += sum(1 for s in advice.jumper.shapes if s.layer in self.cut_names)
            self.log(f"{route.data.name}: {layer} run keeps {advice.jumper.kept_length_dbu} DBU, "
                     f"jumps to {advice.jumper.hop_layer}")
            return "jumper"
        diode = self._advise(route, layer, line, ("diode",))
        self.commit(route, as_is + rest)
        if diode is not None and diode.HasField("diode") and diode.diode.found:
            self.place_diode(route, diode.diode)
            return "diode"
        return "none"

    def _advise(self, route: NetRoute, layer: str, line: tuple[int, int, int, int],
                want: tuple[str, ...]) -> pb.AdviseReply | None:
        """The service's advice, or None (noted) when the service fails to give it."""
        try:
            return self.session.advise(self.service_name(route.data.name), layer, *line, want=want)
        except ServiceError as exc:
            self.stats.advice_failures.append(f"{route.data.name} ({', '.join(want)}): {exc.message}")
            return None

    def _note_unrepaired(self, route: NetRoute, why: str) -> None:
        if not self.session.check(self.service_name(route.data.name)).legal:
            self.stats.unrepaired.append((route.data.name, why))

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

    # -- blind routing's usual follow-up: repair after routing, from advice ---------------------

    def repair_after_routing(self, max_tries: int = 4) -> None:
        """Check every net once routing is done and repair each violating one from the
        service's advice, as a flow without antenna awareness would: take out a run on
        a violated layer (see _run_to_repair), ask where it may go, apply a free, legal
        layer hop, else a free, legal jumper, else the advised diode at the gate (else
        put the run back); check again, up to ``max_tries`` runs per net."""
        start, cpu = time.perf_counter(), time.process_time()
        mine = {self.service_name(n): n for n in self.nets}
        t0 = time.perf_counter()
        bad = [rep.net for rep in self.client.check_all(violations_only=True) if rep.net in mine]
        self.stats.meter.seconds += time.perf_counter() - t0
        self.stats.meter.count("check_all")
        for net in bad:
            route = self.nets[mine[net]]
            tried: set[Rect] = set()
            report = self.session.check(net)
            while not report.legal and len(tried) < max_tries:
                run = self._run_to_repair(route, report, tried)
                if run is None:
                    break
                tried.add(run.rect)
                self._repair_run(route, run)
                report = self.session.check(net)
            if not report.legal:
                self.stats.unrepaired.append((route.data.name, "still breaks a limit after the repairs"))
        self.stats.seconds += time.perf_counter() - start
        self.stats.cpu_seconds += time.process_time() - cpu

    def _run_to_repair(self, route: NetRoute, report: pb.NetReport, tried: set[Rect]) -> Committed | None:
        """A run not tried yet for the failing checks, lowest step first, each on its
        routing layer (for a failing cut layer, the routing layer below it): the longest
        run in the failing gate's component at that step (the metal the ratio counts),
        else the longest run on that layer. A check whose runs were all tried passes
        the turn to the next one."""
        from verify import gate_component

        names = [layer.name for layer in self.deck.layers]
        for check in sorted((c for c in report.checks if not c.legal), key=lambda c: c.step):
            layer = check.layer if check.layer not in self.cut_names else names[check.step - 1]
            runs = [s for s in route.shapes if s.layer == layer and s.run_um > 0 and s.rect not in tried]
            if not runs:
                continue
            counted = {id(route.shapes[i]) for i in gate_component(self.deck_path, route, check.gate, check.step)}
            own = [s for s in runs if id(s) in counted]
            return max(own or runs, key=lambda s: s.run_um)
        return None

    def _repair_run(self, route: NetRoute, run: Committed) -> str:
        """Take the run out and apply the advice on it (see _apply_advice). A routed
        run may carry branches along it, not only at its ends, and a hop or jumper
        reconnects its ends only: when the net is no longer connected (checked here on
        the router's shapes, no call), that answer is undone and the next one tried (a
        jumper keeps the part of the run at its joining end; the diode leaves the run
        where it is)."""
        from verify import connected_nets

        line = _centre_line(run.rect, self.width[run.layer])
        skip: set[str] = set()
        while True:
            self.take_out(route, [run])
            kept = len(route.shapes)
            used = self._apply_advice(route, run.layer, line, [(run.layer, run.rect)], [], frozenset(skip))
            if used not in ("hop", "jumper") or connected_nets(self.deck_path, [route]):
                return used
            added = route.shapes[kept:]
            self.take_out(route, added)
            self.commit(route, [(run.layer, run.rect)])
            run = route.shapes[-1]
            self.stats.hops -= used == "hop"
            self.stats.jumpers -= used == "jumper"
            self.stats.added_vias -= sum(1 for s in added if s.layer in self.cut_names)
            self.log(f"{route.data.name}: {used} undone, it left a branch of the net apart")
            skip.add(used)

    def take_out(self, route: NetRoute, shapes: Sequence[Committed]) -> None:
        """Remove committed shapes from the service, the occupancy and the route."""
        self.session.remove(self.service_name(route.data.name), [s.shape_id for s in shapes])
        for s in shapes:
            k = self.grid.layer_of_name.get(s.layer)
            if k is not None:
                self.occ.remove(route.data.name, k, s.rect)
            route.shapes.remove(s)

    # -- after routing -------------------------------------------------------------------------

    def finish(self, deck_path: Path) -> Stats:
        """Figures of the routed block: connectivity by the engine, violations by the
        service. Notes written while routing about a net that is legal at the end
        described a state a later commit changed (a later sink's repair, a rip-up and
        reroute): they are dropped here, so notes and the violation count agree."""
        from verify import connected_nets

        stats = self.stats
        stats.routed = len(connected_nets(deck_path, self.nets.values()))
        stats.wirelength_um = sum(s.run_um for r in self.nets.values() for s in r.shapes)
        stats.vias = sum(1 for r in self.nets.values() for s in r.shapes if s.layer in self.cut_names)
        mine = {self.service_name(n): n for n in self.nets}
        bad = {mine[rep.net] for rep in self.client.check_all(violations_only=True) if rep.net in mine}
        stats.violations = len(bad)
        stats.notes_outdated = sum(1 for name, _ in stats.unrepaired if name not in bad)
        stats.unrepaired = [(name, why) for name, why in stats.unrepaired if name in bad]
        return stats

    def close(self) -> None:
        """Close this run's nets (not metered: the run is over)."""
        for name in self.nets:
            try:
                self.session.session.close_net(self.service_name(name))
            except Exception:  # noqa: BLE001 - a net that never opened
                pass
        self.session.close()


# -- small helpers ---------------------------------------------------------------------------

def _rect(r: pb.Rect) -> Rect:
    return (r.xlo, r.ylo, r.xhi, r.yhi)


def _run_length(routing: bool, r: Rect) -> float:
    """Centre-line length (um) of a run rectangle extended width/2 past each end; 0 for
    a square (a via pad) or a cut. Any routing layer of the deck counts, also one above
    the router's own layers (a hop from advice may land there)."""
    if not routing:
        return 0.0
    w, h = r[2] - r[0], r[3] - r[1]
    return (max(w, h) - min(w, h)) / 1000.0


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
