"""The engine: every net's state behind one thread-safe face.

Each net has its own lock, so router threads working on different nets never wait
on each other; the registry lock is held only to find, add or drop a net. Every
net's state lives in the compiled core (``_corenet``), which owns its shapes and keeps
its components and ratios incrementally, so every net answers at full speed and the
core releases the GIL while it works.

Every mutating call validates its whole input before it changes anything, so a
refused call leaves the engine exactly as it was.
"""

from __future__ import annotations

import threading
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import TypeVar

import numpy as np

from ._advice import Advice, StopCheck
from ._advice import advise as _advise
from ._advice import check_request as _check_advice_request
from ._budget import Budget
from ._changelog import (
    BlockageDeclared,
    BlockageRemoved,
    Change,
    ChangeLog,
    DeckLoaded,
    EngineImage,
    NetClosed,
    NetImage,
    NetOpened,
    ShapesCommitted,
    ShapesRemoved,
)
from ._columns import BatchScores, CommonShapes, checked_columns, checked_common
from ._corenet import CompiledDeck, CoreNet, compile_deck
from ._coreview import CoreView
from ._costs import CostModel
from ._errors import AlreadyExistsError, InputError, LimitExceededError, NoDeckError, NotFoundError
from ._geometry import COORD_LIMIT
from ._geometry import checked_rect as _checked_rect
from ._names import check_name
from ._nets import NetSpec, Pin, Shape, check_pin_object, check_shape_objects
from ._obstacles import MAX_BLOCKAGE_ID, ObstacleIndex
from ._obstacles import net_items as _net_items
from ._obstacles import pin_items as _pin_items
from ._obstacles import shape_key as _shape_key
from ._results import Headroom, NetReport, Score
from ._rules import Deck
from ._rules import loads_deck as _loads_deck

_Mark = TypeVar("_Mark")
_EVERYWHERE = (-(COORD_LIMIT - 1), -(COORD_LIMIT - 1), COORD_LIMIT - 1, COORD_LIMIT - 1)  # a budget's default window


@dataclass(frozen=True)
class Limits:
    """Configurable bounds; exceeding one raises LimitExceededError."""

    max_nets: int = 1_000_000
    max_shapes_per_net: int = 200_000
    max_pins_per_net: int = 10_000
    max_candidates: int = 65_536  # shapes in one what-if, candidates in one batch
    # exact scores one advice may take; past it the part under way is cut (Advice.cut).
    # Counted, not timed: the same answer on any machine. About 5 s at 300 us a score.
    max_advice_scores: int = 20_000


@dataclass(eq=False)
class _Net:
    name: str
    pins: tuple[Pin, ...]
    layer_range: tuple[int, int] | None
    core: CoreNet
    next_id: int = 1
    lock: threading.Lock = field(default_factory=threading.Lock)
    closed: bool = False  # set under the lock by close_net: a late commit must not land here

    def shape_table(self) -> dict[int, tuple[int, int, int, int, int]]:
        """id -> (layer, xlo, ylo, xhi, yhi) of the held shapes, in commit order."""
        return {row[0]: row[1:] for row in self.core.shape_rows()}


