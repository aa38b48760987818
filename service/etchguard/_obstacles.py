"""The design-wide obstacle index: every net's metal and the blockages a router declares.

Advice proposes new shapes on layers the net has not used yet; such a proposal is only
useful if no other net (and no declared blockage) is in the way. This module keeps, per
process layer, an R-tree (the ``rtree`` package, a binding of libspatialindex) of

* every open net's committed shapes and its pin rectangles (both are that net's metal),
* every blockage the router declares (an area no new shape may use).

Conflict (the project's definition, common practice for same-layer spacing): a proposed
rectangle ``a`` of net N conflicts with an entry ``b`` of another owner on the same
layer when the two touch or overlap (distance 0 would short them) or when their
Euclidean distance is below the layer's ``spacing``. The distance of two closed
rectangles is ``hypot(dx, dy)`` with ``dx = max(0, b.xlo - a.xhi, a.xlo - b.xhi)`` and
``dy`` likewise; it is compared squared, in exact integers. Entries of net N itself never
conflict with N's proposals.

The R-tree stores doubles; an exact-integer test follows every tree query, and queries
are widened by a margin that covers double rounding of coordinates up to 2^62, so no
conflict is missed. Many entries at once (a net opened with its routing, a deck
reload) are bulk-loaded through rtree's stream constructor (sort-tile-recursive
packing), which is both faster to build and faster to query than one insert per entry.
The index has its own lock: it is shared by all nets, whose own locks do not cover it.

Tree maintenance is lazy, so commit and rip-up stay off the R-tree (an insert costs
20-40 us and a delete ~300 us from Python, more than a whole per-net update): changes
only touch plain dicts and sets, and a layer's tree catches up when a question about
that layer arrives. Pending additions are inserted then, one by one, or by a bulk
rebuild when they are many; removed entries stay in the tree as tombstones that the
query filters out (entry ids are never reused), until they are a quarter of the tree
and a bulk rebuild drops them.
"""

from __future__ import annotations

import threading
from collections.abc import Hashable, Iterable, Mapping, Sequence
from dataclasses import dataclass

from rtree import index as rtree_index

from ._errors import AlreadyExistsError, InputError, LimitExceededError, NotFoundError
from ._geometry import Rect
from ._nets import Pin
from ._rules import Deck

# Below this many entries per call, single inserts are cheaper than a rebuild.
BULK_MIN = 256

# What an entry is within its owner, kept small (an int per entry): a committed shape's
# id, a pin rectangle as a negative number (see pin_key), a blockage's id (owner None).
OwnerKey = Hashable
LAYER_BITS = 6  # entry ids carry their layer in the low bits: eid = serial << 6 | layer
# Blockage ids are 1 .. this: advice's conflicts carry them as int64.
MAX_BLOCKAGE_ID = (1 << 63) - 1


def shape_key(sid: int) -> int:
    return sid


def pin_key(pin: int, rect: int) -> int:
    return -((pin << 20) | rect) - 1


@dataclass(frozen=True)
class Conflict:
    """Another owner's rectangle that a proposed rectangle would touch or come too close to."""

    layer: int
    proposed: Rect
    rect: Rect
    owner: str  # "net <name>" or "blockage <id>"
    net: str | None  # the other net's name; None for a blockage
    blockage_id: int | None
    distance: float  # DBU, Euclidean; 0 when touching or overlapping
    spacing: int  # the layer's spacing applied (DBU)


@dataclass(slots=True)
class _Entry:
    rect: Rect
    net: str | None  # None: a blockage
    key: OwnerKey


def _box(r: Rect, margin: int = 0) -> tuple[float, float, float, float]:
    return (float(r[0] - margin), float(r[1] - margin), float(r[2] + margin), float(r[3] + margin))


def squared_distance(a: Rect, b: Rect) -> int:
    dx = max(0, b[0] - a[2], a[0] - b[2])
    dy = max(0, b[1] - a[3], a[1] - b[3])
    return dx * dx + dy * dy


def conflicts_with(a: Rect, b: Rect, spacing: int) -> bool:
    """Touching, overlapping, or closer than ``spacing`` (see the module docstring)."""
    d2 = squared_distance(a, b)
    return d2 == 0 or d2 < spacing * spacing


