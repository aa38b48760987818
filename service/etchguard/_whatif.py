"""What-if scoring: the exact effect of candidate shapes, without committing them.

For candidate shapes C on a net, step by step from the lowest candidate layer up:
the candidates present at step s (layers <= s) are joined, by the contract's contact
rules, to each other and to the existing components they touch. Each resulting
group is a component the net would have at step s after the commit; its aggregates
are the sums of the merged components' (components of one step never overlap, so
areas and perimeters add) plus the local change the candidates make on layer s.
A gate's cumulative ratio changes by the sum, over the steps of its lane, of the
change of its component's term; groups are monotone in s (a candidate joined to a
gate at step t is joined to it at every later step), so gates outside every group
keep their sums. The result equals a full check after the commit (the property
tests hold it to an independent shapely + networkx reference).
"""

from __future__ import annotations

from dataclasses import dataclass

from ._assess import Assessment, Entry, comp_entries, utilization_only
from ._geometry import Rect, edge_touch, overlap, union_measures
from ._netstate import Comp, NetState
from ._nets import Shape
from ._ratios import conductor_headroom, is_legal
from ._reports import RatioChange, Score


@dataclass(frozen=True)
class CostModel:
    """Router cost of a candidate from the worst utilization u it leads to.

    ``0`` for u <= knee; ``scale * ((u - knee) / (1 - knee)) ** exponent`` up to the
    limit (so 0 -> scale, rising steeply near 1); above the limit
    ``violation + scale * over_slope * (u - 1)``, large enough to dominate any wire cost.
    """

    knee: float = 0.7
    exponent: float = 3.0
    scale: float = 10.0
    violation: float = 1.0e6
    over_slope: float = 1.0e3

    def cost(self, u: float) -> float:
        if u <= self.knee:
            return 0.0
        if u <= 1.0:
            return self.scale * ((u - self.knee) / (1.0 - self.knee)) ** self.exponent
        return self.violation + self.scale * self.over_slope * (u - 1.0)


def _candidate_links(cands: list[Shape], is_cut: list[bool]) -> list[tuple[int, int, int]]:
    """Contacts among the candidates themselves: (i, j, step from which they connect)."""
    by_layer: dict[int, list[int]] = {}
    for i, c in enumerate(cands):
        by_layer.setdefault(c.layer, []).append(i)
    links = []
    for layer, members in by_layer.items():
        for a, i in enumerate(members):
            ri = cands[i].rect
            for j in members[a + 1:]:
                if edge_touch(ri, cands[j].rect):
                    links.append((i, j, layer))
        above = by_layer.get(layer + 1)
        if above and is_cut[layer] != is_cut[layer + 1]:
            for i in members:
                ri = cands[i].rect
                for j in above:
                    if overlap(ri, cands[j].rect):
                        links.append((i, j, layer + 1))
    return links


def _find(parent: list[int], i: int) -> int:
    while parent[i] != i:
        parent[i] = parent[parent[i]]
        i = parent[i]
    return i


class _Grouper:
    """Connected groups of the candidates, step by step.

    Contacts only appear as the steps rise and components only grow, so the
    union-find over candidates carries from one step to the next: each step adds the
    candidate contacts that start there and joins candidates touching one component.
    """

    def __init__(self, cands: list[Shape], touches: list[list[tuple[int, int]]],
                 links: list[tuple[int, int, int]]) -> None:
        self.cands, self.touches = cands, touches
        self.parent = list(range(len(cands)))
        self.links_at: dict[int, list[tuple[int, int]]] = {}
        for i, j, joined in links:
            self.links_at.setdefault(joined, []).append((i, j))

    def _join(self, i: int, j: int) -> None:
        ri, rj = _find(self.parent, i), _find(self.parent, j)
        if ri != rj:
            self.parent[ri] = rj

    def at(self, at_s: dict[int, Comp], step: int) -> list[tuple[list[int], set[Comp]]]:
        for i, j in self.links_at.get(step, ()):
            self._join(i, j)
        present = [i for i, c in enumerate(self.cands) if c.layer <= step]
        first_toucher: dict[int, int] = {}  # id(component) -> a candidate touching it
        for i in present:
            for e, joined in self.touches[i]:
                if joined <= step:
                    self._join(i, first_toucher.setdefault(id(at_s[e]), i))
        groups: dict[int, tuple[list[int], set[Comp]]] = {}
        for i in present:
            members, comps = groups.setdefault(_find(self.parent, i), ([], set()))
            members.append(i)
            for e, joined in self.touches[i]:
                if joined <= step:
                    comps.add(at_s[e])
        return list(groups.values())


