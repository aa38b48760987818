"""An independent, brute-force reading of the antenna model contract.

Written from the project's antenna model (the contract) alone (not from the engine), so that the
engine can be held to something outside itself. It is deliberately slow and plain:
every process step is rebuilt from scratch.

Sources:
* formulas (G, D, A, A_eff with the reduction r(D), G_eff, PAR, the CAR chain through
  the feeding step, limits, utilization, the offline check output): the contract,
  the antenna model;
* connectivity: networkx (graph per step, ``networkx.connected_components``);
* contact tests, union areas and perimeters: shapely (``box``, ``intersection``,
  ``shapely.ops.unary_union``; ``.area``; ``.length``, which includes the boundaries
  of holes);
* piecewise-linear diode tables, the area reduction table included: ``numpy.interp``
  (linear between points, held constant beyond the first and the last point, as the
  contract states).

Interpretation points (the project's documented reading of the contract):
* a pin's ``cell_area`` on layer s counts at step s if the pin exists at s;
* measure "side" has no ``cell_area`` contribution; its in-cell counterpart is the
  pin's ``cell_side_area`` on layer s (a side-wall area as given, LEF's
  ANTENNAPARTIALMETALSIDEAREA), added to perimeter x thickness; a routing layer
  without ``thickness_um`` adds 0 for its routed perimeter;
* the cumulative ratio is the contract's chain, CAR_s = PAR_s + CAR_p with p the step
  that feeds s: for measure "side" the nearest lower routing step (so a cut step never
  enters a side sum, whatever the flags); for "area" the step directly below when
  layer s sets ``cumulative_plus_cut`` or the process sets
  ``cumulative_includes_cuts``, else the nearest lower step of s's own kind. The chain
  follows the flag of each step it passes, not only that of the checked step: with
  the flag on M2 alone, CAR_M2 = PAR_M2 + CAR_V1 and CAR_V1 = PAR_V1 (no lower cut),
  so M1's term is not in CAR_M2;
* a step below g's pin layer adds 0 but the chain runs on through it (all steps below
  it are below the pin too, so they add 0 as well);
* a block pin's ``block_car`` entries (layer, measure, oxide, ratio) are cumulative
  sums already taken inside the block, so they are not chained: a gate of the pin
  checked at step s gets, on top of its chain, the entry of the highest step among s
  and the steps feeding s (walked down the same chain) that the pin has one for, of
  the rule's measure and oxide (the LEF/DEF reference's hierarchical values, "for the
  pin layer or the layers above it", as the project reads them);
* a pin rectangle may name its own layer (``{"layer": "M2", "rect": [...]}``): it is an
  element of that layer, present from that step on; a pin's rectangles are one
  conductor (linked to each other whenever both exist) and the pin (its gate,
  diffusion and in-cell figures) exists from the lowest layer among them;
* r(D) is read from the table at every D, D = 0 included (the contract gives no
  D = 0 exception for it as it does for the limits), and is 1 without a table;
* a step without a rule for (measure, oxide) adds the plain A / G to a cumulative sum;
* a component's cumulative check uses the worst CAR among its gate pins of that oxide
  and the limit from D of that component; G sums all oxides;
* a component is checked for oxide ox only if one of its pins has gate area of ox;
* a rule has a partial (cumulative) check if it has partial_max or diode_partial_max
  (cumulative_max or diode_cumulative_max);
* with D = 0 and no plain maximum the table is read at D = 0;
* two rectangles on one cut layer connect by the same-layer rule as on a routing layer.

Inputs are plain data: the deck as the parsed TOML mapping of the contract's deck
format, the net as the contract's net-file JSON object for one net.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import networkx as nx
import numpy as np
from shapely.geometry import box
from shapely.ops import unary_union

TOLERANCE = 1e-9  # the contract: "a tolerance of 1e-9 relative is allowed"
DEFAULT_OXIDE = "thin"  # the contract: oxide "thin" when absent

Node = tuple  # ("shape", i) or ("pin", pin index, rect index)


@dataclass(frozen=True)
class RefRule:
    layer: str
    oxide: str
    measure: str
    partial_max: float | None
    cumulative_max: float | None
    area_factor: float
    factor_with_diode_only: bool
    diode_partial_max: tuple[tuple[float, float], ...]
    diode_cumulative_max: tuple[tuple[float, float], ...]
    diode_gate_factor: float
    diode_area_credit: float
    diode_area_reduction: tuple[tuple[float, float], ...]

    @property
    def has_partial(self) -> bool:
        return self.partial_max is not None or bool(self.diode_partial_max)

    @property
    def has_cumulative(self) -> bool:
        return self.cumulative_max is not None or bool(self.diode_cumulative_max)

    def effective_ratio(self, conductor: float, gate: float, diff: float) -> float:
        # The contract: A_eff = max(0, f*r(D)*A - k_credit*D), f only when D > 0 if
        # factor_with_diode_only, r(D) the reduction table at D (1 without one);
        # G_eff = G + k_gate*D; PAR = A_eff / G_eff.
        f = self.area_factor
        if self.factor_with_diode_only and not diff > 0:
            f = 1.0
        r = _table_at(self.diode_area_reduction, diff) if self.diode_area_reduction else 1.0
        a_eff = max(0.0, f * r * conductor - self.diode_area_credit * diff)
        g_eff = gate + self.diode_gate_factor * diff
        return a_eff / g_eff


def _table_at(table: tuple[tuple[float, float], ...], x: float) -> float:
    xs = [p[0] for p in table]
    ys = [p[1] for p in table]
    return float(np.interp(x, xs, ys))  # numpy: linear, held constant beyond the ends


def limit_for(plain: float | None, table: tuple[tuple[float, float], ...], diff: float) -> float:
    """The contract's limit: plain with D = 0; the table at D with D > 0 (plain if none)."""
    if diff > 0:
        return _table_at(table, diff) if table else float(plain)  # type: ignore[arg-type]
    if plain is not None:
        return float(plain)
    return _table_at(table, diff)