def pin_items(pins: Sequence[Pin]) -> list[tuple[int, Rect, OwnerKey]]:
    """A net's pin rectangles as index items (pins are that net's metal too)."""
    return [(layer, r, pin_key(p, k)) for p, pin in enumerate(pins) for k, (layer, r) in enumerate(pin.layered_rects())]


def net_items(name: str, pins: Sequence[Pin], shapes: Mapping[int, tuple[int, int, int, int, int]]
              ) -> list[tuple[int, Rect, str | None, OwnerKey]]:
    """Everything of one net for a rebuild: pins and committed shapes (id -> (layer, *rect))."""
    out: list[tuple[int, Rect, str | None, OwnerKey]] = [(l, r, name, k) for l, r, k in pin_items(pins)]
    out.extend((v[0], tuple(v[1:]), name, shape_key(sid)) for sid, v in shapes.items())  # type: ignore[misc]
    return out


class ObstacleIndex:
    """Per-layer R-trees over all nets' metal and declared blockages. Thread-safe."""

    def __init__(self, layers: int = 0) -> None:
        self._lock = threading.Lock()
        self._layers = layers
        self._trees: list[rtree_index.Index | None] = [None] * layers
        # per layer: entry id -> entry, in insertion order (ids only grow), so the
        # entries not yet in the tree are the newest ones, above the layer's watermark
        self._by_layer: list[dict[int, _Entry]] = [{} for _ in range(layers)]
        self._by_net: dict[str | None, dict[OwnerKey, int]] = {}  # owner -> key -> entry id
        self._watermark: list[int] = [0] * layers  # the largest entry id in the tree
        self._in_tree: list[int] = [0] * layers  # ids in the tree, tombstones included
        self._tombstones: list[int] = [0] * layers  # ids in the tree no longer live
        self._next_serial = 1
        self._next_blockage = 1
        self.blockages: dict[int, tuple[int, Rect]] = {}

    # -- building ---------------------------------------------------------------------

    def _stream_rebuild(self, layer: int) -> None:
        entries = self._by_layer[layer]
        items = [(eid, _box(e.rect), None) for eid, e in entries.items()]
        # The stream constructor refuses an empty stream; an empty layer needs no tree.
        self._trees[layer] = rtree_index.Index(iter(items)) if items else None
        self._in_tree[layer] = len(items)
        self._tombstones[layer] = 0
        self._watermark[layer] = next(reversed(entries), 0)

    def _catch_up(self, layer: int) -> rtree_index.Index | None:
        """Bring one layer's tree up to date before a query (caller holds the lock)."""
        entries, mark = self._by_layer[layer], self._watermark[layer]
        pending = []
        for eid in reversed(entries):
            if eid <= mark:
                break
            pending.append(eid)
        held = self._in_tree[layer]
        if self._tombstones[layer] * 4 > held or (len(pending) >= BULK_MIN and len(pending) >= held):
            self._stream_rebuild(layer)
        elif pending:
            tree = self._trees[layer]
            if tree is None:
                tree = self._trees[layer] = rtree_index.Index()
            for eid in pending:
                tree.insert(eid, _box(entries[eid].rect))
            self._in_tree[layer] += len(pending)
            self._watermark[layer] = pending[0]
        return self._trees[layer]

    def _add_locked(self, owner: str | None, items: Sequence[tuple[int, Rect, OwnerKey]]) -> None:
        """Index (layer, rect, key) items of one owner (a net, or None: blockages), all
        or none: a key the owner holds already is refused before any is added. One
        pass, the owner's key table looked up once: every commit comes here."""
        if not items:
            return
        mine = self._by_net.get(owner)
        if mine is None:
            mine = self._by_net[owner] = {}
        else:
            for _layer, _rect, key in items:
                if key in mine:
                    raise InputError(f"obstacle {key} of {owner or 'blockages'} is indexed already", "obstacles")
        serial, by_layer = self._next_serial, self._by_layer
        for layer, rect, key in items:
            eid = (serial << LAYER_BITS) | layer
            serial += 1
            by_layer[layer][eid] = _Entry(rect, owner, key)
            mine[key] = eid
        self._next_serial = serial

    def _drop_locked(self, net: str | None, keys: Iterable[OwnerKey]) -> None:
        mine = self._by_net.get(net)
        if not mine:
            return
        for key in keys:
            eid = mine.pop(key, None)
            if eid is None:
                continue
            layer = eid & ((1 << LAYER_BITS) - 1)
            del self._by_layer[layer][eid]
            if eid <= self._watermark[layer]:
                self._tombstones[layer] += 1
        if not mine:
            del self._by_net[net]

    def rebuild(self, layers: int, items: Sequence[tuple[int, Rect, str | None, OwnerKey]],
                blockages: dict[int, tuple[int, Rect]]) -> None:
        """Replace everything (a new deck); the trees are bulk-loaded on first query."""
        if layers >= 1 << LAYER_BITS:
            raise InputError(f"at most {(1 << LAYER_BITS) - 1} layers", "deck.layers")
        with self._lock:
            self._layers = layers
            self._trees = [None] * layers
            self._by_layer = [{} for _ in range(layers)]
            self._watermark = [0] * layers
            self._in_tree = [0] * layers
            self._tombstones = [0] * layers
            self._by_net.clear()
            self.blockages = dict(blockages)
            by_owner: dict[str | None, list[tuple[int, Rect, OwnerKey]]] = {}
            for layer, rect, net, key in items:
                by_owner.setdefault(net, []).append((layer, rect, key))
            by_owner.setdefault(None, []).extend((layer, rect, bid) for bid, (layer, rect) in blockages.items())
            for owner, owned in by_owner.items():
                self._add_locked(owner, owned)

    # -- nets ---------------------------------------------------------------------------

    def add_net_items(self, net: str, items: Sequence[tuple[int, Rect, OwnerKey]]) -> None:
        """Index shapes or pin rectangles of ``net``: (layer, rect, key) each."""
        with self._lock:
            self._add_locked(net, items)

    def remove_net_items(self, net: str, keys: Iterable[OwnerKey]) -> None:
        with self._lock:
            self._drop_locked(net, keys)

    def drop_net(self, net: str) -> None:
        with self._lock:
            self._drop_locked(net, list(self._by_net.get(net, ())))

    # -- blockages ----------------------------------------------------------------------

    def blockage_id_for(self, asked: int | None) -> int:
        """The id a new blockage gets: ``asked`` when no blockage holds it, else the
        next one free (refused once ids run past ``MAX_BLOCKAGE_ID``)."""
        if asked is not None:
            if asked in self.blockages:
                raise AlreadyExistsError(f"blockage {asked} is held already", "blockage_id")
            return asked
        if self._next_blockage > MAX_BLOCKAGE_ID:
            raise LimitExceededError(f"blockage ids are used up to {MAX_BLOCKAGE_ID}", "blockage_id")
        return self._next_blockage

    def add_blockage(self, layer: int, rect: Rect, bid: int) -> int:
        """Hold a blockage under ``bid`` (from ``blockage_id_for``); the next id picked
        is past it, so an asked id never meets a picked one later."""
        if not 0 <= layer < self._layers:
            raise InputError("unknown layer", "layer")
        with self._lock:
            if bid in self.blockages:
                raise AlreadyExistsError(f"blockage {bid} is held already", "blockage_id")
            self._add_locked(None, [(layer, rect, bid)])
            self.blockages[bid] = (layer, rect)
            self._next_blockage = max(self._next_blockage, bid + 1)
            return bid

    def remove_blockage(self, bid: int) -> None:
        with self._lock:
            if bid not in self.blockages:
                raise NotFoundError(f"no blockage {bid}", "blockage_id")
            self._drop_locked(None, [bid])
            del self.blockages[bid]

    def moved_blockages(self, old: Deck, new: Deck) -> dict[int, tuple[int, Rect]]:
        """The blockages re-stepped for a new deck, by layer name; refuses (and changes
        nothing) when one lies on a layer the new deck lacks."""
        out = {}
        with self._lock:
            for bid, (layer, rect) in self.blockages.items():
                name = old.layers[layer].name
                if name not in new.layer_index:
                    raise InputError(f"blockage {bid} lies on layer {name}, which the new deck "
                                     f"lacks; remove it first", "deck.layers")
                out[bid] = (new.layer_index[name], rect)
        return out

    # -- questions ----------------------------------------------------------------------

    def __len__(self) -> int:
        with self._lock:
            return sum(len(entries) for entries in self._by_layer)

    def conflicts(self, net: str, layer: int, rect: Rect, spacing: int) -> list[Conflict]:
        """Entries of other owners on ``layer`` that ``rect`` (of ``net``) conflicts with."""
        return self.conflicts_many(net, layer, [rect], spacing)[0]

    def conflicts_many(self, net: str, layer: int, rects: Sequence[Rect], spacing: int
                       ) -> list[list[Conflict]]:
        """``conflicts`` for several rectangles of one layer with one tree query: the
        query box is the rectangles' bounding box widened by the margin, which holds
        every box a single query would have used, so no conflict is missed; the exact
        integer test then runs per rectangle (what one tree call costs, tens of
        microseconds, is worth more than a few exact tests)."""
        if not rects:
            return []
        if not 0 <= layer < self._layers:
            return [[] for _ in rects]
        bound = (min(r[0] for r in rects), min(r[1] for r in rects),
                 max(r[2] for r in rects), max(r[3] for r in rects))
        entries = self._others_near(net, layer, bound, spacing)
        return [_conflicts_of(layer, rect, entries, spacing) for rect in rects]

    def window(self, net: str, region: Rect) -> ObstacleWindow:
        """Conflicts of ``net``'s proposals inside ``region``, one tree query per layer
        (see ObstacleWindow)."""
        return ObstacleWindow(self, net, region)

    def _others_near(self, net: str, layer: int, box: Rect, spacing: int) -> list[_Entry]:
        """Entries of owners other than ``net`` on ``layer`` that a rectangle inside
        ``box`` may conflict with (a superset: the exact test decides)."""
        # doubles keep 53 bits: widen by the rounding error of the largest coordinate
        big = max(abs(v) for v in box)
        margin = spacing + 1 + (big >> 50)
        with self._lock:
            tree = self._catch_up(layer)
            if tree is None:
                return []
            live = self._by_layer[layer]
            entries = [live[h] for h in tree.intersection(_box(box, margin)) if h in live]
        return [e for e in entries if e.net != net]