def score(state: NetState, assessment: Assessment, cands: list[Shape], costs: CostModel,
          detail: bool = True) -> Score:
    """Score candidate shapes on a net; ``detail=False`` skips the per-ratio changes
    (the verdict, worst utilizations and cost are the same)."""
    model = state.model
    layers = model.deck.layers
    steps = model.steps
    comp_at = state.comp_at
    anchor = state.anchor_of_pin
    pins_ox = assessment.pins_ox
    groups_of_rules = model.groups
    k = len(cands)
    touches = [state.touching(c.layer, c.rect) for c in cands]
    grouper = _Grouper(cands, touches, _candidate_links(cands, model.is_cut)) if k > 1 else None
    first = min(c.layer for c in cands)

    added: dict[str, float] = {}
    deltas: dict[tuple[int, int], list[float]] = {}  # (pin, group) -> change per lane
    changes: list[RatioChange] = []
    worst_change = 0.0
    worst_net = assessment.worst_below[first]
    for s in range(first, steps):
        at_s = comp_at[s]
        if grouper is None:
            groups = [([0], {at_s[e] for e, joined in touches[0] if joined <= s})]
        else:
            groups = grouper.at(at_s, s)
        touched: set[Comp] = set()
        lane = model.lane[s]
        for members, comps in groups:
            touched |= comps
            on_layer = [cands[i].rect for i in members if cands[i].layer == s]
            area = perim = 0
            if on_layer:
                area, perim = _local_change(state, on_layer,
                                            [touches[i] for i in members if cands[i].layer == s], s)
                name = layers[s].name
                added[name] = added.get(name, 0.0) + area * model.scale_area
            merged = len(comps) != 1 or bool(on_layer)
            if merged:
                group = Comp()
                for c in comps:
                    group.absorb(c)
                group.area += area
                group.perim += perim
            else:
                (group,) = comps
            if group.gate <= 0:
                continue
            if merged:  # this step's term changes for every gate in the group
                for p in group.gates:
                    old = at_s[anchor[p]]
                    ox_of_pin = pins_ox[p]
                    for gi, (_measure, oxide) in enumerate(groups_of_rules):
                        if oxide in ox_of_pin:
                            d = deltas.get((p, gi))
                            if d is None:
                                d = deltas[(p, gi)] = [0.0, 0.0]
                            d[lane] += (model.term(s, gi, group.area, group.cell, group.perim,
                                                   group.gate, group.diff)
                                        - model.term(s, gi, old.area, old.cell, old.perim,
                                                     old.gate, old.diff))
            elif not any(d[lane] for (p, _gi), d in deltas.items() if p in group.gates):
                worst_net = max(worst_net, assessment.partial_worst[s].get(group, 0.0),
                                _unchanged_worst(assessment, s, group))
                continue  # nothing about this component changes at this step
            if not merged:
                worst_net = max(worst_net, assessment.partial_worst[s].get(group, 0.0))
            if detail:
                after = comp_entries(model, s, group, assessment.cars, deltas, pins_ox, merged)
                before = [e for c in comps for e in assessment.entries[s].get(c, ())]
                for e in after:
                    worst_change = max(worst_change, e.utilization)
                    change = _change(state, e, before, len(comps) == 1)
                    if change is not None:
                        changes.append(change)
            else:
                utils = comp_entries(model, s, group, assessment.cars, deltas, pins_ox, merged,
                                     utilization_only)
                if utils:
                    worst_change = max(worst_change, *utils)
            worst_net = max(worst_net, worst_change)
        worst_net = max(worst_net, assessment.worst_untouched(s, touched))
    return Score(added, tuple(changes), worst_change, worst_net, is_legal(worst_net),
                 not is_legal(worst_change), costs.cost(worst_change))


def _unchanged_worst(assessment: Assessment, step: int, comp: Comp) -> float:
    return max((e.utilization for e in assessment.entries[step].get(comp, ())), default=0.0)


def _local_change(state: NetState, rects: list[Rect], touches: list[list[tuple[int, int]]],
                  step: int) -> tuple[int, int]:
    """Area and perimeter that candidate rects on one layer add to their group."""
    if len(rects) == 1:
        return state.local_delta(rects[0], state.routed_on(step, touches[0]), step)
    seen: dict[int, None] = {}
    for t in touches:
        for e, _ in t:
            seen[e] = None
    local = state.routed_on(step, ((e, 0) for e in seen))
    before_area, before_perim = union_measures(local)
    after_area, after_perim = union_measures(local + rects)
    if not state.model.side_needed[step]:
        return after_area - before_area, 0
    return after_area - before_area, after_perim - before_perim


def _change(state: NetState, e: Entry, before: list[Entry], one_predecessor: bool) -> RatioChange | None:
    """The change record for an after-entry, or None when it is the same component's
    same figure as before (a merge of several components always counts as a change)."""
    model = state.model
    layer = model.deck.layers[e.step]
    prior = [b for b in before if b.measure == e.measure and b.kind == e.kind and b.oxide == e.oxide]
    worst_prior = max(prior, key=lambda b: b.utilization) if prior else None
    if (one_predecessor and worst_prior is not None and worst_prior.ratio == e.ratio
            and worst_prior.limit == e.limit):
        return None
    rule = model.deck.rule(e.step, e.measure, e.oxide)
    room = conductor_headroom(rule, e.limit, e.gate_um2, e.diff_um2, e.spent, e.conductor)
    if layer.kind == "cut":
        length = None
    elif e.measure == "area":
        length = room / (layer.wire_width / model.deck.dbu_per_micron) if layer.wire_width else None
    else:
        length = room / (2.0 * layer.thickness_um) if layer.thickness_um else None
    return RatioChange(
        layer.name, e.step, e.measure, e.kind, e.oxide, state.pins[e.gate].name,
        worst_prior.ratio if worst_prior else None,
        worst_prior.utilization if worst_prior else None,
        e.ratio, e.limit, e.utilization, room, length)
