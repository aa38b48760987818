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

from collections.abc import Sequence
from dataclasses import dataclass

from ._assess import Assessment, Entry, comp_entries, utilization_only
from ._geometry import Rect, edge_touch, overlap, union_measures
from ._netstate import Comp, NetState
from ._nets import Shape
from ._ratios import conductor_headroom, is_legal, utilization
from ._reports import RatioChange, Score
from ._rules import Rule


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
    return assessment.comp_worst[step].get(comp, 0.0)


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


class _JoinPlan:
    """What stays fixed while candidates extend one component C at step L.

    For a single rectangle on layer L that joins exactly C at L and nothing else at
    any later step, everything about the what-if but two integers (the area and
    perimeter it adds) is a constant of (C, L): the partial checks at L get the new
    conductor, each (measure, oxide) group's term at L changes by the same amount for
    every gate of C, and a cumulative check at a later step s of L's lane takes
    max(best CAR of C's gates + change, best CAR of the other gates of C_s). The plan
    holds those constants, built with the same calls as the general path, so the
    floats come out bit for bit the same (float addition is monotone, so the best
    CAR plus a change is the best of the sums).
    """

    __slots__ = ("comp", "partial", "groups", "old_terms", "steps", "floor")

    def __init__(self, state: NetState, assessment: Assessment, comp: Comp, layer: int) -> None:
        model = state.model
        self.comp = comp
        oxides = comp.gate_ox
        self.partial = [(key.rule, key.measure, key.rule.partial_limit(comp.diff))
                        for key in model.partial_checks[layer] if key.oxide in oxides]
        # groups whose term changes for some gate of C, and their old term at L
        self.groups = [gi for gi, (_m, ox) in enumerate(model.groups)
                       if any(ox in assessment.pins_ox[p] for p in comp.gates)]
        self.old_terms = {gi: model.term(layer, gi, comp.area, comp.cell, comp.perim, comp.gate,
                                         comp.diff) for gi in self.groups}
        in_comp = set(comp.gates)
        anchor = state.anchor_of_pin[comp.gates[0]]
        lane = model.lane[layer]
        floor = assessment.worst_below[layer]
        # per step: (cumulative checks [(group, limit, best CAR in C, best CAR outside)],
        #            fixed worst when nothing changes there, fixed worst around the checks)
        self.steps: list[tuple[int, list[tuple[int, float, float, float]], float, float]] = []
        for s in range(layer, model.steps):
            c_s = state.comp_at[s][anchor]
            floor = max(floor, assessment.worst_untouched(s, {c_s}))
            checks = []
            for key in model.cumulative_checks[s]:
                if key.oxide not in c_s.gate_ox:
                    continue
                gi = model.group_index[(key.measure, key.oxide)]
                best_in = best_out = -1.0
                for p in c_s.gates:
                    if key.oxide in assessment.pins_ox[p]:
                        value = assessment.cars[(p, gi)][s]
                        if p in in_comp:
                            best_in = max(best_in, value)
                        else:
                            best_out = max(best_out, value)
                checks.append((gi, key.rule.cumulative_limit(c_s.diff), best_in, best_out))
            unchanged = max(assessment.partial_worst[s].get(c_s, 0.0),
                            _unchanged_worst(assessment, s, c_s))
            # at L the component changes: its old partial figures are not in the answer
            around = 0.0 if s == layer else assessment.partial_worst[s].get(c_s, 0.0)
            if s == layer or model.lane[s] == lane:
                self.steps.append((s, checks, unchanged, around))
            else:
                floor = max(floor, unchanged)
        self.floor = floor


def _joins_one(state: NetState, touches: list[tuple[int, int]], layer: int) -> Comp | None:
    """The one component a rectangle on ``layer`` joins at every step, if it is so."""
    if not touches:
        return None
    comp_at = state.comp_at
    first = touches[0][0]
    if any(joined == layer and comp_at[layer][e] is not comp_at[layer][first] for e, joined in touches):
        return None
    if any(joined != layer for _e, joined in touches):
        if layer + 1 >= state.model.steps or any(
                comp_at[layer + 1][e] is not comp_at[layer + 1][first] for e, _j in touches):
            return None
    if all(joined != layer for _e, joined in touches):
        return None  # floating at its own step: the general path says what it does
    return comp_at[layer][first]


