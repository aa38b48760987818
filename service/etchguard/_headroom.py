"""Headroom: how much more conductor a component may take on a layer.

Added conductor on layer L raises the partial ratio at L and, by the same term, every
cumulative ratio of the component's gates at the steps >= L of L's lane (see
``_ratios``); each check allows ``conductor_headroom`` more, and the headroom is the
least of them. A run at the layer's default width w adds w um^2 of area and two side
walls of thickness um^2 per um of length, which turns the figures into a length.
"""

from __future__ import annotations

from ._assess import Assessment
from ._netstate import NetState
from ._ratios import conductor_headroom
from ._reports import Headroom


def layer_headroom(state: NetState, assessment: Assessment, layer: int, element: int) -> Headroom:
    """Remaining conductor on ``layer`` for the component holding ``element``."""
    model = state.model
    deck = model.deck
    comp = state.comp_at[layer][element]
    info = deck.layers[layer]
    best = {"area": float("inf"), "side": float("inf")}
    binding = {"area": "", "side": ""}
    if comp.gate > 0:
        for e in assessment.entries[layer].get(comp, ()):
            if e.kind != "partial":
                continue
            room = conductor_headroom(deck.rule(layer, e.measure, e.oxide), e.limit, e.gate_um2,
                                      e.diff_um2, 0.0, e.conductor)
            if room < best[e.measure]:
                best[e.measure], binding[e.measure] = room, f"{info.name} partial {e.measure} {e.oxide}"
        lane = model.lane[layer]
        for s in range(layer, model.steps):
            if model.lane[s] != lane:
                continue
            for key in model.cumulative_checks[s]:
                gi = model.group_index[(key.measure, key.oxide)]
                term_rule = model.term_rule[layer][gi]
                conductor = model.conductor(layer, key.measure, comp.area, comp.cell, comp.perim)
                term = (conductor / comp.gate if term_rule is None
                        else term_rule.ratio(conductor, comp.gate, comp.diff))
                for p in comp.gates:
                    if key.oxide not in state.pins[p].gate_area:
                        continue
                    later = state.comp_of_pin(p, s)
                    limit = key.rule.cumulative_limit(later.diff)
                    spent = assessment.cars[(p, gi)][s] - term
                    room = conductor_headroom(term_rule, limit, comp.gate, comp.diff, spent, conductor)
                    if room < best[key.measure]:
                        best[key.measure] = room
                        binding[key.measure] = (f"{deck.layers[s].name} cumulative {key.measure} "
                                                f"{key.oxide} of {state.pins[p].name}")
    # Run length at the default width: a um of run adds width um^2 of area and two
    # side walls of thickness um^2 each (the ends are already counted in the run).
    length, which = float("inf"), ""
    if info.is_routing and info.wire_width and best["area"] < float("inf"):
        length, which = best["area"] / (info.wire_width / deck.dbu_per_micron), binding["area"]
    if info.is_routing and info.thickness_um and best["side"] < float("inf"):
        side_length = best["side"] / (2.0 * info.thickness_um)
        if side_length < length:
            length, which = side_length, binding["side"]
    return Headroom(info.name, True, best["area"], best["side"], length, which)
