"""One shard of a design's nets: the ownership guard and the farm-wide obstacle view.

A farm splits a design's nets over shards by ``_shards.shard_of``. Every ratio is a
matter of one net, so a shard answers those alone; only advice looks at other nets'
metal (is the proposed hop or jumper blocked?). Definitions:

* **Owner.** Shard k holds net n when ``shard_of(n, shards) == k``. ``ShardEngine``
  refuses any call about a net it does not hold with ``WrongShardError`` (the gRPC
  adapter answers FAILED_PRECONDITION), naming the owner and its address.
* **Directory cell.** With side c = the topology's ``directory_cell`` (DBU), cell
  (cx, cy) is the closed square [cx*c, (cx+1)*c] x [cy*c, (cy+1)*c]; a rectangle
  lies in every cell its closed extent meets. A rectangle meeting more than
  ``MAX_CELLS_PER_RECT`` cells is listed as "the whole layer" instead.
* **Metal grid** (``MetalGrid``): for this shard's own metal (pins and committed
  shapes of its nets), how many entries lie in each (layer, cell). Declared blockages
  are not in it: each shard checks the blockages declared to it (the farm client's
  ``ShardedClient.declare_blockage`` declares one on every shard, under the id shard 0
  picked, so a conflict names the same blockage id on every shard).
* **Directory** (``Directory``): which other shards hold metal in which (layer, cell).
  A peer whose whole grid this shard has not yet received is *unknown* and is asked
  about every run until its grid arrives.
* **Obstacle view.** The conflicts of a proposed rectangle (``_obstacles`` defines
  them) are this shard's own (nets and blockages) plus, from every peer the directory
  places within ``spacing`` of the rectangles (or that is unknown), that peer's nets'
  metal; merged and sorted as the one-process index sorts them, so the answer is the
  one a single server holding every net would give.

Keeping the directory current (why it is exact, not just eventually right):

* A commit (or open) lists the cells its rectangles lie in; the ones this shard has
  not yet published are pushed to every reachable peer *before the commit returns*
  (``Peers.publish``), so a router that saw the commit acknowledged and then asks
  another shard for advice is answered with that metal in view. Cells already
  published cost nothing, so after the first shapes of an area a commit pushes nothing.
* A peer that cannot be reached is marked for a full resend (the gRPC side retries in
  the background), and every shard, when it starts, announces its whole grid to every
  peer and fetches every peer's whole grid; until a peer's grid arrives that peer is
  unknown and asked about everything.
* Vacated cells are not withdrawn: a peer keeps asking there and is told "nothing",
  which costs a call but never a wrong answer.
"""

from __future__ import annotations

import functools
import threading
from collections.abc import Callable, Iterable, Sequence
from typing import Protocol

from ._costs import CostModel
from ._engine import Engine, Limits
from ._errors import WrongShardError
from ._geometry import Rect
from ._obstacles import LAYER_BITS, Conflict, ObstacleIndex, ObstacleWindow, OwnerKey
from ._shards import Topology

MAX_CELLS_PER_RECT = 1024

# (layer, cx, cy); cx = cy = None: the whole layer
CellKey = tuple[int, int | None, int | None]
NamedCell = tuple[str, int | None, int | None]


def rect_cells(rect: Rect, cell: int) -> list[tuple[int, int]] | None:
    """The directory cells a closed rectangle lies in; None when there are more than
    MAX_CELLS_PER_RECT (the rectangle then counts as covering the whole layer)."""
    cx0, cx1 = rect[0] // cell, rect[2] // cell
    cy0, cy1 = rect[1] // cell, rect[3] // cell
    if (cx1 - cx0 + 1) * (cy1 - cy0 + 1) > MAX_CELLS_PER_RECT:
        return None
    return [(cx, cy) for cx in range(cx0, cx1 + 1) for cy in range(cy0, cy1 + 1)]


def cell_keys(layer: int, rect: Rect, cell: int) -> list[CellKey]:
    cells = rect_cells(rect, cell)
    if cells is None:
        return [(layer, None, None)]
    return [(layer, cx, cy) for cx, cy in cells]