@dataclass(frozen=True)
class RefLayer:
    name: str
    kind: str
    thickness_um: float
    plus_cut: bool  # the layer's cumulative_plus_cut


@dataclass
class RefDeck:
    dbu_per_micron: int
    cumulative_includes_cuts: bool
    layers: list[RefLayer]
    rules: dict[tuple[str, str, str], RefRule]  # (layer, measure, oxide) -> rule

    @property
    def index(self) -> dict[str, int]:
        return {l.name: i for i, l in enumerate(self.layers)}

    def feeding_step(self, s: int, measure: str) -> int | None:
        """The step p of the contract's CAR_s = PAR_s + CAR_p; None below the first step."""
        if measure == "side":
            lower = [t for t in range(s) if self.layers[t].kind == "routing"]
        elif self.cumulative_includes_cuts or self.layers[s].plus_cut:
            lower = [s - 1] if s > 0 else []
        else:
            lower = [t for t in range(s) if self.layers[t].kind == self.layers[s].kind]
        return max(lower) if lower else None


def ref_deck(data: dict[str, Any]) -> RefDeck:
    """Read the contract's deck mapping (already parsed TOML) with its defaults."""
    process = data["process"]
    layers = [RefLayer(l["name"], l["kind"], float(l.get("thickness_um", 0.0) or 0.0),
                       bool(l.get("cumulative_plus_cut", False)))
              for l in data["layers"]]
    rules: dict[tuple[str, str, str], RefRule] = {}
    for r in data.get("rules", []):
        rule = RefRule(
            layer=r["layer"], oxide=r.get("oxide", DEFAULT_OXIDE), measure=r.get("measure", "area"),
            partial_max=r.get("partial_max"), cumulative_max=r.get("cumulative_max"),
            area_factor=float(r.get("area_factor", 1.0)),
            factor_with_diode_only=bool(r.get("factor_with_diode_only", False)),
            diode_partial_max=tuple(tuple(p) for p in r.get("diode_partial_max", ())),
            diode_cumulative_max=tuple(tuple(p) for p in r.get("diode_cumulative_max", ())),
            diode_gate_factor=float(r.get("diode_gate_factor", 0.0)),
            diode_area_credit=float(r.get("diode_area_credit", 0.0)),
            diode_area_reduction=tuple(tuple(p) for p in r.get("diode_area_reduction", ())))
        rules[(rule.layer, rule.measure, rule.oxide)] = rule
    return RefDeck(int(process["dbu_per_micron"]), bool(process.get("cumulative_includes_cuts", False)),
                   layers, rules)


def load_ref_deck(path: str | Path) -> RefDeck:
    with open(path, "rb") as fh:
        return ref_deck(tomllib.load(fh))