def score_joining(state: NetState, assessment: Assessment, cand: Shape | Sequence[Shape],
                  costs: CostModel) -> Score | None:
    """The what-if of a candidate that joins one gate-connected component, or None
    when the general path is needed. Equal to ``score(..., detail=False)``.

    One rectangle takes the join plan below; several shapes take the chain plan
    (``_score_chain``) when they form one group that joins one component at every step.
    """
    if not isinstance(cand, Shape):
        if len(cand) != 1:
            return _score_chain(state, assessment, list(cand), costs)
        cand = cand[0]
    layer, rect = cand.layer, cand.rect
    touches = state.touching(layer, rect)
    comp = _joins_one(state, touches, layer)
    if comp is None or comp.gate <= 0:
        return None
    plans = assessment.join_plans
    plan = plans.get((id(comp), layer))
    if plan is None or plan.comp is not comp:
        plan = plans[(id(comp), layer)] = _JoinPlan(state, assessment, comp, layer)
    model = state.model
    area, perim = _local_change(state, [rect], [touches], layer)
    new_area, new_perim = comp.area + area, comp.perim + perim
    worst_change = 0.0
    for rule, measure, limit in plan.partial:
        conductor = model.conductor(layer, measure, new_area, comp.cell, new_perim)
        u = utilization(rule.ratio(conductor, comp.gate, comp.diff), limit)
        if u > worst_change:
            worst_change = u
    change = {gi: model.term(layer, gi, new_area, comp.cell, new_perim, comp.gate, comp.diff)
              - plan.old_terms[gi] for gi in plan.groups}
    moved = any(change.values())
    worst_net = plan.floor
    for s, checks, unchanged, around in plan.steps:
        if s != layer and not moved:
            worst_net = max(worst_net, unchanged)
            continue
        worst_net = max(worst_net, around)
        for gi, limit, best_in, best_out in checks:
            value = best_in + change[gi] if gi in change and best_in >= 0 else best_in
            u = utilization(max(value, best_out), limit)
            if u > worst_change:
                worst_change = u
    worst_net = max(worst_net, worst_change)
    return Score({model.deck.layers[layer].name: area * model.scale_area}, (), worst_change, worst_net,
                 is_legal(worst_net), not is_legal(worst_change), costs.cost(worst_change))


# Chain plans sit beside the join plans in ``Assessment.join_plans``, under
# (id(component), _CHAIN_KEY - lowest step): a negative second key never meets a layer.
_CHAIN_KEY = -1


class _ChainStep:
    """The constants of one step s of a chain plan (see ``_ChainPlan``)."""

    __slots__ = ("step", "comp", "lane", "joined", "old_terms", "partial", "cumulative",
                 "unchanged", "around", "untouched")

    def __init__(self, step: int, comp: Comp, lane: int, joined: int,
                 old_terms: list[tuple[int, float]],
                 partial: list[tuple[Rule, str, float]],
                 cumulative: list[tuple[int, float, list[tuple[int, float]]]],
                 unchanged: float, around: float, untouched: float) -> None:
        self.step, self.comp, self.lane, self.joined = step, comp, lane, joined
        self.old_terms = old_terms  # (group, C_s's term at s) for groups some gate of C_s has
        self.partial = partial  # (rule, measure, limit) of the partial checks of C_s at s
        # (group, limit, [(join batch, best CAR at s of its gates)]) per cumulative check
        self.cumulative = cumulative
        self.unchanged = unchanged  # worst of C_s at s when nothing about it changes
        self.around = around  # C_s's old partial worst (kept when only its sums move)
        self.untouched = untouched  # worst of the other components at s


