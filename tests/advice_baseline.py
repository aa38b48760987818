"""Repair advice as it was computed before its speed work: a verbatim copy of the
package's ``_advice`` module of that time (its module docstring, which describes the
method, left out; its imports made absolute; its trial-diode score asked of the view's
detailed score, as the view no longer answers it directly), kept only so that
``test_advice_same_answers`` can hold the faster advice to the very same answers on
random nets. Change it only together with a deliberate change of what advice answers.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

from etchguard._errors import InputError, StoppedError
from etchguard._geometry import COORD_LIMIT, Rect, checked_rect, run_rect
from etchguard._kinds import LimitedBy, OptionStatus
from etchguard._nets import Pin, Shape, via_shapes
from etchguard._netview import NetView
from etchguard._obstacles import Conflict, ObstacleIndex
from etchguard._ratios import TOLERANCE, is_legal
from etchguard._results import RatioChange, Score

MAX_DIODE_UM2 = 1.0e6  # a square millimetre: beyond any cell diode, the search stops there
DIODE_REL_PRECISION = 1e-9  # relative width of the final bisection bracket
MAX_DIODE_PLACEMENTS = 4  # gates of the violated checks tried as diode sites
ANSWERS = ("hop", "jumper", "diode")  # the parts of an advice a caller may ask for

Point = tuple[int, int]
# Asked before every exact score: the error to refuse the advice with (the caller's
# deadline passed, it cancelled), or None to go on.
StopCheck = Callable[[], StoppedError | None]


# -- result records (plain dataclasses: the RPC layer translates them field by field) ----

@dataclass(frozen=True)
class PlacedShape:
    """One shape of a proposal, explicit in DBU."""

    layer: str
    step: int
    rect: Rect


@dataclass(frozen=True)
class LayerOption:
    """The run moved to another layer with its via stacks, scored and checked for room."""

    layer: str
    step: int
    preferred: bool  # the layer's preferred direction is the run's
    status: OptionStatus
    legal: bool  # antenna-legal at every step (whether blocked or not)
    blocked: bool
    shapes: tuple[PlacedShape, ...]
    cuts: int
    score: Score
    conflicts: tuple[Conflict, ...] = ()


@dataclass(frozen=True)
class JumperAdvice:
    """How much of the run may stay on its layer before it hops."""

    applicable: bool
    reason: str
    run_length: int = 0  # DBU, centre line
    kept_length: int | None = None  # DBU from the joining end; None: not even 0 is legal
    hop_room: int = 0  # the largest kept length that still leaves room for a hop
    limited_by: LimitedBy = LimitedBy.NONE
    hop_point: Point | None = None
    hop_layer: str | None = None
    shapes: tuple[PlacedShape, ...] = ()
    score: Score | None = None
    legal: bool = False
    blocked: bool = False
    conflicts: tuple[Conflict, ...] = ()


@dataclass(frozen=True)
class DiodeAdvice:
    """The smallest diode at the gate side that makes the net legal, or why none does."""

    found: bool
    reason: str
    gate: str | None = None  # the pin the diode sits on
    layer: str | None = None
    rects: tuple[Rect, ...] = ()
    diff_area_um2: float | None = None
    worst_utilization: float | None = None  # the net with run and diode


@dataclass(frozen=True)
class Advice:
    net: str
    layer: str
    run: tuple[int, int, int, int]
    width: int
    rect: Rect
    score: Score  # the run as it is
    legal_as_is: bool
    join_end: Point | None
    far_end: Point | None
    options: tuple[LayerOption, ...]
    best: LayerOption | None  # the first legal, unblocked option
    jumper: JumperAdvice | None
    diode: DiodeAdvice | None
    explanation: tuple[str, ...] = field(default_factory=tuple)
    exact_scores: int = 0  # what-if scores this answer took (a load-independent cost)
    cut: tuple[str, ...] = ()  # parts left unsettled when the budget ran out ("hop", ...)
    # what the caller may not have meant: the net over a limit before the run, a run
    # against its layer's preferred direction, a run that touches the net nowhere
    warnings: tuple[str, ...] = ()

    @property
    def found(self) -> bool:
        """A legal way exists: as is, a free layer hop, a free jumper that hops (a kept
        part alone leaves the rest unrouted, so it is no fix) or a diode."""
        return (self.legal_as_is or self.best is not None
                or (self.jumper is not None and self.jumper.hop_layer is not None
                    and self.jumper.legal and not self.jumper.blocked)
                or (self.diode is not None and self.diode.found))


@dataclass(frozen=True)
class AdviceRequest:
    layer: int
    x1: int
    y1: int
    x2: int
    y2: int
    width: int
    allow_non_preferred: bool = False
    want: frozenset[str] = frozenset(ANSWERS)


def check_request(deck, layer: object, x1: object, y1: object, x2: object, y2: object,
                  width: object = None, allow_non_preferred: object = False,
                  want: object = None) -> AdviceRequest:
    """Validate a request, naming the field on refusal. ``want`` names the answers asked
    for (a subset of ``ANSWERS``; None: all of them)."""
    if isinstance(layer, bool) or not isinstance(layer, int) or not 0 <= layer < len(deck.layers):
        raise InputError(f"unknown layer {layer!r}", "layer")
    info = deck.layers[layer]
    if not info.is_routing:
        raise InputError(f"{info.name} is a cut layer; a run needs a routing layer", "layer")
    coords = []
    for name, v in (("x1", x1), ("y1", y1), ("x2", x2), ("y2", y2)):
        if isinstance(v, bool) or not isinstance(v, int):
            raise InputError(f"coordinates are integer DBU, got {v!r}", name)
        if not -COORD_LIMIT < v < COORD_LIMIT:
            raise InputError(f"coordinate {v} is not strictly inside +-2^62 DBU", name)
        coords.append(v)
    if coords[0] != coords[2] and coords[1] != coords[3]:
        raise InputError("a run's centre line must be horizontal or vertical", "run")
    if width is None:
        if not info.wire_width:
            raise InputError(f"{info.name} has no default wire_width; give a width", "width")
        width = info.wire_width
    if isinstance(width, bool) or not isinstance(width, int) or width <= 0:
        raise InputError(f"width must be a positive integer DBU, got {width!r}", "width")
    _check_room(deck, coords, width)
    if not isinstance(allow_non_preferred, bool):
        raise InputError("must be true or false", "allow_non_preferred")
    if want is None:
        wanted = frozenset(ANSWERS)
    else:
        if isinstance(want, str) or not isinstance(want, (list, tuple, set, frozenset)):
            raise InputError(f"a collection of answer names {ANSWERS} is needed, got {want!r}", "want")
        unknown = [w for w in want if w not in ANSWERS]
        if unknown:
            raise InputError(f"unknown answer {unknown[0]!r}; choose from {', '.join(ANSWERS)}", "want")
        wanted = frozenset(want)
    return AdviceRequest(layer, coords[0], coords[1], coords[2], coords[3], width, allow_non_preferred,
                         wanted)


def _check_room(deck, coords: list[int], width: int) -> None:
    """Every rectangle is held to one limit, strictly inside +-2^62 DBU: the run's own
    rectangle and every one advice may propose for it (the run moved to another layer at
    that layer's width, via pads at its ends), which reach at most ``margin`` DBU past the
    run's centre line."""
    x1, y1, x2, y2 = coords
    checked_rect(run_rect(x1, y1, x2, y2, width), "run")
    margin = max([width] + [l.wire_width or 0 for l in deck.layers]
                 + [(l.cut_size or 0) + 2 * (l.enclosure or 0) for l in deck.layers])
    if any(not -COORD_LIMIT + margin < v < COORD_LIMIT - margin for v in coords):
        raise InputError(f"the run comes within {margin} DBU of +-2^62 DBU, the limit of every "
                         "rectangle, and the shapes advice proposes for it would pass it", "run")


# -- geometry helpers -------------------------------------------------------------------

def via_stack(deck, x: int, y: int, a: int, b: int) -> list[Shape]:
    """Default vias at (x, y) through every cut layer between routing layers a and b."""
    lo, hi = min(a, b), max(a, b)
    out: list[Shape] = []
    for cut in range(lo + 1, hi):
        if not deck.layers[cut].is_routing:
            out.extend(via_shapes(deck, cut, x, y))
    return out


def _cut_count(deck, a: int, b: int) -> int:
    lo, hi = min(a, b), max(a, b)
    return sum(1 for c in range(lo + 1, hi) if not deck.layers[c].is_routing)


def _placed(deck, shapes: Sequence[Shape]) -> tuple[PlacedShape, ...]:
    return tuple(PlacedShape(deck.layers[s.layer].name, s.layer, s.rect) for s in shapes)


class _Run:
    """The run's centre line seen from its joining end."""

    def __init__(self, req: AdviceRequest, join_first: bool) -> None:
        p, f = (req.x1, req.y1), (req.x2, req.y2)
        if not join_first:
            p, f = f, p
        self.P, self.F = p, f
        self.axis = 0 if p[1] == f[1] and p[0] != f[0] else 1
        self.length = abs(f[self.axis] - p[self.axis])
        self.dir = 1 if f[self.axis] >= p[self.axis] else -1

    def at(self, kept: int) -> Point:
        if self.axis == 0:
            return (self.P[0] + self.dir * kept, self.P[1])
        return (self.P[0], self.P[1] + self.dir * kept)


# -- the advice -------------------------------------------------------------------------

class _BudgetSpent(Exception):
    """Internal: the advice's budget of exact scores ran out (the part under way is cut)."""


class _Advisor:
    # False: the jumper's bisection search alone, without the secant steps (tests and
    # the bench compare)
    tangent_search = True

    def __init__(self, net: str, view: NetView, obstacles: ObstacleIndex | None,
                 layer_range: tuple[int, int] | None, req: AdviceRequest,
                 should_stop: StopCheck | None = None, max_scores: int | None = None) -> None:
        self.net, self.view = net, view
        self.deck = view.deck
        self.steps = len(view.deck.layers)
        self.obstacles = obstacles
        self.layer_range = layer_range
        self.req = req
        self.rect = run_rect(req.x1, req.y1, req.x2, req.y2, req.width)
        self.scores = 0
        self.should_stop = should_stop
        self.max_scores = max_scores

    def score(self, shapes: list[Shape], detail: bool = True, extra_pins: Sequence[Pin] = ()) -> Score:
        self._count_one()
        return self.view.score(shapes, detail, extra_pins)

    def excess(self, shapes: list[Shape], extra_pins: Sequence[Pin]) -> tuple[float, Score]:
        self._count_one()
        # The view no longer answers this (the advice asks diode_excess); the same
        # figures from the detailed score, as the view made them: the one adaptation.
        full = self.view.score(shapes, True, extra_pins)
        return (max((c.ratio - c.limit for c in full.changes), default=-math.inf),
                dataclasses.replace(full, changes=()))

    def _count_one(self) -> None:
        """An exact score is about to be taken: stop if the caller stopped waiting or
        the advice's budget of scores is spent."""
        if self.should_stop is not None:
            stopped = self.should_stop()
            if stopped is not None:
                raise stopped
        if self.max_scores is not None and self.scores >= self.max_scores:
            raise _BudgetSpent()
        self.scores += 1

    # joining end ----------------------------------------------------------------------

    def join_end(self) -> tuple[bool | None, bool]:
        """(True: (x1, y1) joins, False: (x2, y2) joins, None: neither), and whether the
        joining contact reaches a gate."""
        req, view = self.req, self.view
        top = self.steps - 1
        found = []
        for x, y in ((req.x1, req.y1), (req.x2, req.y2)):
            touches = view.touching(req.layer, run_rect(x, y, x, y, req.width))
            gate = any(view.reaches_gate(e, top) for e, _ in touches)
            found.append((bool(touches), gate))
        if not found[0][0] and not found[1][0]:
            return None, False
        first = found[0] >= found[1]
        return first, found[0][1] if first else found[1][1]

    # obstacles ------------------------------------------------------------------------

    def conflicts(self, shapes: Sequence[Shape]) -> tuple[Conflict, ...]:
        if self.obstacles is None:
            return ()
        per_layer: dict[int, dict[Rect, None]] = {}  # distinct rectangles, in order
        for s in shapes:
            per_layer.setdefault(s.layer, {})[s.rect] = None
        found: dict[tuple[int, Rect], list[Conflict]] = {}
        for layer, rects in per_layer.items():  # one index query per layer
            spacing = self.deck.layers[layer].spacing or 0
            for rect, hits in zip(rects, self.obstacles.conflicts_many(self.net, layer, list(rects), spacing)):
                found[(layer, rect)] = hits
        out: list[Conflict] = []
        seen: set[tuple[int, Rect]] = set()
        for s in shapes:  # the order of the shapes, as one query per shape gave it
            if (s.layer, s.rect) not in seen:
                seen.add((s.layer, s.rect))
                out.extend(found[(s.layer, s.rect)])
        return tuple(out)

    # layer hops -----------------------------------------------------------------------

    def hop_layers(self) -> list[int]:
        deck, L = self.deck, self.req.layer
        lo, hi = self.layer_range if self.layer_range is not None else (0, len(deck.layers) - 1)
        direction = deck.layers[L].direction
        out = [l.index for l in deck.layers
               if l.is_routing and l.index != L and lo <= l.index <= hi
               and (self.req.allow_non_preferred or l.direction == direction)]
        out.sort(key=lambda t: (abs(t - L), 0 if t > L else 1, _cut_count(deck, L, t)))
        return out

    def target_width(self, target: int) -> int:
        return max(self.req.width, self.deck.layers[target].wire_width or 0)

    def option(self, run: _Run, target: int) -> LayerOption | str:
        deck = self.deck
        try:
            shapes = (via_stack(deck, *run.P, self.req.layer, target)
                      + [Shape(target, run_rect(*run.P, *run.F, self.target_width(target)))]
                      + via_stack(deck, *run.F, target, self.req.layer))
        except InputError as exc:
            return f"{deck.layers[target].name} cannot be reached: {exc.message}"
        result = self.score(shapes)
        conflicts = self.conflicts(shapes)
        blocked = bool(conflicts)
        status = (OptionStatus.BLOCKED if blocked else
                  OptionStatus.LEGAL if result.legal else OptionStatus.ILLEGAL)
        info = deck.layers[target]
        return LayerOption(info.name, target, info.direction == deck.layers[self.req.layer].direction,
                           status, result.legal, blocked, _placed(deck, shapes),
                           2 * _cut_count(deck, self.req.layer, target), result, conflicts)

    # jumper ---------------------------------------------------------------------------

    def jumper_shapes(self, run: _Run, kept: int, target: int | None) -> list[Shape]:
        deck, L, w = self.deck, self.req.layer, self.req.width
        q = run.at(kept)
        shapes = [Shape(L, run_rect(*run.P, *q, w))]
        if target is not None:
            shapes += via_stack(deck, *q, L, target)
            shapes.append(Shape(target, run_rect(*q, *run.F, self.target_width(target))))
            shapes += via_stack(deck, *run.F, target, L)
        return shapes

    def hop_room(self, run: _Run, target: int | None) -> int:
        """Largest kept length whose hop-point stack (and kept end) stays clear of the
        far-end stack: moving edges must stay >= 1 DBU short of the fixed ones."""
        last = run.length - 1
        if target is None:
            return last
        a = self.jumper_shapes(run, 0, target)
        fixed = via_stack(self.deck, *run.F, target, self.req.layer)
        moving = [a[0]] + a[1:len(a) - 1 - len(fixed)]
        ax, cross = run.axis, 1 - run.axis
        room = last
        for m in moving:
            for f in fixed:
                if abs(m.layer - f.layer) > 1:
                    continue
                if m.rect[cross] > f.rect[cross + 2] or f.rect[cross] > m.rect[cross + 2]:
                    continue  # apart across the run: they never meet
                if run.dir > 0:
                    room = min(room, f.rect[ax] - m.rect[ax + 2] - 1)
                else:
                    room = min(room, m.rect[ax] - f.rect[ax + 2] - 1)
        return room

    def events(self, run: _Run, target: int | None, room: int) -> list[int]:
        """Kept lengths at which a moving jumper edge meets a coordinate of an element of
        the net it could contact (same layer, or a cut and a metal next to each other,
        overlapping across the run), +-1 for the strict and the closed contact tests."""
        ax = run.axis
        at0 = self.jumper_shapes(run, 0, target)
        at1 = self.jumper_shapes(run, 1, target) if room >= 1 else at0
        end = self.jumper_shapes(run, room, target)
        layers = self.deck.layers
        out = {0, room}
        for s0, s1, s2 in zip(at0, at1, end):
            moving = [s0.rect[k] for k in (ax, ax + 2) if s1.rect[k] != s0.rect[k]]
            if not moving:
                continue
            swept = (min(s0.rect[0], s2.rect[0]) - 1, min(s0.rect[1], s2.rect[1]) - 1,
                     max(s0.rect[2], s2.rect[2]) + 1, max(s0.rect[3], s2.rect[3]) + 1)
            for layer in (s0.layer - 1, s0.layer, s0.layer + 1):
                if not 0 <= layer < self.steps:
                    continue
                if layer != s0.layer and layers[layer].is_routing == layers[s0.layer].is_routing:
                    continue
                for r in self.view.near(layer, swept):
                    for c in (r[ax], r[ax + 2]):
                        for e0 in moving:
                            base = run.dir * (c - e0)
                            for v in (base - 1, base, base + 1):
                                if 0 <= v <= room:
                                    out.add(v)
        return sorted(out)

    def jumper(self, run: _Run | None, target: int | None, as_is: Score) -> JumperAdvice:
        deck = self.deck
        if run is None:
            return JumperAdvice(False, "the run joins the net at neither end: no end to keep")
        if run.length == 0:
            return JumperAdvice(False, "the run has no length to split", 0)
        if as_is.legal:
            return JumperAdvice(True, "the whole run may stay", run.length, run.length, run.length - 1,
                                LimitedBy.RUN, None, None, (), as_is, True)
        room = self.hop_room(run, target)
        tname = deck.layers[target].name if target is not None else None
        if room < 0:
            return JumperAdvice(False, f"the run is too short to hop to {tname} and back within it",
                                run.length, None, room)
        cache: dict[int, Score] = {}
        detailed: set[int] = set()  # kept lengths whose cached score has the per-ratio detail

        def at(kept: int) -> Score:
            s = cache.get(kept)
            if s is None:
                s = cache[kept] = self.score(self.jumper_shapes(run, kept, target), detail=False)
            return s

        def at_detail(kept: int) -> Score:
            # a point the tangent search may answer with: scored with detail at once, so
            # the answer's own score is not computed twice
            if kept not in detailed:
                cache[kept] = self.score(self.jumper_shapes(run, kept, target))
                detailed.add(kept)
            return cache[kept]

        best: int | None = None
        points = self.events(run, target, room)
        for a, b in reversed(list(zip(points, points[1:])) or [(points[0], points[0])]):
            found = (_last_legal_by_tangents(at, a, b, at_detail) if self.tangent_search
                     else NEEDS_FALLBACK)
            best = _last_legal_in(at, a, b) if isinstance(found, _Fallback) else found
            if best is not None:
                break
        if best is None:
            why = (f"even hopping to {tname} right at the joining end leaves the net over a limit"
                   if target is not None else "no part of the run can stay on it, and no layer to hop to")
            return JumperAdvice(True, why, run.length, None, room, LimitedBy.LIMIT, None, tname)
        shapes = self.jumper_shapes(run, best, target)
        result = at_detail(best)
        conflicts = self.conflicts(shapes[1:]) if target is not None else ()
        limited = (LimitedBy.HOP_ROOM if best == room and not (best + 1 < run.length and not at(best + 1).legal)
                   else LimitedBy.LIMIT)
        if best == room and best + 1 == run.length:
            limited = LimitedBy.LIMIT  # l + 1 is the run as is, which is illegal
        return JumperAdvice(True, "", run.length, best, room, limited, run.at(best), tname,
                            _placed(deck, shapes), result, result.legal, bool(conflicts), conflicts)

    # diode ----------------------------------------------------------------------------

    def diode(self, as_is: Score) -> DiodeAdvice:
        pins = self.view.pins
        names = {p.name: i for i, p in enumerate(pins)}
        order: list[int] = []
        for c in sorted(as_is.changes, key=lambda c: -c.utilization):
            if not is_legal(c.utilization) and c.gate in names and names[c.gate] not in order:
                order.append(names[c.gate])
        if not order:  # the run breaks nothing itself: the violation was there before
            for o in sorted(self.view.offences(), key=lambda o: (o.step, -o.utilization)):
                for p in o.pins:
                    if pins[p].total_gate_area > 0 and p not in order:
                        order.append(p)
        if not order:
            return DiodeAdvice(False, "no violated check has a gate to protect")
        run = [Shape(self.req.layer, self.rect)]
        best: DiodeAdvice | None = None
        reasons = []
        for p in order[:MAX_DIODE_PLACEMENTS]:
            found = _DiodeSearch(self, run, p).smallest()
            pin = pins[p]
            if isinstance(found, str):
                reasons.append(f"at {pin.name}: {found}")
                continue
            area, worst = found
            if best is None or area < best.diff_area_um2:  # type: ignore[operator]
                best = DiodeAdvice(True, "", pin.name, self.deck.layers[pin.layer].name, pin.rects,
                                   area, worst)
        return best or DiodeAdvice(False, "; ".join(reasons))

    # all of it -----------------------------------------------------------------------

    def advise(self) -> Advice:
        req, deck = self.req, self.deck
        L = req.layer
        lname = deck.layers[L].name
        as_is = self.score([Shape(L, self.rect)])
        joins, _gate = self.join_end()
        run = _Run(req, joins is not False)
        join_point = run.P if joins is not None else None
        far_point = run.F if joins is not None else None
        run_info = (req.x1, req.y1, req.x2, req.y2)
        warnings = self._warnings(lname)
        if as_is.legal:
            text = (f"{lname} run is legal as is: worst {_pct(as_is.worst_utilization)} "
                    f"of the limit at any step",)
            return Advice(self.net, lname, run_info, req.width, self.rect, as_is, True, join_point,
                          far_point, (), None, None, None, text, self.scores, warnings=warnings)
        want = req.want
        explanation = [self._violation_sentence(lname, as_is)]
        options: list[LayerOption] = []
        notes: list[str] = []
        best: LayerOption | None = None
        target_opt: LayerOption | None = None
        cut: list[str] = []
        if want & {"hop", "jumper"}:
            # Without "hop" the options serve only to pick the jumper's hop layer: they
            # are scored nearest first until the first legal free one (that is the
            # layer picked), and not reported.
            lazy = "hop" not in want
            try:
                for target in self.hop_layers():
                    opt = self.option(run, target)
                    if isinstance(opt, str):
                        notes.append(opt)
                        continue
                    options.append(opt)
                    if lazy and opt.status is OptionStatus.LEGAL:
                        break
            except _BudgetSpent:
                cut.append("hop")  # the layers scored so far stand; the rest were not tried
                notes.append(f"later layers were not tried: {self._budget_words()}")
            best = next((o for o in options if o.status is OptionStatus.LEGAL), None)
            free = [o for o in options if not o.blocked]
            target_opt = best or (free[0] if free else None)
            if lazy:
                options, notes, best = [], [], None
            else:
                explanation.append(self._options_sentence(best, options, notes))
        jumper = None
        if "jumper" in want:
            try:
                jumper = self.jumper(run if joins is not None else None,
                                     target_opt.step if target_opt else None, as_is)
            except _BudgetSpent:
                cut.append("jumper")
                jumper = JumperAdvice(False, f"not settled: {self._budget_words()}", run.length)
            explanation.append(self._jumper_sentence(lname, jumper))
        diode = None
        if "diode" in want:
            try:
                diode = self.diode(as_is)
            except _BudgetSpent:
                cut.append("diode")
                diode = DiodeAdvice(False, f"not settled: {self._budget_words()}")
            explanation.append(self._diode_sentence(diode))
        if cut:
            explanation.append(f"cut: {self._budget_words()}; left unsettled: {', '.join(cut)}")
        return Advice(self.net, lname, run_info, req.width, self.rect, as_is, False, join_point,
                      far_point, tuple(options), best, jumper, diode, tuple(explanation),
                      self.scores, tuple(cut), warnings)

    def _warnings(self, lname: str) -> tuple[str, ...]:
        """What the caller may not have meant, said whatever the run's length: the net
        over a limit before the run (no choice for the run fixes that), a run against
        its layer's preferred direction, a run that touches the net nowhere."""
        req, out = self.req, []
        before = max((self.view.worst_at(s) for s in range(self.steps)), default=0.0)
        if not is_legal(before):
            out.append(f"the net is over a limit already, before this run (worst {_pct(before)}); "
                       "no choice for the run can fix that")
        direction = self.deck.layers[req.layer].direction
        along = "horizontal" if req.y1 == req.y2 and req.x1 != req.x2 else (
            "vertical" if req.x1 == req.x2 and req.y1 != req.y2 else None)
        if direction is not None and along is not None and along != direction:
            out.append(f"the run is {along}, against {lname}'s preferred direction ({direction})")
        if not self.view.touching(req.layer, self.rect):
            out.append(f"the run touches none of the net's shapes or pins on {lname} or the cut layers "
                       "next to it: it would be metal of its own, not part of the net")
        return tuple(out)

    def _budget_words(self) -> str:
        return f"the advice's budget of {self.max_scores} exact scores ran out"

    # sentences -------------------------------------------------------------------------

    def _violation_sentence(self, lname: str, as_is: Score) -> str:
        bad = [c for c in as_is.changes if not is_legal(c.utilization)]
        if bad:
            c = max(bad, key=lambda c: c.utilization)
            return (f"{lname} would reach {c.ratio:.4g} of {c.limit:.4g} ({c.kind} {c.measure}, "
                    f"{c.oxide} oxide) at step {c.layer} on the gate side of {c.gate}")
        return (f"the net is over a limit already, before this run "
                f"(worst {_pct(max((self.view.worst_at(s) for s in range(self.steps)), default=0.0))}); "
                f"no layer choice for the run can fix that")

    @staticmethod
    def _options_sentence(best: LayerOption | None, options: list[LayerOption], notes: list[str]) -> str:
        if not options and not notes:
            return "no other routing layer of the run's direction lies in the net's layer range"
        parts = []
        if best is not None:
            parts.append(f"{best.layer} is free and legal at {_pct(best.score.worst_utilization)}")
        for o in options:
            if o is best:
                continue
            if o.blocked:
                c = o.conflicts[0]
                parts.append(f"{o.layer} is blocked by {c.owner} on {c.rect}")
            elif not o.legal:
                parts.append(f"{o.layer} would still reach {_pct(o.score.worst_utilization)}")
            if best is not None and o.step == best.step:
                break
        parts.extend(notes)
        if best is None:
            parts.append("no layer in range is both free and legal")
        return "; ".join(parts)

    def _jumper_sentence(self, lname: str, j: JumperAdvice) -> str:
        if not j.applicable:
            return f"jumper: {j.reason}"
        if j.kept_length is None:
            return f"jumper: {j.reason}"
        um = j.kept_length / self.deck.dbu_per_micron
        if j.hop_layer is None:
            return (f"jumper: at most {j.kept_length} DBU ({um:.4g} um) of the run may stay on {lname} "
                    f"from the joining end; no layer is free to carry the rest")
        state = "blocked at the hop" if j.blocked else f"legal at {_pct(j.score.worst_utilization)}"  # type: ignore[union-attr]
        return (f"jumper: keep {j.kept_length} DBU ({um:.4g} um) on {lname}, hop to {j.hop_layer} "
                f"at {_pt(j.hop_point)}: {state}")  # type: ignore[arg-type]

    @staticmethod
    def _diode_sentence(d: DiodeAdvice) -> str:
        if d.found:
            return (f"diode: {d.diff_area_um2:.6g} um^2 of diffusion at {d.gate} makes the net legal "
                    f"(worst {_pct(d.worst_utilization or 0.0)})")
        return f"diode: none suffices ({d.reason})"


def _pct(u: float) -> str:
    return "inf" if math.isinf(u) else f"{u * 100:.0f}%"


def _pt(p: Point) -> str:
    return f"({p[0]}, {p[1]})"


def advise(net: str, view: NetView, obstacles: ObstacleIndex | None,
           layer_range: tuple[int, int] | None, req: AdviceRequest,
           should_stop: StopCheck | None = None, max_scores: int | None = None) -> Advice:
    """The advice for one run (the caller holds the net's lock while the view is used).
    ``should_stop`` is asked before every exact score, and a ``StoppedError`` it returns
    is raised; at most ``max_scores`` exact scores are taken (None: no bound), the part
    under way when they run out is cut (``Advice.cut``). See the module docstring."""
    return _Advisor(net, view, obstacles, layer_range, req, should_stop, max_scores).advise()


# -- jumper search on one event interval ---------------------------------------------------

def _last_legal_in(at: Callable[[int], Score], a: int, b: int) -> int | None:
    """The largest legal kept length in [a, b], where u is convex (see the docstring)."""
    if at(b).legal:
        return b
    if a == b:
        return None
    if at(a).legal:
        return _last_legal(at, a, b)
    if b - a <= 3:
        for v in range(b - 1, a, -1):
            if at(v).legal:
                return v
        return None
    u = lambda v: at(v).worst_utilization  # noqa: E731
    # A convex sequence lies above the lines through its first and last differences;
    # where their maximum stays above 1 no point of [a, b] is legal.
    s1, s2 = u(a + 1) - u(a), u(b) - u(b - 1)
    if not (math.isfinite(s1) and math.isfinite(s2)):
        return None
    if s1 >= 0 or s2 <= 0:
        return None  # convex and monotone on [a, b]: its minimum is an illegal end
    x = (u(b) - u(a) + s1 * a - s2 * b) / (s1 - s2)
    if u(a) + s1 * (x - a) > 1.0 + TOLERANCE:
        return None
    lo, hi = a, b
    while hi - lo > 2:
        m1, m2 = lo + (hi - lo) // 3, hi - (hi - lo) // 3
        if u(m1) <= u(m2):
            hi = m2
        else:
            lo = m1
    m = min(range(lo, hi + 1), key=u)
    return _last_legal(at, m, b) if at(m).legal else None


class _Fallback:
    """Marker: the tangent search could not settle an interval (see its docstring)."""


NEEDS_FALLBACK = _Fallback()
MAX_TANGENT_STEPS = 8  # a piecewise-linear u has few pieces per interval; past this, bisect


def _last_legal_by_tangents(at: Callable[[int], Score], a: int, b: int,
                            at_detail: Callable[[int], Score] | None = None) -> int | None | _Fallback:
    """The largest legal kept length in [a, b] by secant steps from the right end.

    On an event interval u is convex and piecewise linear (see the module docstring).
    For an illegal x > a, the line through (x - 1, u(x - 1)) and (x, u(x)) lies on or
    below u left of x - 1 (a chord of a convex function, extended, bounds it from
    below). Where that line exceeds the legal bound 1 + TOLERANCE, every point is
    illegal: so the last legal point of [a, x] is at most the line's crossing xt, and
    with a slope <= 0 (u non-increasing up to x) there is none. The next point tried is
    floor(xt); on a linear piece that is the answer at once. A point found legal this
    way is confirmed by the exact score of the point after it (the line bound is
    computed in floating point); when that confirmation fails, a utilization is not
    finite, or the steps run out, the caller falls back to the bisection search
    (``_last_legal_in``). ``at_detail`` scores the points that may be the answer with
    the per-ratio detail the advice reports."""
    fetch = at_detail or at
    x = b
    for step in range(MAX_TANGENT_STEPS):
        sx = at(x) if step == 0 else fetch(x)
        if sx.legal:
            if x == b:
                return x
            return x if not at(x + 1).legal else NEEDS_FALLBACK
        if x == a:
            return None
        before = at(x - 1)
        if before.legal:
            return x - 1  # x itself is illegal
        ux, up = sx.worst_utilization, before.worst_utilization
        if not (math.isfinite(ux) and math.isfinite(up)):
            return NEEDS_FALLBACK
        slope = ux - up
        if slope <= 0:
            return None  # convex and non-increasing on [a, x], illegal at x
        crossing = (x - 1) - (up - (1.0 + TOLERANCE)) / slope
        nxt = math.floor(crossing)
        if nxt < a:
            return None
        x = min(nxt, x - 2)
    return NEEDS_FALLBACK


def _last_legal(at: Callable[[int], Score], lo: int, hi: int) -> int:
    """Last legal point of a convex u with lo legal and hi illegal."""
    while hi - lo > 1:
        width = hi - lo
        ulo, uhi = at(lo).worst_utilization, at(hi).worst_utilization
        guesses = []
        slope = at(lo + 1).worst_utilization - ulo
        if slope > 0 and math.isfinite(slope):  # tangent: u >= tangent, so past it is illegal
            guesses.append(lo + int(math.floor((1.0 - ulo) / slope)) + 1)
        if math.isfinite(uhi) and uhi > ulo:  # chord: u <= chord, so before it is legal
            guesses.append(lo + int(math.floor((1.0 - ulo) * width / (uhi - ulo))))
        for g in guesses:
            g = min(max(g, lo + 1), hi - 1)
            if lo < g < hi:
                if at(g).legal:
                    lo = g
                else:
                    hi = g
        if hi - lo > width // 2 and hi - lo > 1:
            mid = (lo + hi) // 2
            if at(mid).legal:
                lo = mid
            else:
                hi = mid
    return lo


# -- diode: exact scores of the net, the run and a trial diode --------------------------

TINY_DIODE_UM2 = 1e-12  # D = 0+, the smallest diode tried: any D > 0 switches the tables on


class _DiodeSearch:
    """The smallest diode at one gate pin, each trial D scored exactly by the view (the
    net plus the run plus a diode pin of D um^2 on the gate's layer and rectangles);
    the method is the module docstring's."""

    def __init__(self, advisor: _Advisor, run: list[Shape], pin: int) -> None:
        self.advisor, self.run, self.pin = advisor, run, pin
        self.seen: dict[float, tuple[float, Score]] = {}  # a D is scored once

    def evaluate(self, D: float) -> tuple[float, Score]:
        """(h(D), the score): h is the most by which a changed ratio exceeds its limit.
        No tolerance here: the answer satisfies ratio <= limit outright, so every reader
        of the contract (whatever its rounding) finds it legal."""
        got = self.seen.get(D)
        if got is None:
            gate = self.advisor.view.pins[self.pin]
            diode = Pin(f"{gate.name} (trial diode)", gate.layer, gate.lowest_rects(), {}, D, {})
            got = self.seen[D] = self.advisor.excess(self.run, [diode])
        return got

    def h(self, D: float) -> float:
        return self.evaluate(D)[0]

    def breakpoints(self) -> list[float]:
        """Values of D > 0 at which a limit of the diode's components may bend: every
        point of a diode table of a rule at a step the pin exists at, less the diffusion
        its component already has there with the run (a superset does no harm: it only
        splits a segment)."""
        diffusion = self.advisor.view.pin_diffusion(self.pin, self.run)
        cuts: set[float] = set()
        for rule in self.advisor.deck.rules:
            d = diffusion[rule.step]
            if d is not None:
                for table in (rule.diode_partial_max, rule.diode_cumulative_max):
                    cuts.update(x - d for x, _y in table)
        return sorted(c for c in cuts if c > TINY_DIODE_UM2)

    def smallest(self) -> tuple[float, float] | str:
        """(D, worst utilization) of the smallest legal diode, or why there is none."""
        h = self.h
        cuts = self.breakpoints()
        for lo, hi in zip([TINY_DIODE_UM2] + cuts, cuts + [math.inf]):
            if lo > MAX_DIODE_UM2:
                break
            if h(lo) <= 0:
                return self._answer(lo)
            if math.isinf(hi) or hi > MAX_DIODE_UM2:
                # limits constant from here (or the search ends): h is non-increasing,
                # so the largest D decides whether any is legal
                if h(MAX_DIODE_UM2) > 0:
                    return self._why_not()
                probe = max(2.0 * lo, 1.0)
                while h(probe) > 0:
                    probe = min(probe * 2.0, MAX_DIODE_UM2)
                return self._answer(_bisect_left_edge(h, lo, probe))
            if h(hi) <= 0:
                return self._answer(_bisect_left_edge(h, lo, hi))
            # both ends illegal: the segment's convex minimum decides
            if not _may_dip(h, lo, hi):
                continue
            m = _golden_min(h, lo, hi)
            if h(m) <= 0:
                return self._answer(_bisect_left_edge(h, lo, m))
        return self._why_not()

    def _answer(self, D: float) -> tuple[float, float] | str:
        result = self.evaluate(D)[1]
        if not result.legal:  # every changed ratio holds: what fails lies elsewhere
            return self._elsewhere(result)
        return D, result.worst_utilization

    def _why_not(self) -> str:
        h, result = self.evaluate(MAX_DIODE_UM2)
        if h <= 0:
            return self._elsewhere(result)
        # the check that still fails, named: the changes of that trial, scored once more
        gate = self.advisor.view.pins[self.pin]
        diode = Pin(f"{gate.name} (trial diode)", gate.layer, gate.lowest_rects(), {}, MAX_DIODE_UM2, {})
        changes = self.advisor.score(self.run, True, [diode]).changes
        worst: RatioChange = max(changes, key=lambda c: c.ratio - c.limit)
        return (f"even {MAX_DIODE_UM2:.0e} um^2 of diffusion leaves {worst.kind} {worst.measure} at "
                f"step {worst.layer}: ratio {worst.ratio:.4g} against a limit of {worst.limit:.4g}; "
                f"the diode tables and factors of that rule do not reach it")

    def _elsewhere(self, result: Score) -> str:
        # a check no trial diode changes has the figures it has as held: find it there
        offence = next((o for o in self.advisor.view.offences() if o.utilization == result.worst_utilization),
                       None)
        if offence is None:
            return f"a check ({_pct(result.worst_utilization)}) lies in a component the pin never joins"
        where = f"a check at step {self.advisor.deck.layers[offence.step].name} ({_pct(offence.utilization)}"
        if self.pin not in offence.pins:
            return f"{where}) lies in a component the pin never joins"
        # the pin's own component, yet no trial changed that check: neither its ratio
        # nor its limit depends on the diffusion the component has
        return (f"{where}, {offence.kind} {offence.measure}, {offence.oxide} oxide) fails on the pin's own "
                f"component, and that rule's ratio and limit do not depend on diffusion")


def _bisect_left_edge(h: Callable[[float], float], lo: float, hi: float) -> float:
    """Smallest legal D in (lo, hi] with h(lo) > 0 >= h(hi) and a convex h (one crossing).

    Regula falsi with the Illinois modification (the retained end's value is halved when
    the same end is kept twice, which restores superlinear convergence), falling back to
    a bisection step whenever the bracket fails to halve; the bracket always holds the
    crossing, so the answer is the legal end once it is within the precision."""
    h_lo, h_hi = h(lo), h(hi)
    side = 0
    while hi - lo > DIODE_REL_PRECISION * hi:
        width = hi - lo
        x = hi - h_hi * (hi - lo) / (h_hi - h_lo) if math.isfinite(h_lo) and h_hi != h_lo else 0.5 * (lo + hi)
        if not lo < x < hi:
            x = 0.5 * (lo + hi)
        hx = h(x)
        if hx <= 0:
            hi, h_hi = x, hx
            if side == -1:
                h_lo *= 0.5
            side = -1
        else:
            lo, h_lo = x, hx
            if side == 1:
                h_hi *= 0.5
            side = 1
        if hi - lo > 0.5 * width:
            mid = 0.5 * (lo + hi)
            hm = h(mid)
            if hm <= 0:
                hi, h_hi = mid, hm
            else:
                lo, h_lo = mid, hm
            side = 0
    return hi


def _may_dip(h: Callable[[float], float], lo: float, hi: float) -> bool:
    """Whether a convex h, positive at both ends of [lo, hi], may be <= 0 inside: it lies
    above its tangents at the ends, approximated by difference quotients over a step
    delta (a difference quotient bounds the one-sided derivative from the inside)."""
    delta = max(hi - lo, 1e-300) * 1e-7
    h_lo, h_hi = h(lo), h(hi)
    s1 = (h(lo + delta) - h_lo) / delta
    s2 = (h_hi - h(hi - delta)) / delta
    if s1 >= 0 or s2 <= 0:
        return False
    x = (h_hi - h_lo + s1 * lo - s2 * hi) / (s1 - s2)
    return h_lo + s1 * (x - lo) <= 0


def _golden_min(h: Callable[[float], float], lo: float, hi: float) -> float:
    ratio = (math.sqrt(5.0) - 1.0) / 2.0
    a, b = lo, hi
    c, d = b - ratio * (b - a), a + ratio * (b - a)
    hc, hd = h(c), h(d)
    for _ in range(80):
        if hc <= 0:
            return c
        if hd <= 0:
            return d
        if hc < hd:
            b, d, hd = d, c, hc
            c = b - ratio * (b - a)
            hc = h(c)
        else:
            a, c, hc = c, d, hd
            d = a + ratio * (b - a)
            hd = h(d)
    return c if hc < hd else d