@dataclass(frozen=True)
class RefPin:
    name: str
    layer: int  # the lowest layer of its rectangles: the pin exists from there on
    rects: tuple[tuple[int, tuple[int, int, int, int]], ...]  # (layer, rectangle)
    gate: dict[str, float]
    diff: float
    cell: dict[str, float]  # layer name -> um^2
    cell_side: dict[str, float]  # layer name -> side-wall um^2
    block: dict[tuple[str, int, str], float]  # (measure, step, oxide) -> the block's CAR

    @property
    def total_gate(self) -> float:
        return sum(self.gate.values())


def _pins(deck: RefDeck, net: dict[str, Any]) -> list[RefPin]:
    out = []
    for p in net.get("pins", []):
        raw = p.get("gate_area", {})
        gate = {DEFAULT_OXIDE: float(raw)} if isinstance(raw, (int, float)) else {k: float(v) for k, v in raw.items()}
        rects = tuple((deck.index[r["layer"]], tuple(r["rect"])) if isinstance(r, dict)
                      else (deck.index[p["layer"]], tuple(r)) for r in p["rects"])
        out.append(RefPin(p["name"], min(layer for layer, _ in rects), rects,
                          {k: v for k, v in gate.items() if v > 0}, float(p.get("diff_area", 0.0)),
                          {k: float(v) for k, v in p.get("cell_area", {}).items()},
                          {k: float(v) for k, v in p.get("cell_side_area", {}).items()},
                          {(b.get("measure", "area"), deck.index[b["layer"]], b.get("oxide", DEFAULT_OXIDE)):
                           float(b["ratio"]) for b in p.get("block_car", [])}))
    return out


@dataclass
class RefComponent:
    """A component at one step with the contract's quantities."""

    step: int
    nodes: frozenset
    gate: float  # G, all oxides
    gate_ox: dict[str, float]
    diff: float  # D
    union_area_um2: float
    union_perimeter_um: float
    cell_um2: float
    cell_side_um2: float
    gate_pins: list[int] = field(default_factory=list)

    def holds_pin(self, p: int) -> bool:
        """Whether pin p (any of its rectangles) is in this component."""
        return any(n[0] == "pin" and n[1] == p for n in self.nodes)

    def conductor(self, deck: RefDeck, measure: str) -> float:
        """A(C) on the step's layer for a measure, per the contract."""
        if measure == "area":
            return self.union_area_um2 + self.cell_um2
        layer = deck.layers[self.step]
        if layer.kind == "cut":
            return 0.0
        return self.union_perimeter_um * layer.thickness_um + self.cell_side_um2


@dataclass(frozen=True)
class RefEntry:
    """One check of one component (before taking the worst over components)."""

    step: int
    layer: str
    measure: str
    kind: str
    oxide: str
    ratio: float
    limit: float
    utilization: float
    nodes: frozenset


@dataclass
class RefAnalysis:
    components: list[list[RefComponent]]  # per step
    entries: list[RefEntry]
    cars: dict[tuple[int, str, str], list[float]]  # (pin, measure, oxide) -> CAR per step
    report: dict[str, Any]


def same_layer_contact(a: tuple[int, ...], b: tuple[int, ...]) -> bool:
    # shapely: the closed intersection of two boxes is a Polygon (area), a LineString
    # (shared edge) or a Point (corner); only the first two connect (the contract).
    inter = box(*a).intersection(box(*b))
    return not inter.is_empty and (inter.area > 0 or inter.length > 0)


def cut_contact(a: tuple[int, ...], b: tuple[int, ...]) -> bool:
    return box(*a).intersection(box(*b)).area > 0  # shapely: positive-area overlap


def utilization_of(ratio: float, limit: float) -> float:
    if limit > 0:
        return ratio / limit
    return math.inf if ratio > 0 else 0.0


def is_legal(util: float) -> bool:
    return util <= 1.0 + TOLERANCE