def _conflicts_of(layer: int, rect: Rect, entries: Sequence[_Entry], spacing: int) -> list[Conflict]:
    """The exact test of one proposed rectangle against candidate entries, nearest first
    (ties by owner and rectangle, so the order does not depend on the entries' order)."""
    out = []
    for e in entries:
        if conflicts_with(rect, e.rect, spacing):
            d = squared_distance(rect, e.rect) ** 0.5
            if e.net is None:
                bid = e.key if isinstance(e.key, int) else None
                out.append(Conflict(layer, rect, e.rect, f"blockage {e.key}", None, bid, d, spacing))
            else:
                out.append(Conflict(layer, rect, e.rect, f"net {e.net}", e.net, None, d, spacing))
    out.sort(key=lambda c: (c.distance, c.owner, c.rect))
    return out


class ObstacleWindow:
    """One net's view of the index around one region, for the length of one question
    (an advice: every shape it proposes lies near its run). Each layer's entries near
    the region are read from the tree once, at the first question about that layer,
    and every rectangle inside the region is tested against them exactly: the answer
    is ``conflicts_many``'s (a superset of candidates changes nothing after the exact
    test, and the sort makes the order independent of them). A rectangle outside the
    region, or a window without a region, asks the index itself. Entries indexed after
    a layer was read are not seen: the window is a snapshot, as one query would be."""

    def __init__(self, index: ObstacleIndex, net: str, region: Rect | None) -> None:
        self.index, self.net, self.region = index, net, region
        self._near: dict[tuple[int, int], list[_Entry]] = {}  # (layer, spacing) -> candidates

    def conflicts_many(self, layer: int, rects: Sequence[Rect], spacing: int) -> list[list[Conflict]]:
        region = self.region
        if (region is None or not rects or not 0 <= layer < self.index._layers
                or not all(region[0] <= r[0] and region[1] <= r[1] and r[2] <= region[2] and r[3] <= region[3]
                           for r in rects)):
            return self.index.conflicts_many(self.net, layer, rects, spacing)
        entries = self._near.get((layer, spacing))
        if entries is None:
            entries = self._near[(layer, spacing)] = self.index._others_near(self.net, layer, region, spacing)
        return [_conflicts_of(layer, rect, entries, spacing) for rect in rects]
