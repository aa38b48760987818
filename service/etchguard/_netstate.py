"""One net's state: its elements and their components at every process step.

Elements are pin rectangles and routed shapes. Connectivity only grows with the
steps (a layer, once etched, stays), so the components at step s are unions of those
at step s-1 and the shapes of layer s. The state keeps, for every step, the map from
element to its component and each component's aggregates (gate, diffusion, union
area and perimeter on the step's layer, in-cell area). A commit merges components
step by step; a removal splits them again where it must. Union area and perimeter
change only around the shape itself, so both are updated from its touching
neighbours alone: for a closed rectangle r and a union U, the change of area or
perimeter of ``U | r`` is confined to r, and only rectangles that meet r along an
edge or an area can alter it.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from math import fsum

from ._geometry import Rect, edge_touch, intersection, overlap, rect_area, union_measures
from ._index import LayerIndex
from ._nets import Pin
from ._ratios import StepModel


def _shared_perimeter(a: Rect, b: Rect) -> int:
    """P(a) + P(b) - P(a | b) for two rectangles.

    With a positive-area intersection I it is P(I) (inclusion-exclusion holds for the
    horizontal and vertical boundary separately: in every slab where both are present
    their intervals overlap); rectangles abutting along a segment of length l share
    2*l of boundary; otherwise (apart, or a corner point) nothing.
    """
    ix = min(a[2], b[2]) - max(a[0], b[0])
    iy = min(a[3], b[3]) - max(a[1], b[1])
    if ix >= 0 and iy >= 0:  # with ix or iy 0 this is the abutting segment, 2*l
        return 2 * (ix + iy)
    return 0


def _directly_linked(adj: dict[int, dict[int, int]], near: list[int], step: int) -> bool:
    """Whether the elements ``near`` are connected by their own links at ``step``
    (a cheap sufficient test that removing their common neighbour splits nothing)."""
    linked = {near[0]}
    frontier = [near[0]]
    wanted = set(near)
    while frontier:
        e = frontier.pop()
        for n, joined in adj[e].items():
            if joined <= step and n in wanted and n not in linked:
                linked.add(n)
                frontier.append(n)
    return len(linked) == len(wanted)


class Comp:
    """A component at one step, with the aggregates the ratios need.

    Pin figures (gate, diffusion, in-cell area) are floats; they are summed with
    ``math.fsum`` over the component's pin terms, which is exactly rounded and so
    independent of the order components were merged in: a commit followed by its
    removal restores every figure to the bit.
    """

    __slots__ = ("members", "gate", "gate_ox", "diff", "area", "perim", "cell", "gates", "terms")

    def __init__(self) -> None:
        self.members: set[int] = set()
        self.gate = 0.0  # um^2, all oxides
        self.gate_ox: dict[str, float] = {}
        self.diff = 0.0  # um^2
        self.area = 0  # DBU^2, union of routed rects on the step's layer
        self.perim = 0  # DBU, perimeter of that union
        self.cell = 0.0  # um^2, pins' in-cell conductor on the step's layer
        self.gates: list[int] = []  # pin indices with gate area
        self.terms: list[tuple[float, float, float, Mapping[str, float]]] = []  # per pin

    def absorb(self, other: "Comp") -> None:
        self.members |= other.members
        self.area += other.area
        self.perim += other.perim
        if other.terms:
            self.gates.extend(other.gates)
            self.terms.extend(other.terms)
            self._sum_terms()

    def _sum_terms(self) -> None:
        terms = self.terms
        self.gate = fsum(t[0] for t in terms)
        self.diff = fsum(t[1] for t in terms)
        self.cell = fsum(t[2] for t in terms)
        oxides = {ox for t in terms for ox in t[3]}
        self.gate_ox = {ox: fsum(t[3][ox] for t in terms if ox in t[3]) for ox in sorted(oxides)}


class NetState:
    """Elements, adjacency and per-step components of one net. Not thread-safe:
    the engine serialises access per net."""

    def __init__(self, model: StepModel, pins: Sequence[Pin]) -> None:
        self.model = model
        self.pins = list(pins)
        steps = model.steps
        self.layer_of: dict[int, int] = {}
        self.rect_of: dict[int, Rect] = {}
        self.pin_of: dict[int, int] = {}  # pin-rect element -> pin index
        self.anchor_of_pin: list[int] = []  # pin index -> its first element
        self.index = [LayerIndex() for _ in range(steps)]
        self.adj: dict[int, dict[int, int]] = {}  # element -> {neighbour: step joined}
        self.comp_at: list[dict[int, Comp]] = [{} for _ in range(steps)]
        self.comps: list[set[Comp]] = [set() for _ in range(steps)]
        self.shape_ids: set[int] = set()
        self.version = 0  # bumped on every change; caches key on it
        pin_id = 0
        for p, pin in enumerate(self.pins):
            first = None
            for r in pin.rects:
                pin_id -= 1  # pin elements have negative ids; shapes positive ones
                eid = pin_id
                self.pin_of[eid] = p
                if first is None:
                    first = eid
                    self.anchor_of_pin.append(eid)
                self._insert(eid, pin.layer, r, extra=() if eid == first else ((first, pin.layer),))

    # -- neighbours -------------------------------------------------------------------

    def touching(self, layer: int, r: Rect) -> list[tuple[int, int]]:
        """Existing elements that connect to a rectangle on ``layer``, with the step
        from which each connection exists."""
        out: list[tuple[int, int]] = []
        for eid, q in self.index[layer].near(r):
            if edge_touch(r, q):
                out.append((eid, layer))
        is_cut = self.model.is_cut
        for other in (layer - 1, layer + 1):
            if 0 <= other < self.model.steps and is_cut[other] != is_cut[layer]:
                step = max(layer, other)
                for eid, q in self.index[other].near(r):
                    if overlap(r, q):
                        out.append((eid, step))
        return out

    def routed_on(self, layer: int, neighbours: Iterable[tuple[int, int]]) -> list[Rect]:
        """Rectangles of routed shapes (not pins) on ``layer`` among neighbours."""
        layer_of, pin_of, rect_of = self.layer_of, self.pin_of, self.rect_of
        return [rect_of[e] for e, _ in neighbours if layer_of[e] == layer and e not in pin_of]

    def local_delta(self, r: Rect, local: list[Rect], step: int) -> tuple[int, int]:
        """(area, perimeter) that r adds to a union whose rects touching r are ``local``."""
        clipped = [c for c in (intersection(r, q) for q in local) if c is not None]
        if not clipped:
            added_area = rect_area(r)
        elif len(clipped) == 1:
            added_area = rect_area(r) - rect_area(clipped[0])
        else:
            added_area = rect_area(r) - union_measures(clipped)[0]
        if not self.model.side_needed[step]:
            return added_area, 0
        own = 2 * (r[2] - r[0] + r[3] - r[1])
        if not local:
            return added_area, own
        if len(local) == 1:
            return added_area, own - _shared_perimeter(r, local[0])
        return added_area, union_measures(local + [r])[1] - union_measures(local)[1]

    # -- insertion and removal --------------------------------------------------------

    def _own_comp(self, eid: int, step: int) -> Comp:
        """The component an element forms alone at ``step``."""
        c = Comp()
        c.members.add(eid)
        p = self.pin_of.get(eid)
        if p is not None and self.anchor_of_pin[p] == eid:
            pin = self.pins[p]
            c.terms.append((pin.total_gate_area, pin.diff_area, pin.cell_area.get(step, 0.0),
                            pin.gate_area))
            c._sum_terms()
            if c.gate > 0:
                c.gates.append(p)
        return c

    def _insert(self, eid: int, layer: int, r: Rect, extra: Iterable[tuple[int, int]] = ()) -> None:
        neighbours = self.touching(layer, r) + list(extra)
        self.layer_of[eid] = layer
        self.rect_of[eid] = r
        self.index[layer].add(eid, r)
        links = self.adj[eid] = {}
        for n, step in neighbours:
            links[n] = step
            self.adj[n][eid] = step
        routed = eid not in self.pin_of
        for s in range(layer, self.model.steps):
            comp_at = self.comp_at[s]
            merged = {comp_at[n] for n, step in neighbours if step <= s}
            own = self._own_comp(eid, s)
            if s == layer and routed:
                own.area, own.perim = self.local_delta(r, self.routed_on(layer, neighbours), s)
            if merged:
                base = max(merged, key=lambda c: len(c.members))
                for c in merged:
                    if c is not base:
                        base.absorb(c)
                        for m in c.members:
                            comp_at[m] = base
                        self.comps[s].discard(c)
                base.absorb(own)
            else:
                base = own
                self.comps[s].add(base)
            comp_at[eid] = base
        self.version += 1

    def add_shape(self, eid: int, layer: int, r: Rect) -> None:
        self._insert(eid, layer, r)
        self.shape_ids.add(eid)

    def _rebuild(self, members: set[int], step: int) -> Comp:
        c = Comp()
        routed: list[Rect] = []
        for m in members:
            own = self._own_comp(m, step)
            c.terms.extend(own.terms)
            c.gates.extend(own.gates)
            if self.layer_of[m] == step and m not in self.pin_of:
                routed.append(self.rect_of[m])
        c._sum_terms()
        c.members = members
        c.area, c.perim = union_measures(routed)
        if not self.model.side_needed[step]:
            c.perim = 0
        return c

    def remove_shape(self, eid: int) -> None:
        layer, r = self.layer_of[eid], self.rect_of[eid]
        links = self.adj.pop(eid)
        for n in links:
            del self.adj[n][eid]
        self.index[layer].remove(eid)
        for s in range(layer, self.model.steps):
            comp_at = self.comp_at[s]
            c = comp_at.pop(eid)
            c.members.discard(eid)
            if not c.members:
                self.comps[s].discard(c)
                continue
            near = [n for n, step in links.items() if step <= s]
            parts = self._split(c.members, near, s) if len(near) > 1 else None
            if parts is None:  # still one piece: subtract what the shape contributed
                if s == layer:
                    area, perim = self.local_delta(r, self.routed_on(layer, ((n, 0) for n in near)), s)
                    c.area -= area
                    c.perim -= perim
                continue
            self.comps[s].discard(c)
            for part in parts:
                new = self._rebuild(part, s)
                self.comps[s].add(new)
                for m in part:
                    comp_at[m] = new
        del self.layer_of[eid], self.rect_of[eid]
        self.shape_ids.remove(eid)
        self.version += 1

    def _split(self, members: set[int], near: list[int], step: int) -> list[set[int]] | None:
        """Connected parts of ``members`` at ``step``, or None when they stay one."""
        adj = self.adj
        if _directly_linked(adj, near, step):
            return None  # the neighbours hold each other together without the shape
        parts: list[set[int]] = []
        unseen = set(members)
        for start in near:
            if start not in unseen:
                continue
            part = {start}
            unseen.discard(start)
            stack = [start]
            while stack:
                e = stack.pop()
                for n, joined in adj[e].items():
                    if joined <= step and n in unseen:
                        unseen.discard(n)
                        part.add(n)
                        stack.append(n)
            parts.append(part)
            if not unseen:
                break
        return None if len(parts) == 1 and not unseen else parts

    def comp_of_pin(self, pin: int, step: int) -> Comp | None:
        return self.comp_at[step].get(self.anchor_of_pin[pin])
