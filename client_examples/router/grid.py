"""The routing grid: tracks per layer from the deck, and who uses which node.

Nodes sit on a base grid of the finest routing pitch P (wire_width + spacing of the
lowest layers). A routing layer whose pitch is k * P (rounded up) has a track on every
k-th base line across its preferred direction; along a track it has a node on every
base line, so a via can land wherever two layers' tracks cross.

Occupancy is kept per node from the real rectangles committed to the service, so wires,
via pads, off-grid hops and pins all count the same way: a rectangle of another net
blocks a node for a wire when it comes closer than the layer's spacing to the wire's
square at the node (half-width w/2 around it), and blocks it for a via when it comes
that close to the largest via landing pad on the layer. Cut-to-cut spacing is not
modelled (cuts sit inside their pads).
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field

from etchguard.client import pb

Rect = tuple[int, int, int, int]
Node = int  # layer * plane + i * ny + j


@dataclass(frozen=True)
class RoutingLayer:
    name: str
    step: int  # process step in the deck
    horizontal: bool  # preferred direction
    width: int  # DBU, default wire width
    spacing: int  # DBU
    every: int  # a track on every `every`-th base line
    pad: int  # DBU, the largest via landing pad on this layer


@dataclass(frozen=True)
class CutLayer:
    name: str
    size: int  # DBU, cut square
    pad: int  # DBU, landing pad on the metals below and above


class TrackGrid:
    """Tracks of the routing layers ``lowest..highest`` of a deck over a block."""

    def __init__(self, deck: pb.DeckInfo, size: tuple[int, int], lowest: str, highest: str) -> None:
        names = [layer.name for layer in deck.layers]
        lo, hi = names.index(lowest), names.index(highest)
        infos = [layer for layer in deck.layers[lo:hi + 1]]
        routing = [layer for layer in infos if layer.kind == pb.LAYER_KIND_ROUTING]
        cuts = [layer for layer in infos if layer.kind == pb.LAYER_KIND_CUT]
        self.pitch = min(layer.wire_width + layer.spacing for layer in routing)
        self.cuts = [CutLayer(c.name, c.cut_size, c.cut_size + 2 * c.enclosure) for c in cuts]
        self.layers: list[RoutingLayer] = []
        for k, layer in enumerate(routing):
            pitch = layer.wire_width + layer.spacing
            pads = [self.cuts[c].pad for c in (k - 1, k) if 0 <= c < len(self.cuts)]
            self.layers.append(RoutingLayer(layer.name, layer.step,
                                            layer.direction == pb.DIRECTION_HORIZONTAL,
                                            layer.wire_width, layer.spacing,
                                            -(-pitch // self.pitch), max(pads, default=layer.wire_width)))
        self.origin = self.pitch  # node (0, 0) sits one pitch inside the block's corner
        self.nx = (size[0] - 2 * self.origin) // self.pitch + 1
        self.ny = (size[1] - 2 * self.origin) // self.pitch + 1
        self.plane = self.nx * self.ny
        self.layer_of_name = {layer.name: k for k, layer in enumerate(self.layers)}

    # -- nodes ------------------------------------------------------------------------

    def node(self, k: int, i: int, j: int) -> Node:
        return k * self.plane + i * self.ny + j

    def split(self, n: Node) -> tuple[int, int, int]:
        k, rest = divmod(n, self.plane)
        i, j = divmod(rest, self.ny)
        return k, i, j

    def xy(self, i: int, j: int) -> tuple[int, int]:
        return self.origin + i * self.pitch, self.origin + j * self.pitch

    def on_track(self, k: int, i: int, j: int) -> bool:
        layer = self.layers[k]
        return (j if layer.horizontal else i) % layer.every == 0

    # -- rectangles -> nodes ------------------------------------------------------------

    def _index_range(self, lo: int, hi: int, reach: int, count: int) -> range:
        """Base indices whose coordinate c satisfies lo - reach < c < hi + reach."""
        first = -((-(lo - reach - self.origin + 1)) // self.pitch)
        last = (hi + reach - self.origin - 1) // self.pitch
        return range(max(first, 0), min(last, count - 1) + 1)

    def nodes_near(self, k: int, r: Rect, half: int) -> Iterator[Node]:
        """Track nodes of layer k whose square of half-size ``half`` comes closer than
        the layer's spacing to ``r``."""
        reach = half + self.layers[k].spacing
        for i in self._index_range(r[0], r[2], reach, self.nx):
            for j in self._index_range(r[1], r[3], reach, self.ny):
                if self.on_track(k, i, j):
                    yield self.node(k, i, j)

    def nodes_inside(self, k: int, r: Rect) -> Iterator[Node]:
        """Track nodes of layer k strictly inside ``r``: a wire or pad ending there
        overlaps ``r`` with positive area, so it connects."""
        for i in self._index_range(r[0], r[2], 0, self.nx):
            for j in self._index_range(r[1], r[3], 0, self.ny):
                if self.on_track(k, i, j):
                    yield self.node(k, i, j)


@dataclass
class Occupancy:
    """Which nets' rectangles block each node, for wires and for via pads."""

    grid: TrackGrid
    wire: dict[Node, dict[str, int]] = field(default_factory=dict)
    pad: dict[Node, dict[str, int]] = field(default_factory=dict)
    fixed_wire: dict[Node, str] = field(default_factory=dict)  # near pins: never ripped up
    fixed_pad: dict[Node, str] = field(default_factory=dict)
    history: dict[Node, float] = field(default_factory=dict)  # rip-up history cost

    def _marks(self, k: int, r: Rect) -> Iterable[tuple[dict[Node, dict[str, int]], Node]]:
        layer = self.grid.layers[k]
        for n in self.grid.nodes_near(k, r, layer.width // 2):
            yield self.wire, n
        for n in self.grid.nodes_near(k, r, layer.pad // 2):
            yield self.pad, n

    def add(self, net: str, k: int, r: Rect) -> None:
        for table, n in self._marks(k, r):
            users = table.setdefault(n, {})
            users[net] = users.get(net, 0) + 1

    def remove(self, net: str, k: int, r: Rect) -> None:
        for table, n in self._marks(k, r):
            users = table[n]
            users[net] -= 1
            if not users[net]:
                del users[net]
                if not users:
                    del table[n]

    def add_pin(self, net: str, k: int, r: Rect) -> None:
        self.add(net, k, r)
        layer = self.grid.layers[k]
        for n in self.grid.nodes_near(k, r, layer.width // 2):
            self.fixed_wire.setdefault(n, net)
        for n in self.grid.nodes_near(k, r, layer.pad // 2):
            self.fixed_pad.setdefault(n, net)

    @staticmethod
    def others(table: dict[Node, dict[str, int]], n: Node, net: str) -> list[str]:
        users = table.get(n)
        if not users:
            return []
        return [u for u in users if u != net]