def analyze(deck: RefDeck, net: dict[str, Any]) -> RefAnalysis:
    """Every component, ratio and check of one net, step by step."""
    index = deck.index
    pins = _pins(deck, net)
    shapes = [(index[s["layer"]], tuple(s["rect"])) for s in net.get("shapes", [])]
    elements: list[tuple[Node, int, tuple[int, ...]]] = [(("shape", i), l, r) for i, (l, r) in enumerate(shapes)]
    for p, pin in enumerate(pins):
        elements += [(("pin", p, k), layer, r) for k, (layer, r) in enumerate(pin.rects)]
    steps = len(deck.layers)
    scale = 1.0 / deck.dbu_per_micron
    components: list[list[RefComponent]] = []
    for s in range(steps):
        present = [e for e in elements if e[1] <= s]  # the contract: layers <= s exist
        graph = nx.Graph()
        graph.add_nodes_from(e[0] for e in present)
        for i, (na, la, ra) in enumerate(present):
            for nb, lb, rb in present[i + 1:]:
                if la == lb:
                    linked = same_layer_contact(ra, rb)
                elif abs(la - lb) == 1 and deck.layers[la].kind != deck.layers[lb].kind:
                    linked = cut_contact(ra, rb)
                else:
                    linked = False
                if na[0] == "pin" and nb[0] == "pin" and na[1] == nb[1]:
                    linked = True  # rectangles of one pin are one conductor
                if linked:
                    graph.add_edge(na, nb)
        at_step = []
        for nodes in nx.connected_components(graph):
            pin_ids = sorted({n[1] for n in nodes if n[0] == "pin"})
            routed = [box(*shapes[n[1]][1]) for n in nodes if n[0] == "shape" and shapes[n[1]][0] == s]
            union = unary_union(routed) if routed else None
            gate_ox: dict[str, float] = {}
            for p in pin_ids:
                for ox, g in pins[p].gate.items():
                    gate_ox[ox] = gate_ox.get(ox, 0.0) + g
            at_step.append(RefComponent(
                step=s, nodes=frozenset(nodes),
                gate=sum(pins[p].total_gate for p in pin_ids), gate_ox=gate_ox,
                diff=sum(pins[p].diff for p in pin_ids),
                union_area_um2=(union.area * scale * scale) if union is not None else 0.0,
                union_perimeter_um=(union.length * scale) if union is not None else 0.0,
                cell_um2=sum(pins[p].cell.get(deck.layers[s].name, 0.0) for p in pin_ids),
                cell_side_um2=sum(pins[p].cell_side.get(deck.layers[s].name, 0.0) for p in pin_ids),
                gate_pins=[p for p in pin_ids if pins[p].total_gate > 0]))
        components.append(at_step)

    def comp_of_pin(p: int, s: int) -> RefComponent | None:
        return next((c for c in components[s] if c.holds_pin(p)), None)

    def term(c: RefComponent, s: int, measure: str, oxide: str) -> float:
        rule = deck.rules.get((deck.layers[s].name, measure, oxide))
        conductor = c.conductor(deck, measure)
        if rule is None:
            return conductor / c.gate  # the contract: plain A / G without a rule
        return rule.effective_ratio(conductor, c.gate, c.diff)

    def car(p: int, s: int | None, measure: str, oxide: str) -> float:
        """The contract's chain, walked down from s: CAR_s = PAR_s + CAR_p, 0 below."""
        if s is None:
            return 0.0
        own = 0.0 if s < pins[p].layer else term(comp_of_pin(p, s), s, measure, oxide)  # type: ignore[arg-type]
        return own + car(p, deck.feeding_step(s, measure), measure, oxide)

    def block(p: int, s: int | None, measure: str, oxide: str) -> float:
        """The block's own sum: its entry at s, else at the step feeding s, and so on."""
        while s is not None:
            if (measure, s, oxide) in pins[p].block:
                return pins[p].block[(measure, s, oxide)]
            s = deck.feeding_step(s, measure)
        return 0.0

    groups = {(r.measure, r.oxide) for r in deck.rules.values()}
    cars: dict[tuple[int, str, str], list[float]] = {}
    for p, pin in enumerate(pins):
        for measure, oxide in groups:
            if oxide in pin.gate:
                cars[(p, measure, oxide)] = [car(p, s, measure, oxide) + block(p, s, measure, oxide)
                                             for s in range(steps)]

    entries: list[RefEntry] = []
    for s in range(steps):
        lname = deck.layers[s].name
        for (layer, measure, oxide), rule in deck.rules.items():
            if layer != lname:
                continue
            for c in components[s]:
                if c.gate_ox.get(oxide, 0.0) <= 0:
                    continue
                if rule.has_partial:
                    ratio = rule.effective_ratio(c.conductor(deck, measure), c.gate, c.diff)
                    limit = limit_for(rule.partial_max, rule.diode_partial_max, c.diff)
                    entries.append(RefEntry(s, lname, measure, "partial", oxide, ratio, limit,
                                            utilization_of(ratio, limit), c.nodes))
                if rule.has_cumulative:
                    ratio = max(cars[(p, measure, oxide)][s] for p in c.gate_pins if oxide in pins[p].gate)
                    limit = limit_for(rule.cumulative_max, rule.diode_cumulative_max, c.diff)
                    entries.append(RefEntry(s, lname, measure, "cumulative", oxide, ratio, limit,
                                            utilization_of(ratio, limit), c.nodes))
    return RefAnalysis(components, entries, cars, _report(net.get("name", ""), entries))


