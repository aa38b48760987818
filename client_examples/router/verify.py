"""Independent of the router's own bookkeeping: is every net really connected?

The router's final shapes and pins are loaded into the engine's net state in this
process (the same connectivity the service computes: the contract's contact rules,
step by step), and a net counts as routed when all its pins lie in one component at
the top process step.
"""

from __future__ import annotations

from collections.abc import Iterable
from pathlib import Path

from etchguard import load_deck, make_pin, make_shape
from etchguard._netstate import NetState  # the engine's per-net connectivity
from etchguard._ratios import StepModel


def connected_nets(deck_path: Path, routes: Iterable) -> set[str]:
    """Names of the routes (``route.pins``, ``route.shapes``) whose pins are all in one
    component at the top step."""
    deck = load_deck(deck_path)
    model = StepModel(deck)
    top = model.steps - 1
    out: set[str] = set()
    for route in routes:
        pins = [make_pin(deck, p.name, p.layer, p.rects, p.gate_area, p.diff_area, p.cell_area)
                for p in route.pins]
        state = NetState(model, pins)
        for i, s in enumerate(route.shapes):
            shape = make_shape(deck, s.layer, s.rect)
            state.add_shape(i + 1, shape.layer, shape.rect)
        comps = {id(state.comp_of_pin(p, top)) for p in range(len(pins))}
        if len(comps) == 1:
            out.add(route.data.name)
    return out