class Engine:
    """Holds every net of a design and answers antenna questions about them."""

    def __init__(self, deck: Deck | None = None, limits: Limits | None = None,
                 costs: CostModel | None = None, changelog: ChangeLog | None = None) -> None:
        self.limits = limits or Limits()
        self.costs = costs or CostModel()  # settings read per call (see _cost_tuple)
        self.changelog = changelog  # records every change under the lock that ordered it
        self._deck_text: str | None = None  # the loaded deck's TOML, for snapshots
        self._registry = threading.Lock()  # lock order: registry -> net lock
        self._nets: dict[str, _Net] = {}
        self._deck: Deck | None = None
        self._compiled: CompiledDeck | None = None
        self.counters = {"scores": 0, "commits": 0, "removals": 0, "checks": 0, "violations_seen": 0}
        self._obstacles = ObstacleIndex()  # every net's metal + declared blockages (advice)
        if deck is not None:
            self.load_deck(deck)

    # -- deck -------------------------------------------------------------------------

    @property
    def deck(self) -> Deck:
        if self._deck is None:
            raise NoDeckError("no rule deck is loaded; load one first", "deck")
        return self._deck

    @property
    def deck_text(self) -> str | None:
        """The loaded deck's TOML source, when it was loaded from text."""
        return self._deck_text

    # The costs and limits are plain attributes a caller may replace; what the router's
    # inner loop reads of them is derived once per new value.
    @property
    def costs(self) -> CostModel:
        return self._costs

    @costs.setter
    def costs(self, value: CostModel) -> None:
        self._costs, self._cost_tuple = value, value.as_tuple()

    @property
    def limits(self) -> Limits:
        return self._limits

    @limits.setter
    def limits(self, value: Limits) -> None:
        self._limits = value
        self._most_candidate_shapes = min(value.max_candidates, value.max_shapes_per_net)

    def load_deck(self, deck: Deck, text: str | None = None) -> None:
        """Load or replace the deck. Held nets are carried over by layer name; if one
        uses a layer the new deck lacks, the call is refused and nothing changes.
        ``text`` is the deck's TOML source, which a change log needs to replay it."""
        with self._registry:
            old = self._deck
            nets = list(self._nets.values())
            for net in nets:
                net.lock.acquire()
            try:
                moved = [self._moved(net, old, deck) for net in nets] if old is not None else []
                blockages = self._obstacles.moved_blockages(old, deck) if old is not None else {}
                compiled = compile_deck(deck)
                cores = [_core_net(compiled, pins, shapes) for pins, shapes, _ in moved]
                self._record(DeckLoaded, deck, text)  # logged first: a refused log changes nothing
                self._deck, self._compiled = deck, compiled
                for net, (pins, _shapes, layer_range), core in zip(nets, moved, cores):
                    net.pins, net.layer_range, net.core = pins, layer_range, core
                self._obstacles.rebuild(len(deck.layers), [item for net in nets for item in _net_items(
                    net.name, net.pins, net.shape_table())], blockages)
                self._deck_text = text
            finally:
                for net in nets:
                    net.lock.release()

    @staticmethod
    def _moved(net: _Net, old: Deck, new: Deck):
        def step(index: int, what: str) -> int:
            name = old.layers[index].name
            if name not in new.layer_index:
                raise InputError(f"net {net.name!r} uses layer {name} ({what}), which the new deck "
                                 f"lacks; close the net first", "deck.layers")
            return new.layer_index[name]
        pins = tuple(Pin(p.name, step(p.layer, f"pin {p.name}"), p.rects, p.gate_area, p.diff_area,
                         {step(s, f"cell_area of {p.name}"): a for s, a in p.cell_area.items()},
                         {step(s, f"cell_side_area of {p.name}"): a for s, a in p.cell_side_area.items()},
                         {(m, step(s, f"block_car of {p.name}"), ox): r for (m, s, ox), r in p.block_car.items()},
                         tuple(step(s, f"pin {p.name}") for s in p.rect_layers))
                     for p in net.pins)
        shapes = {sid: (step(v[0], f"shape {sid}"),) + v[1:] for sid, v in net.shape_table().items()}
        layer_range = None
        if net.layer_range is not None:
            layer_range = (step(net.layer_range[0], "layer_range"), step(net.layer_range[1], "layer_range"))
        return pins, shapes, layer_range

    # -- nets -------------------------------------------------------------------------

    def open_net(self, name: str, pins: Sequence[Pin], layer_range: tuple[int, int] | None = None,
                 shapes: Sequence[Shape] = ()) -> list[int]:
        """Open a net with its pins (and optionally shapes already routed)."""
        self.deck  # noqa: B018 - raises NoDeckError
        check_name(name, "a net", "net")
        if len(pins) > self.limits.max_pins_per_net:
            raise LimitExceededError(f"{len(pins)} pins exceed the limit of "
                                     f"{self.limits.max_pins_per_net} per net", "pins")
        names = set()
        steps = len(self.deck.layers)
        for i, pin in enumerate(pins):
            check_pin_object(steps, pin, f"pins[{i}]")
            if pin.name in names:
                raise InputError(f"pin {pin.name!r} appears twice", f"pins[{i}].name")
            names.add(pin.name)
        self._check_shapes(shapes, 0)
        with self._registry:
            if name in self._nets:
                raise AlreadyExistsError(f"net {name!r} is already open", "net")
            if len(self._nets) >= self.limits.max_nets:
                raise LimitExceededError(f"{self.limits.max_nets} nets are held already", "net")
            net = _Net(name, tuple(pins), layer_range, CoreNet(self._compiled, pins))  # type: ignore[arg-type]
            net.lock.acquire()  # free (the net is new); held so no close or commit overtakes the open
            self._nets[name] = net
            self._obstacles.add_net_items(name, _pin_items(net.pins))
        try:
            self._record(NetOpened, name, net.pins, net.layer_range, tuple(shapes), 1)
        except BaseException:
            net.closed = True  # a caller that found it meanwhile gets NOT_FOUND
            net.lock.release()
            with self._registry:
                if self._nets.get(name) is net:
                    del self._nets[name]
                    self._obstacles.drop_net(name)
            raise
        try:
            return self._commit_locked(net, shapes)
        finally:
            net.lock.release()

    def close_net(self, name: str) -> None:
        with self._registry:
            net = self._nets.get(name)
            if net is None:
                raise NotFoundError(f"no open net {name!r}", "net")
            with net.lock:  # registry -> net: no reopen of the name is logged before this close
                if net.closed:  # an open whose log entry was refused, being taken back
                    raise NotFoundError(f"no open net {name!r}", "net")
                self._record(NetClosed, name)  # logged first: a refused log changes nothing
                del self._nets[name]
                self._obstacles.drop_net(name)
                net.closed = True

    def net_names(self) -> list[str]:
        with self._registry:
            return list(self._nets)

    def _net(self, name: str) -> _Net:
        self.deck  # noqa: B018 - raises NoDeckError
        net = self._nets.get(name)
        if net is None:
            raise NotFoundError(f"no open net {name!r}", "net")
        return net

    # -- shapes -----------------------------------------------------------------------

    def _check_shapes(self, shapes: Sequence[Shape], held: int) -> None:
        deck = self.deck
        n = len(deck.layers)
        if held + len(shapes) > self.limits.max_shapes_per_net:
            raise LimitExceededError(f"{held + len(shapes)} shapes would exceed the limit of "
                                     f"{self.limits.max_shapes_per_net} per net", "shapes")
        check_shape_objects(n, shapes, "shapes")

    def commit(self, name: str, shapes: Sequence[Shape]) -> list[int]:
        """Add shapes to a net; returns their ids, in order."""
        net = self._net(name)
        with net.lock:
            if net.closed:
                raise NotFoundError(f"no open net {name!r}", "net")
            self._check_shapes(shapes, net.core.shape_count)
            if shapes:  # logged first: a refused log changes nothing
                self._record(ShapesCommitted, name, tuple(shapes), net.next_id)
            return self._commit_locked(net, shapes)

    def commit_if_legal(self, name: str, shapes: Sequence[Shape]) -> tuple[Score, list[int]]:
        """Score shapes against a net and commit them only when the score is legal, in
        one step under the net's lock; returns the score and the ids (empty: nothing
        was committed)."""
        if not shapes:
            raise InputError("a candidate needs at least one shape", "shapes")
        if len(shapes) > self.limits.max_candidates:
            raise LimitExceededError(f"{len(shapes)} shapes exceed the limit of "
                                     f"{self.limits.max_candidates}", "shapes")
        net = self._net(name)
        with net.lock:
            if net.closed:
                raise NotFoundError(f"no open net {name!r}", "net")
            self._check_shapes(shapes, net.core.shape_count)
            verdict = net.core.score(shapes, True, (), self._cost_tuple)
            self.counters["scores"] += 1
            if not verdict.legal:
                return verdict, []
            self._record(ShapesCommitted, name, tuple(shapes), net.next_id)
            return verdict, self._commit_locked(net, shapes)

    def _commit_locked(self, net: _Net, shapes: Sequence[Shape]) -> list[int]:
        ids = list(range(net.next_id, net.next_id + len(shapes)))
        net.core.add(ids, shapes)
        net.next_id += len(shapes)
        self._obstacles.add_net_items(net.name, [(s.layer, s.rect, _shape_key(sid)) for s, sid in zip(shapes, ids)])
        self.counters["commits"] += len(shapes)
        return ids

    def remove(self, name: str, ids: Sequence[int]) -> None:
        """Remove (rip up) shapes by id: all of them or, on an unknown id, none."""
        net = self._net(name)
        with net.lock:
            if net.closed:
                raise NotFoundError(f"no open net {name!r}", "net")
            seen = set()
            for i, sid in enumerate(ids):
                if type(sid) is not int or not net.core.has_shape(sid) or sid in seen:
                    raise NotFoundError(f"shape {sid} is listed twice" if sid in seen
                                        else f"net {name!r} has no shape {sid}", f"shape_ids[{i}]")
                seen.add(sid)
            if ids:  # logged first: a refused log changes nothing
                self._record(ShapesRemoved, name, tuple(ids))
            net.core.remove(ids)
            self._obstacles.remove_net_items(name, [_shape_key(sid) for sid in ids])
            self.counters["removals"] += len(ids)

    def shapes(self, name: str) -> dict[int, Shape]:
        net = self._net(name)
        with net.lock:
            return {row[0]: Shape(row[1], row[2:]) for row in net.core.shape_rows()}

    def spec_with_ids(self, name: str) -> tuple[NetSpec, list[int]]:
        """The net's specification and its shapes' ids, in the same (commit) order."""
        net = self._net(name)
        with net.lock:
            rows = net.core.shape_rows()
        shapes = tuple(Shape(row[1], row[2:]) for row in rows)
        return NetSpec(net.name, net.pins, shapes, net.layer_range), [row[0] for row in rows]

    def spec(self, name: str) -> NetSpec:
        return self.spec_with_ids(name)[0]

    # -- questions --------------------------------------------------------------------

    def score(self, name: str, candidate: Sequence[Shape], detail: bool = True) -> Score:
        """What committing ``candidate`` would do; changes nothing. Without ``detail``
        the per-ratio changes are left out (verdict, utilizations and cost are not)."""
        net = self._nets.get(name)
        if net is not None and 0 < len(candidate) <= self._most_candidate_shapes:
            # The router's inner loop: the binding reads the shapes and the core checks
            # them; only a refusal takes the path below, which names the bad field.
            try:
                with net.lock:
                    result = net.core.score_shapes(candidate, detail, self._cost_tuple)
            except (TypeError, ValueError, AttributeError):
                pass
            else:
                self.counters["scores"] += 1
                return result
        if not candidate:
            raise InputError("a candidate needs at least one shape", "candidate")
        self._check_shapes(candidate, 0)
        if len(candidate) > self.limits.max_candidates:
            raise LimitExceededError(f"{len(candidate)} shapes exceed the limit of "
                                     f"{self.limits.max_candidates}", "candidate")
        net = self._net(name)
        with net.lock:
            result = net.core.score(candidate, detail, (), self._cost_tuple)
        self.counters["scores"] += 1
        return result

    def score_many(self, name: str, candidates: Sequence[Sequence[Shape]],
                   detail: bool = False) -> list[Score]:
        """Score candidates one by one against the same net state."""
        if len(candidates) > self.limits.max_candidates:
            raise LimitExceededError(f"{len(candidates)} candidates exceed the limit of "
                                     f"{self.limits.max_candidates} per batch", "candidates")
        for i, c in enumerate(candidates):
            if not c:
                raise InputError("a candidate needs at least one shape", f"candidates[{i}]")
            self._check_shapes(c, 0)
        net = self._net(name)
        with net.lock:
            out = [net.core.score(c, detail, (), self._cost_tuple) for c in candidates]
        self.counters["scores"] += len(candidates)
        return out

    # -- columnar batch scores (one rectangle per candidate; see _batch) -----------------

    def score_columns(self, name: str, layers: Sequence[int] | np.ndarray,
                      rects: np.ndarray, shape_count: Sequence[int] | np.ndarray | None = None,
                      common: CommonShapes | None = None) -> BatchScores:
        """Score candidates given as shape rows (``layers[k]``, ``rects[k]`` = xlo, ylo,
        xhi, yhi in DBU) against the same net state: candidate i is the next
        ``shape_count[i]`` rows (default: one row each); entry i equals
        ``score(name, its shapes, detail=False)``. With ``common`` each candidate starts
        with its shared part (see CommonShapes) and equals the candidate sent whole.
        Validated as a whole before anything is computed; the first bad row is named
        (``rects[k]``, ``shape_count[i]``, ``common.rects[k]``, ``common.part[i]``)."""
        steps = len(self.deck.layers)
        layer_arr, rect_arr, counts = checked_columns(steps, layers, rects, shape_count,
                                                      self.limits.max_candidates,
                                                      self.limits.max_shapes_per_net)
        candidates = rect_arr.shape[0] if counts is None else len(counts)
        shared = None
        if common is not None:
            counts = np.ones(candidates, dtype=np.int64) if counts is None else counts
            shared = checked_common(steps, common, counts, self.limits.max_candidates,
                                    self.limits.max_shapes_per_net)
        net = self._net(name)
        with net.lock:
            if shared is None:
                result = net.core.score_columns(layer_arr, rect_arr, counts, self._cost_tuple)
            else:
                result = net.core.score_columns_common(layer_arr, rect_arr, counts, shared,  # type: ignore[arg-type]
                                                       self._cost_tuple)
        self.counters["scores"] += candidates
        return result

    def check(self, name: str) -> NetReport:
        net = self._net(name)
        with net.lock:
            report = net.core.check(name)
        self.counters["checks"] += 1
        if not report.legal:
            self.counters["violations_seen"] += 1
        return report

    def check_all(self) -> Iterator[NetReport]:
        for name in self.net_names():
            try:
                yield self.check(name)
            except NotFoundError:
                continue  # closed meanwhile

    def headroom(self, name: str, layer: int, x: int, y: int) -> Headroom:
        """Conductor the component at (x, y) on ``layer`` may still take on that layer."""
        deck = self.deck
        if not 0 <= layer < len(deck.layers):
            raise InputError("unknown layer", "layer")
        net = self._net(name)
        with net.lock:
            return net.core.headroom(layer, x, y)

    def budget(self, name: str, layer: int, x: int, y: int, common: Sequence[Shape] = (),
               window: Sequence[int] | None = None) -> Budget:
        """The budget of the component at (x, y) on ``layer`` with ``common`` taken as
        committed: the coefficients of every ratio an addition to it on that layer
        changes, and what a client needs to evaluate candidates itself (see _budget).
        Rectangles are listed where they meet ``window`` (DBU; None: everywhere)."""
        deck = self.deck
        if isinstance(layer, bool) or not isinstance(layer, int) or not 0 <= layer < len(deck.layers):
            raise InputError(f"unknown layer {layer!r}", "layer")
        check_shape_objects(len(deck.layers), common, "common")
        if len(common) > self.limits.max_shapes_per_net:
            raise LimitExceededError(f"{len(common)} shapes exceed the limit of "
                                     f"{self.limits.max_shapes_per_net} per net", "common")
        for value, field_name in ((x, "x"), (y, "y")):
            if isinstance(value, bool) or not isinstance(value, int) or not -COORD_LIMIT < value < COORD_LIMIT:
                raise InputError(f"a point is integer DBU within +-2^62, got {value!r}", field_name)
        area = _EVERYWHERE if window is None else _checked_rect(list(window), "window")
        net = self._net(name)
        with net.lock:
            result = net.core.budget(layer, x, y, common, area, self.costs)
        self.counters["scores"] += 1
        return result

    def stats(self) -> dict[str, int]:
        with self._registry:
            nets = list(self._nets.values())
        # every net's state is built in the core: "hot" nets are all of them
        return {"nets": len(nets), "shapes": sum(n.core.shape_count for n in nets), "hot_nets": len(nets),
                **self.counters}


    # -- advice: blockages and repair advice ----------------------------------------

    def declare_blockage(self, layer: int, rect: Sequence[int], blockage_id: int | None = None) -> int:
        """Declare an area of a layer no new shape may use; returns its id: ``blockage_id``
        when given (refused when held, changing nothing), else the next one free. A
        farm gives one blockage the same id on every shard this way."""
        deck = self.deck
        if isinstance(layer, bool) or not isinstance(layer, int) or not 0 <= layer < len(deck.layers):
            raise InputError(f"unknown layer {layer!r}", "layer")
        checked = _checked_rect(list(rect), "rect")
        if blockage_id is not None and (isinstance(blockage_id, bool) or not isinstance(blockage_id, int)
                                        or not 1 <= blockage_id <= MAX_BLOCKAGE_ID):
            raise InputError(f"a blockage id is 1 .. {MAX_BLOCKAGE_ID}, not {blockage_id!r}", "blockage_id")
        with self._registry:  # ordered against deck loads and snapshots in the change log
            bid = self._obstacles.blockage_id_for(blockage_id)
            self._record(BlockageDeclared, bid, layer, checked)
            return self._obstacles.add_blockage(layer, checked, bid)

    def remove_blockage(self, blockage_id: int) -> None:
        with self._registry:
            if blockage_id not in self._obstacles.blockages:
                raise NotFoundError(f"no blockage {blockage_id}", "blockage_id")
            self._record(BlockageRemoved, blockage_id)
            self._obstacles.remove_blockage(blockage_id)

    def advise(self, name: str, layer: int, x1: int, y1: int, x2: int, y2: int,
               width: int | None = None, allow_non_preferred: bool = False,
               want: Sequence[str] | None = None, should_stop: StopCheck | None = None) -> Advice:
        """Repair advice for a candidate run: layer hops, jumper point, diode (see _advice);
        ``want`` asks for only some of them (e.g. ``("hop",)``; None: all).

        ``should_stop`` (the caller's deadline and cancellation) is asked while waiting
        for the net and before every exact score; the ``StoppedError`` it returns is
        raised, so the net is let go within one score of it. At most
        ``limits.max_advice_scores`` exact scores are taken (``Advice.cut``)."""
        request = _check_advice_request(self.deck, layer, x1, y1, x2, y2, width, allow_non_preferred,
                                        want)
        net = self._net(name)
        _acquire(net.lock, should_stop)
        try:
            if net.closed:
                raise NotFoundError(f"no open net {name!r}", "net")
            view = CoreView(name, net.core, self.costs)
            result = _advise(name, view, self._obstacles, net.layer_range, request, should_stop,
                             self.limits.max_advice_scores)
        finally:
            net.lock.release()
        self.counters["scores"] += 1
        return result

    # -- durability: change-log hook and whole-state images ----------------------------

    def _record(self, kind: Callable[..., Change], *fields: object) -> None:
        """Hand a change (``kind(*fields)``) to the change log, if there is one, after it
        was validated and before it is applied: a log that refuses it (ChangeLogError)
        leaves the engine as it was. The caller holds the lock that ordered the change
        (see _changelog). The record is built only when a log takes it: a commit
        without a journal does not pay for it."""
        log = self.changelog
        if log is not None:
            log.record(kind(*fields))

    def export_state(self, mark: Callable[[], _Mark]) -> tuple[EngineImage, _Mark]:
        """An image of everything held, and ``mark()`` called at the same instant (with
        every lock held, so no change is half in the image): a snapshot names with it
        the change-log position the image covers. Nets are copied, not converted, under
        the locks, so the pause is a dict copy per net."""
        with self._registry:
            nets = list(self._nets.values())
            for net in nets:
                net.lock.acquire()
            try:
                images = tuple(NetImage(n.name, n.pins, n.layer_range, n.shape_table(), n.next_id)
                               for n in nets)
                image = EngineImage(self._deck_text if self._deck is not None else None, images,
                                    dict(self._obstacles.blockages), self._obstacles._next_blockage)
                return image, mark()
            finally:
                for net in nets:
                    net.lock.release()

    def restore_state(self, image: EngineImage) -> None:
        """Bring back an exported image into an engine that holds nothing yet (before a
        change log is attached: a restore is not a change)."""
        if self._nets or self._deck is not None or self.changelog is not None:
            raise InputError("restore_state needs an empty engine without a change log", "engine")
        if image.deck_text is None:
            if image.nets or image.blockages:
                raise InputError("an image with nets or blockages needs a deck", "deck")
            return
        deck = _loads_deck(image.deck_text, "<snapshot deck>")
        self.load_deck(deck, image.deck_text)
        compiled = self._compiled
        assert compiled is not None  # load_deck has just set it
        with self._registry:
            for ni in image.nets:
                core = _core_net(compiled, ni.pins, ni.shapes)
                self._nets[ni.name] = _Net(ni.name, tuple(ni.pins), ni.layer_range, core, ni.next_id)
            self._obstacles.rebuild(len(deck.layers), [item for ni in image.nets for item in
                                                       _net_items(ni.name, ni.pins, ni.shapes)],
                                    dict(image.blockages))
            self._obstacles._next_blockage = image.next_blockage_id  # ids continue, never reused


_LOCK_WAIT_SLICE_S = 0.05  # how often a waiting advice asks whether its caller still waits


def _acquire(lock: threading.Lock, should_stop: StopCheck | None) -> None:
    """Take ``lock``; while it is busy, give up (raise) as soon as ``should_stop`` says so."""
    if should_stop is None:
        lock.acquire()
        return
    while not lock.acquire(timeout=_LOCK_WAIT_SLICE_S):
        stopped = should_stop()
        if stopped is not None:
            raise stopped


def _core_net(compiled: CompiledDeck, pins: Sequence[Pin],
              shapes: Mapping[int, tuple[int, int, int, int, int]]) -> CoreNet:
    """A net's core state with its shapes under their ids, in the given order."""
    core = CoreNet(compiled, pins)
    core.add(list(shapes), [Shape(v[0], v[1:]) for v in shapes.values()])
    return core