class _ChainPlan:
    """What stays fixed while multi-shape candidates extend the chain of one component.

    Let C = C_L be a gate-connected component at step L and C_s, for s >= L, the
    component holding C's elements at step s (C_L is contained in C_{L+1} and so on:
    connectivity only grows). A candidate whose shapes form one group that joins exactly
    C_s at every step s >= L (L its lowest layer) changes, at step s, only C_s, and only
    when it has shapes on layer s; everything but the union change (two integers per
    such step) is a constant of (C, L):

    * the old terms of C_s at s, per (measure, oxide) group, so a step's term change is
      ``model.term(new) - old`` exactly as the general path computes it;
    * the gates in join batches: the gates of C_L, then per step the gates of C_s that
      were not in C_{s-1}. The general path adds the same term change to every gate of
      C_s, so all gates of a batch carry the same change per lane, built by the same
      additions in the same order (``d[lane] += x`` from 0.0);
    * per cumulative check at s, the best CAR at s of each batch's gates: float
      addition is monotone, so the best of (CAR + change) over a batch is its best CAR
      plus the batch's change;
    * the fixed worst figures the general path reads from the assessment.
    """

    __slots__ = ("comp", "batches", "steps")

    def __init__(self, state: NetState, assessment: Assessment, comp: Comp, first: int) -> None:
        model = state.model
        pins_ox = assessment.pins_ox
        self.comp = comp
        anchor = next(iter(comp.members))
        # per join batch: the groups whose change its gates carry (an entry (pin, group)
        # exists in the general path exactly when the pin has the group's oxide)
        self.batches: list[list[int]] = []
        batch_gates: list[list[int]] = []
        seen: set[int] = set()
        self.steps: list[_ChainStep] = []
        for s in range(first, model.steps):
            c_s = state.comp_at[s][anchor]
            fresh = [p for p in c_s.gates if p not in seen]
            if fresh:
                seen.update(fresh)
                batch_gates.append(fresh)
                self.batches.append([gi for gi, (_m, ox) in enumerate(model.groups)
                                     if any(ox in pins_ox[p] for p in fresh)])
            groups = sorted({gi for b in self.batches for gi in b})
            old_terms = [(gi, model.term(s, gi, c_s.area, c_s.cell, c_s.perim, c_s.gate, c_s.diff))
                         for gi in groups]
            partial = [(key.rule, key.measure, key.rule.partial_limit(c_s.diff))
                       for key in model.partial_checks[s] if key.oxide in c_s.gate_ox]
            cumulative = []
            for key in model.cumulative_checks[s]:
                if key.oxide not in c_s.gate_ox:
                    continue
                gi = model.group_index[(key.measure, key.oxide)]
                bests = []
                for b, gates in enumerate(batch_gates):
                    values = [assessment.cars[(p, gi)][s] for p in gates if key.oxide in pins_ox[p]]
                    if values:
                        bests.append((b, max(values)))
                cumulative.append((gi, key.rule.cumulative_limit(c_s.diff), bests))
            around = assessment.partial_worst[s].get(c_s, 0.0)
            self.steps.append(_ChainStep(
                s, c_s, model.lane[s], len(batch_gates), old_terms, partial, cumulative,
                max(around, _unchanged_worst(assessment, s, c_s)), around,
                assessment.worst_untouched(s, {c_s})))


def _chain_component(state: NetState, cands: list[Shape],
                     touches: list[list[tuple[int, int]]]) -> Comp | None:
    """C_L when the candidates, at every step s from their lowest layer L up, form one
    group by their own contacts (shapes on layers <= s) that touches exactly one
    existing component, gate-connected at L; else None.

    Contacts with existing elements start at most one step above the candidate's own
    layer, so past the top layer + 1 the touched elements stay the same and, being in
    one component there, stay in one component at every later step.
    """
    model = state.model
    layers = [c.layer for c in cands]
    first, top = min(layers), max(layers)
    parent = list(range(len(cands)))
    links_at: dict[int, list[tuple[int, int]]] = {}
    for i, j, joined in _candidate_links(cands, model.is_cut):
        links_at.setdefault(joined, []).append((i, j))
    chain: Comp | None = None
    for s in range(first, min(model.steps - 1, top + 1) + 1):
        for i, j in links_at.get(s, ()):
            ri, rj = _find(parent, i), _find(parent, j)
            if ri != rj:
                parent[ri] = rj
        present = [i for i, layer in enumerate(layers) if layer <= s]
        root = _find(parent, present[0])
        if any(_find(parent, i) != root for i in present):
            return None  # two groups at s (or joined only through the net): general path
        at_s = state.comp_at[s]
        comp: Comp | None = None
        for i in present:
            for e, joined in touches[i]:
                if joined <= s:
                    c = at_s[e]
                    if comp is None:
                        comp = c
                    elif c is not comp:
                        return None  # a merge of components
        if comp is None:
            return None  # floating at the lowest step
        if chain is None:
            if comp.gate <= 0:
                return None
            chain = comp
    return chain


