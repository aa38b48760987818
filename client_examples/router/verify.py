"""Independent of the router's own bookkeeping: is every net really connected?

The router's final shapes and pins are joined by the contract's contact rules (same
layer: a shared area or edge; a cut and a routing layer next to each other: a shared
area) into a networkx graph, and a net counts as routed when all its pins lie in one
connected component with every layer present (the top process step).
"""

from __future__ import annotations

from collections.abc import Iterable
from functools import lru_cache
from pathlib import Path

import networkx as nx
from etchguard import load_deck as _load_deck
from etchguard import make_pin, make_shape
from etchguard._geometry import edge_touch, overlap


@lru_cache(maxsize=4)
def load_deck(deck_path: Path):
    return _load_deck(deck_path)


def connected_nets(deck_path: Path, routes: Iterable) -> set[str]:
    """Names of the routes (``route.pins``, ``route.shapes``) whose pins are all in one
    component at the top step."""
    out: set[str] = set()
    for route in routes:
        graph, pin_nodes, _ = _contacts(load_deck(deck_path), route)
        if pin_nodes and all(nx.has_path(graph, pin_nodes[0], n) for n in pin_nodes[1:]):
            out.add(route.data.name)
    return out


def gate_component(deck_path: Path, route, pin_name: str, step: int) -> set[int]:
    """Indexes into ``route.shapes`` of the shapes in one pin's component at a process
    step (the shapes on layers up to ``step``, the deck's layer index)."""
    graph, pin_nodes, shape_of = _contacts(load_deck(deck_path), route, step)
    names = [p.name for p in route.pins]
    if pin_name not in names:
        return set()
    reached = nx.node_connected_component(graph, pin_nodes[names.index(pin_name)])
    return {shape_of[n] for n in reached if n in shape_of}


def _contacts(deck, route, step: int | None = None) -> tuple[nx.Graph, list[int], dict[int, int]]:
    """The contact graph of a route's pins and shapes on layers up to ``step`` (all when
    None): the graph, the first node of each pin, and shape index per shape node."""
    cut = [not layer.is_routing for layer in deck.layers]
    pins = [make_pin(deck, p.name, p.layer, p.rects, p.gate_area, p.diff_area, p.cell_area)
            for p in route.pins]
    nodes = [(("pin", i), pin.layer, r) for i, pin in enumerate(pins) for r in pin.rects]
    shape_of: dict[int, int] = {}
    for i, shape in enumerate(make_shape(deck, s.layer, s.rect) for s in route.shapes):
        if step is None or shape.layer <= step:
            shape_of[len(nodes)] = i
            nodes.append((("shape", i), shape.layer, shape.rect))
    graph = nx.Graph()
    graph.add_nodes_from(range(len(nodes)))
    for a, (ka, la, ra) in enumerate(nodes):
        for b in range(a + 1, len(nodes)):
            kb, lb, rb = nodes[b]
            if (la == lb and (edge_touch(ra, rb) or ka == kb)) or (
                    abs(la - lb) == 1 and cut[la] != cut[lb] and overlap(ra, rb)):
                graph.add_edge(a, b)
    first = {key: n for n, (key, _, _) in reversed(list(enumerate(nodes)))}
    return graph, [first[("pin", i)] for i in range(len(pins))], shape_of