class MetalGrid:
    """This shard's own metal, counted per (layer, directory cell). Thread-safe."""

    def __init__(self, cell: int) -> None:
        self.cell = cell
        self._lock = threading.Lock()
        self._counts: dict[CellKey, int] = {}

    def add(self, items: Iterable[tuple[int, Rect]]) -> set[CellKey]:
        """Count rectangles in; returns every cell key they lie in."""
        touched: set[CellKey] = set()
        with self._lock:
            for layer, rect in items:
                for key in cell_keys(layer, rect, self.cell):
                    self._counts[key] = self._counts.get(key, 0) + 1
                    touched.add(key)
        return touched

    def remove(self, items: Iterable[tuple[int, Rect]]) -> None:
        with self._lock:
            for layer, rect in items:
                for key in cell_keys(layer, rect, self.cell):
                    left = self._counts.get(key, 0) - 1
                    if left > 0:
                        self._counts[key] = left
                    else:
                        self._counts.pop(key, None)

    def reset(self, items: Iterable[tuple[int, Rect]]) -> set[CellKey]:
        with self._lock:
            self._counts.clear()
        return self.add(items)

    def keys(self) -> list[CellKey]:
        with self._lock:
            return list(self._counts)


class Directory:
    """Which peers hold metal where (by layer name and cell), and which peers' whole
    grids have not arrived yet. Thread-safe."""

    def __init__(self, shards: int, me: int, cell: int) -> None:
        self.cell = cell
        self._me = me
        self._lock = threading.Lock()
        self._cells: dict[tuple[str, int, int], set[int]] = {}
        self._wide: dict[str, set[int]] = {}  # layer -> peers with metal anywhere on it
        self._unknown = set(range(shards)) - {me}

    def learn(self, shard: int, cells: Iterable[NamedCell], complete: bool) -> None:
        """Cells where ``shard`` holds metal; ``complete``: that is all of its grid."""
        if shard == self._me:
            return
        with self._lock:
            for layer, cx, cy in cells:
                if cx is None or cy is None:
                    self._wide.setdefault(layer, set()).add(shard)
                else:
                    self._cells.setdefault((layer, cx, cy), set()).add(shard)
            if complete:
                self._unknown.discard(shard)

    def unknown(self) -> set[int]:
        with self._lock:
            return set(self._unknown)

    def peers_near(self, layer: str, box: Rect) -> list[int]:
        """The peers that may hold metal of ``layer`` meeting the closed ``box``."""
        cells = rect_cells(box, self.cell)
        with self._lock:
            found = set(self._unknown) | self._wide.get(layer, set())
            if cells is None:  # a huge box: every peer with anything on the layer
                for (name, _, _), shards in self._cells.items():
                    if name == layer:
                        found |= shards
            else:
                for cx, cy in cells:
                    found |= self._cells.get((layer, cx, cy), set())
        return sorted(found)


class Peers(Protocol):
    """How a shard reaches the others (the gRPC side implements it)."""

    def publish(self, cells: Sequence[NamedCell]) -> None:
        """Push cells to every reachable peer before returning; an unreachable one is
        left for a full resend."""

    def find_obstacles(self, shards: Sequence[int], net: str, layer: int, layer_name: str,
                       rects: Sequence[Rect], spacing: int) -> list[list[list[Conflict]]]:
        """Per asked shard, per rectangle: that shard's nets' conflicts (raises
        PeerUnavailableError when one cannot answer)."""