def _report(name: str, entries: list[RefEntry]) -> dict[str, Any]:
    """The contract's offline check output: the worst case per (layer, measure, kind, oxide)."""
    worst: dict[tuple[str, str, str, str], RefEntry] = {}
    for e in entries:
        key = (e.layer, e.measure, e.kind, e.oxide)
        if key not in worst or e.utilization > worst[key].utilization:
            worst[key] = e
    checks = [{"layer": e.layer, "measure": e.measure, "kind": e.kind, "oxide": e.oxide,
               "ratio": e.ratio, "limit": e.limit, "utilization": e.utilization,
               "legal": is_legal(e.utilization)} for e in worst.values()]
    worst_util = max((c["utilization"] for c in checks), default=0.0)
    return {"name": name, "legal": is_legal(worst_util), "worst_utilization": worst_util, "checks": checks}


def tied_worst(entries: list[RefEntry], key: tuple[str, str, str, str]) -> list[RefEntry]:
    """Entries of one (layer, measure, kind, oxide) whose utilization ties the worst
    (within the contract's tolerance): any of them is a correct "worst case"."""
    same = [e for e in entries if (e.layer, e.measure, e.kind, e.oxide) == key]
    if not same:
        return []
    top = max(e.utilization for e in same)
    return [e for e in same if math.isclose(e.utilization, top, rel_tol=TOLERANCE, abs_tol=1e-12)]


def added_union_area_um2(deck: RefDeck, net: dict[str, Any], candidate: list[dict[str, Any]]) -> dict[str, float]:
    """Per layer of the candidate: union area with it minus without it (shapely), um^2."""
    scale = 1.0 / deck.dbu_per_micron
    out = {}
    for lname in {c["layer"] for c in candidate}:
        existing = [box(*s["rect"]) for s in net.get("shapes", []) if s["layer"] == lname]
        new = [box(*c["rect"]) for c in candidate if c["layer"] == lname]
        before = unary_union(existing).area if existing else 0.0
        out[lname] = (unary_union(existing + new).area - before) * scale * scale
    return out


# -- comparing an engine report with the reference -------------------------------------

def close(a: float, b: float) -> bool:
    """Equal within the contract's relative tolerance (with a tiny absolute floor for
    values that are 0 on one side and a rounding residue on the other)."""
    return math.isclose(a, b, rel_tol=TOLERANCE, abs_tol=1e-12)


def report_disagreements(engine_report: Any, analysis: RefAnalysis) -> list[str]:
    """Every way an engine NetReport differs from the reference; empty when they agree."""
    problems: list[str] = []
    ref = analysis.report
    ref_keys = {(c["layer"], c["measure"], c["kind"], c["oxide"]) for c in ref["checks"]}
    got = {(c.layer, c.measure, c.kind, c.oxide): c for c in engine_report.checks}
    if set(got) != ref_keys:
        problems.append(f"check keys differ: engine only {sorted(set(got) - ref_keys)}, "
                        f"reference only {sorted(ref_keys - set(got))}")
    for key in sorted(set(got) & ref_keys):
        c = got[key]
        ties = tied_worst(analysis.entries, key)
        top = ties[0].utilization
        if not close(c.utilization, top):
            problems.append(f"{key}: utilization {c.utilization!r}, reference {top!r}")
        if not any(close(c.ratio, e.ratio) and close(c.limit, e.limit) for e in ties):
            problems.append(f"{key}: ratio/limit {c.ratio!r}/{c.limit!r}, reference "
                            f"{[(e.ratio, e.limit) for e in ties]}")
        if c.legal != is_legal(top):
            problems.append(f"{key}: legal {c.legal}, reference {is_legal(top)}")
    if not close(engine_report.worst_utilization, ref["worst_utilization"]):
        problems.append(f"worst_utilization {engine_report.worst_utilization!r}, "
                        f"reference {ref['worst_utilization']!r}")
    if engine_report.legal != ref["legal"]:
        problems.append(f"legal {engine_report.legal}, reference {ref['legal']}")
    return problems
