"""Independent of the router's own bookkeeping: is every net really connected?

The router's final shapes and pins are joined by the contract's contact rules (same
layer: a shared area or edge; a cut and a routing layer next to each other: a shared
area) into a networkx graph, and a net counts as routed when all its pins lie in one
connected component with every layer present (the top process step).
"""

from __future__ import annotations

from collections.abc import Iterable
from pathlib import Path

import networkx as nx

from etchguard import load_deck, make_pin, make_shape
from etchguard._geometry import edge_touch, overlap


def connected_nets(deck_path: Path, routes: Iterable) -> set[str]:
    """Names of the routes (``route.pins``, ``route.shapes``) whose pins are all in one
    component at the top step."""
    deck = load_deck(deck_path)
    cut = [not layer.is_routing for layer in deck.layers]
    out: set[str] = set()
    for route in routes:
        pins = [make_pin(deck, p.name, p.layer, p.rects, p.gate_area, p.diff_area, p.cell_area)
                for p in route.pins]
        nodes = [(("pin", i), pin.layer, r) for i, pin in enumerate(pins) for r in pin.rects]
        nodes += [(("shape", i), shape.layer, shape.rect)
                  for i, shape in enumerate(make_shape(deck, s.layer, s.rect) for s in route.shapes)]
        graph = nx.Graph()
        graph.add_nodes_from(range(len(nodes)))
        for a, (ka, la, ra) in enumerate(nodes):
            for b in range(a + 1, len(nodes)):
                kb, lb, rb = nodes[b]
                if (la == lb and (edge_touch(ra, rb) or ka == kb)) or (
                        abs(la - lb) == 1 and cut[la] != cut[lb] and overlap(ra, rb)):
                    graph.add_edge(a, b)
        first = {key: n for n, (key, _, _) in reversed(list(enumerate(nodes)))}
        pin_nodes = [first[("pin", i)] for i in range(len(pins))]
        if pin_nodes and all(nx.has_path(graph, pin_nodes[0], n) for n in pin_nodes[1:]):
            out.add(route.data.name)
    return out