class ShardObstacleIndex(ObstacleIndex):
    """The obstacle index of one shard: its own metal and blockages as before, plus its
    metal grid (published to peers) and the peers' metal asked for on each query."""

    def __init__(self, topology: Topology, me: int, layer_name: Callable[[int], str]) -> None:
        super().__init__()
        self.grid = MetalGrid(topology.directory_cell)
        self.directory = Directory(topology.shards, me, topology.directory_cell)
        self.peers: Peers | None = None  # set by the server once its channels exist
        self.publishing = False  # off while the journal is replayed (peers fetch the grid)
        self._layer_name = layer_name
        self._published: set[CellKey] = set()
        self._published_lock = threading.Lock()

    # -- keeping the grid and the peers current ----------------------------------------

    def add_net_items(self, net: str, items: Sequence[tuple[int, Rect, OwnerKey]]) -> None:
        super().add_net_items(net, items)
        self._publish(self.grid.add((layer, rect) for layer, rect, _ in items))

    def remove_net_items(self, net: str, keys: Iterable[OwnerKey]) -> None:
        keys = list(keys)
        rects = self._rects_of(net, keys)
        super().remove_net_items(net, keys)
        self.grid.remove(rects)

    def drop_net(self, net: str) -> None:
        rects = self._rects_of(net, None)
        super().drop_net(net)
        self.grid.remove(rects)

    def rebuild(self, layers: int, items, blockages) -> None:
        super().rebuild(layers, items, blockages)
        with self._published_lock:
            self._published.clear()  # layer names may have moved: publish everything anew
        self._publish(self.grid.reset((layer, rect) for layer, rect, net, _ in items if net is not None))

    def _rects_of(self, net: str, keys: list[OwnerKey] | None) -> list[tuple[int, Rect]]:
        with self._lock:
            mine = self._by_net.get(net, {})
            eids = [mine[k] for k in (mine if keys is None else keys) if k in mine]
            mask = (1 << LAYER_BITS) - 1
            return [(eid & mask, self._by_layer[eid & mask][eid].rect) for eid in eids]

    def _publish(self, touched: set[CellKey]) -> None:
        if not self.publishing or self.peers is None or not touched:
            return
        with self._published_lock:
            todo = touched - self._published
        if not todo:
            return
        self.peers.publish(self.named(todo))
        with self._published_lock:
            self._published |= todo

    def named(self, keys: Iterable[CellKey]) -> list[NamedCell]:
        return [(self._layer_name(layer), cx, cy) for layer, cx, cy in keys]

    def start_publishing(self) -> list[NamedCell]:
        """Turn publishing on; returns the whole grid, which the caller announces to
        every peer (a commit after this instant publishes its own cells)."""
        self.publishing = True
        keys = self.grid.keys()
        with self._published_lock:
            self._published |= set(keys)
        return self.named(keys)

    # -- questions ----------------------------------------------------------------------

    def own_conflicts(self, net: str, layer: int, rects: Sequence[Rect], spacing: int
                      ) -> list[list[Conflict]]:
        """Conflicts with this shard's nets' metal only (what a peer asks for)."""
        return [[c for c in hits if c.net is not None]
                for hits in super().conflicts_many(net, layer, rects, spacing)]

    def window(self, net: str, region: Rect) -> ObstacleWindow:
        # no snapshot of the region: every question goes through conflicts_many below,
        # which asks the peers too
        return ObstacleWindow(self, net, None)

    def conflicts_many(self, net: str, layer: int, rects: Sequence[Rect], spacing: int
                       ) -> list[list[Conflict]]:
        local = super().conflicts_many(net, layer, rects, spacing)
        if self.peers is None or not rects or not 0 <= layer < self._layers:
            return local
        name = self._layer_name(layer)
        # another net's rectangle conflicts only if it meets the rectangles' box widened
        # by the spacing (distance < spacing, or touching)
        box = (min(r[0] for r in rects) - spacing, min(r[1] for r in rects) - spacing,
               max(r[2] for r in rects) + spacing, max(r[3] for r in rects) + spacing)
        asked = self.directory.peers_near(name, box)
        if not asked:
            return local
        for answers in self.peers.find_obstacles(asked, net, layer, name, rects, spacing):
            for mine, theirs in zip(local, answers):
                mine.extend(theirs)
        for hits in local:
            hits.sort(key=lambda c: (c.distance, c.owner, c.rect))  # as ObstacleIndex sorts
        return local


# -- the engine of one shard ------------------------------------------------------------------

# Engine methods whose first argument is a net name: refused for a net of another shard.
NET_CALLS = ("open_net", "close_net", "commit", "commit_if_legal", "remove", "shapes", "spec_with_ids", "spec",
             "score", "score_many", "score_columns", "check", "headroom", "advise")


class ShardEngine(Engine):
    """An Engine that holds the nets of shard ``me`` of ``topology`` and refuses others."""

    def __init__(self, topology: Topology, me: int, limits: Limits | None = None,
                 costs: CostModel | None = None) -> None:
        if not 0 <= me < topology.shards:
            raise WrongShardError(f"shard index {me} is not in 0 .. {topology.shards - 1}",
                                  "shard_index", me)
        super().__init__(None, limits, costs)
        self.topology = topology
        self.me = me
        self._obstacles = ShardObstacleIndex(topology, me, lambda i: self.deck.layers[i].name)

    @property
    def obstacles(self) -> ShardObstacleIndex:
        return self._obstacles  # type: ignore[return-value]

    def check_owner(self, net: object) -> None:
        if not isinstance(net, str):
            return  # the engine's own checks refuse it
        owner = self.topology.shard_of(net)
        if owner != self.me:
            raise WrongShardError(
                f"net {net!r} belongs to shard {owner} at {self.topology.addresses[owner]}, not to "
                f"shard {self.me}; route by the topology (fingerprint {self.topology.fingerprint:016x})",
                "net", owner)


def _owned(method):
    @functools.wraps(method)
    def guarded(self: ShardEngine, name, *args, **kwargs):
        self.check_owner(name)
        return method(self, name, *args, **kwargs)
    return guarded


for _name in NET_CALLS:
    setattr(ShardEngine, _name, _owned(getattr(Engine, _name)))