def _score_chain(state: NetState, assessment: Assessment, cands: list[Shape],
                 costs: CostModel) -> Score | None:
    """The what-if of several shapes that extend one component's chain (``_ChainPlan``),
    or None when the general path is needed. Equal to ``score(..., detail=False)``.

    It walks the steps as the general path does for its single group: at a step with
    candidate shapes the group is C_s plus their local union change (the same
    ``_local_change`` call), the term change is added to every join batch that has
    joined, and every check of C_s is evaluated; at a step without, C_s's cumulative
    checks are re-evaluated only when some batch's change in the step's lane is
    nonzero, else the assessment's figures stand; the other components' worst is read
    from the assessment at every step.
    """
    if not cands:
        return None
    model = state.model
    first = min(c.layer for c in cands)
    # The lowest step decides most refusals (a driver-side start without a gate, a
    # floating start): look there first, before the neighbours of the other shapes.
    low = {i: state.touching(c.layer, c.rect) for i, c in enumerate(cands) if c.layer == first}
    at_first = {id(state.comp_at[first][e]): state.comp_at[first][e]
                for t in low.values() for e, joined in t if joined == first}
    if len(at_first) != 1 or next(iter(at_first.values())).gate <= 0:
        return None
    touches = [low[i] if i in low else state.touching(c.layer, c.rect) for i, c in enumerate(cands)]
    comp = _chain_component(state, cands, touches)
    if comp is None:
        return None
    plans = assessment.join_plans
    key = (id(comp), _CHAIN_KEY - first)
    plan = plans.get(key)
    if not isinstance(plan, _ChainPlan) or plan.comp is not comp:
        plan = plans[key] = _ChainPlan(state, assessment, comp, first)
    on_layer: dict[int, tuple[list[Rect], list[list[tuple[int, int]]]]] = {}
    for c, t in zip(cands, touches):  # candidate order, as the general path lists them
        rects, their = on_layer.setdefault(c.layer, ([], []))
        rects.append(c.rect)
        their.append(t)
    changes = [{gi: [0.0, 0.0] for gi in groups} for groups in plan.batches]
    layer_names = model.deck.layers
    added: dict[str, float] = {}
    worst_change = 0.0
    worst_net = assessment.worst_below[first]
    for st in plan.steps:
        s, c_s, lane, joined = st.step, st.comp, st.lane, st.joined
        here = on_layer.get(s)
        if here is not None:
            area, perim = _local_change(state, here[0], here[1], s)
            name = layer_names[s].name
            added[name] = added.get(name, 0.0) + area * model.scale_area
            new_area, new_perim = c_s.area + area, c_s.perim + perim
            for gi, old in st.old_terms:
                x = model.term(s, gi, new_area, c_s.cell, new_perim, c_s.gate, c_s.diff) - old
                for b in range(joined):
                    d = changes[b].get(gi)
                    if d is not None:
                        d[lane] += x
            for rule, measure, limit in st.partial:
                conductor = model.conductor(s, measure, new_area, c_s.cell, new_perim)
                u = utilization(rule.ratio(conductor, c_s.gate, c_s.diff), limit)
                if u > worst_change:
                    worst_change = u
        elif not any(d[lane] for b in range(joined) for d in changes[b].values()):
            worst_net = max(worst_net, st.unchanged, st.untouched)
            continue  # nothing about C_s changes at this step
        else:
            worst_net = max(worst_net, st.around)
        for gi, limit, bests in st.cumulative:
            best = -1.0  # as comp_entries starts its search
            for b, value in bests:
                value += changes[b][gi][lane]
                if value > best:
                    best = value
            u = utilization(best, limit)
            if u > worst_change:
                worst_change = u
        worst_net = max(worst_net, worst_change, st.untouched)
    return Score(added, (), worst_change, worst_net, is_legal(worst_net),
                 not is_legal(worst_change), costs.cost(worst_change))
