"""The engine face over the compiled core: a deck compiled once, one net's state.

The model itself (components per step, union areas, ratios, cumulative chains,
what-if, batches, headroom) lives in the C++ core (``core/``, bound as
``etchguard._core``); this module only turns the package's types into the core's plain
values and back. Callers hold the net's lock: a core net is not thread-safe, but the
core releases the GIL inside its calls, so threads on different nets use different
cores.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from . import _core
from ._budget import Budget, BudgetRatio, BudgetTerm, BudgetWatch
from ._columns import BatchScores, CheckedCommon
from ._costs import CostModel
from ._geometry import Rect
from ._kinds import Measure, RatioKind
from ._nets import Pin, Shape
from ._netview import trial_diode
from ._ratios import is_legal
from ._results import CheckResult, Headroom, NetReport, RatioChange, Score
from ._rules import Deck

MEASURES = tuple(Measure)  # the core's Measure values, in order
KINDS = tuple(RatioKind)  # the core's Kind values, in order


@dataclass(frozen=True)
class CompiledDeck:
    """A deck turned into the core's model, with the oxide classes it indexes."""

    deck: Deck
    model: object  # _core.Model
    oxides: tuple[str, ...]
    oxide_index: dict[str, int]
    layer_names: tuple[str, ...]


def compile_deck(deck: Deck) -> CompiledDeck:
    oxides = deck.oxides or ("thin",)
    index = {ox: i for i, ox in enumerate(oxides)}
    layers = [(not l.is_routing, l.thickness_um or 0.0, l.wire_width or 0,
               bool(getattr(l, "cumulative_plus_cut", False))) for l in deck.layers]
    rules = [(r.step, MEASURES.index(r.measure), index[r.oxide],
              r.partial_max is not None, r.partial_max or 0.0,
              r.cumulative_max is not None, r.cumulative_max or 0.0,
              r.area_factor, r.factor_with_diode_only,
              list(r.diode_partial_max), list(r.diode_cumulative_max),
              list(getattr(r, "diode_area_reduction", ())),
              r.diode_gate_factor, r.diode_area_credit) for r in deck.rules]
    model = _core.compile(deck.dbu_per_micron, deck.cumulative_includes_cuts, layers, list(oxides), rules)
    return CompiledDeck(deck, model, tuple(oxides), index, tuple(l.name for l in deck.layers))


def _pin_tuple(compiled: CompiledDeck, pin: Pin) -> tuple:
    gates = [0.0] * len(compiled.oxides)
    for ox, value in pin.gate_area.items():
        i = compiled.oxide_index.get(ox)
        if i is not None:
            gates[i] = value
    return (pin.layer, list(pin.rects), gates, pin.total_gate_area, pin.diff_area,
            sorted(pin.cell_area.items()), sorted(pin.cell_side_area.items()),
            [(step, MEASURES.index(measure), compiled.oxide_index[ox], ratio)
             for (measure, step, ox), ratio in sorted(pin.block_car.items()) if ox in compiled.oxide_index],
            list(pin.rect_layers))


class CoreNet:
    """One net's state in the core, answering in the package's types."""

    __slots__ = ("compiled", "deck", "pins", "net", "_trial_diodes")

    def __init__(self, compiled: CompiledDeck, pins: Sequence[Pin]) -> None:
        self.compiled = compiled
        self.deck = compiled.deck
        self.pins = tuple(pins)
        self.net = _core.Net(compiled.model, [_pin_tuple(compiled, p) for p in self.pins])
        # pin index -> the core form of a trial diode there, split around its diffusion
        # (pins and deck are fixed for the life of a CoreNet, so is this)
        self._trial_diodes: dict[int, tuple[tuple, tuple]] = {}

    # -- changes --------------------------------------------------------------------

    def add(self, ids: Sequence[int], shapes: Sequence[Shape]) -> None:
        self.net.add_shapes([(sid, s.layer) + s.rect for sid, s in zip(ids, shapes)])

    def remove(self, ids: Sequence[int]) -> None:
        self.net.remove(list(ids))

    def has_shape(self, sid: int) -> bool:
        return 0 <= sid < 1 << 63 and self.net.has_shape(sid)

    @property
    def shape_count(self) -> int:
        return self.net.shape_count

    def shape_rows(self) -> list[tuple[int, int, int, int, int, int]]:
        """(id, layer, xlo, ylo, xhi, yhi) of every held shape, in commit order."""
        return self.net.shapes()

    # -- questions ------------------------------------------------------------------

    def score(self, shapes: Sequence[Shape], detail: bool = True, extra_pins: Sequence[Pin] = (),
              costs: tuple[float, ...] | None = None) -> Score:
        """What committing ``shapes`` (and adding ``extra_pins``) would do."""
        extra = [_pin_tuple(self.compiled, p) for p in extra_pins] if extra_pins else []
        raw = self.net.score(shapes, detail, costs or _DEFAULT_COSTS, extra)
        return self._score(raw, extra_pins)

    def score_shapes(self, shapes: Sequence[Shape], detail: bool, costs: tuple[float, ...]) -> Score:
        """``score`` with no extra pin: the router's what-if, one frame less."""
        return self._score(self.net.score(shapes, detail, costs, _NO_PINS), ())

    def diode_excess(self, shapes: Sequence[Shape], pin: int, diff_area: float,
                     costs: tuple[float, ...]) -> tuple[float, Score]:
        """(most ratio - limit over the changed ratios, the score without its changes)
        with the trial diode of ``diff_area`` um^2 at pin ``pin`` (see ``trial_diode``),
        whose core form is made once per pin."""
        parts = self._trial_diodes.get(pin)
        if parts is None:
            whole = _pin_tuple(self.compiled, trial_diode(self.pins[pin], 0.0))
            parts = self._trial_diodes[pin] = (whole[:4], whole[5:])
        raw, over = self.net.score_excess(shapes, costs, [parts[0] + (diff_area,) + parts[1]])
        return over, self._score(raw, ())

    def _score(self, raw: tuple, extra_pins: Sequence[Pin]) -> Score:
        added, worst_change, worst, legal, breaks, cost, changes = raw
        names = self.compiled.layer_names
        area = {}
        for s, a in added:  # a loop, not a comprehension: no frame of its own (CPython 3.11)
            area[names[s]] = a
        return _new_score(area, self._changes(changes, extra_pins) if changes else (),
                          worst_change, worst, legal, breaks, cost)

    def _changes(self, rows: list[tuple], extra_pins: Sequence[Pin]) -> tuple[RatioChange, ...]:
        """The core's change rows as RatioChange objects, made as _new_score makes a
        Score (one step, not a field at a time), the lookups bound once per score: a
        detailed score has tens of rows and this is most of its Python cost."""
        names, oxides, pins = self.compiled.layer_names, self.compiled.oxides, self.pins
        held = len(pins)
        out = []
        for (step, measure, kind, oxide, ratio, limit, util, gate, has_before, before_ratio,
             before_util, room, has_length, length) in rows:
            change = _object_new(RatioChange)
            _set_attr(change, "__dict__", {
                "layer": names[step], "step": step, "measure": MEASURES[measure],
                "kind": KINDS[kind], "oxide": oxides[oxide],
                "gate": pins[gate].name if gate < held else extra_pins[gate - held].name,
                "before_ratio": before_ratio if has_before else None,
                "before_utilization": before_util if has_before else None,
                "ratio": ratio, "limit": limit, "utilization": util, "headroom_um2": room,
                "headroom_length_um": length if has_length else None})
            out.append(change)
        return tuple(out)

    def score_columns(self, layers: np.ndarray, rects: np.ndarray, counts: np.ndarray | None,
                      costs: tuple[float, ...]) -> BatchScores:
        n = rects.shape[0] if counts is None else len(counts)
        out = BatchScores(np.empty(n), np.empty(n), np.empty(n, dtype=bool), np.empty(n, dtype=bool),
                          np.empty(n), np.empty(n))
        self.net.score_batch(np.ascontiguousarray(layers, dtype=np.int32),
                             np.ascontiguousarray(rects, dtype=np.int64),
                             None if counts is None else np.ascontiguousarray(counts, dtype=np.int64),
                             costs, out.worst_change_utilization, out.worst_utilization,
                             out.legal.view(np.uint8), out.breaks_limit.view(np.uint8), out.cost,
                             out.added_area_um2)
        return out

    def score_columns_common(self, layers: np.ndarray, rects: np.ndarray, counts: np.ndarray,
                             common: CheckedCommon, costs: tuple[float, ...]) -> BatchScores:
        """As score_columns, candidate i being its shared part (common.part[i], -1 none)
        followed by its own rows."""
        n = len(counts)
        out = BatchScores(np.empty(n), np.empty(n), np.empty(n, dtype=bool), np.empty(n, dtype=bool),
                          np.empty(n), np.empty(n))
        self.net.score_batch_common(np.ascontiguousarray(layers, dtype=np.int32),
                                    np.ascontiguousarray(rects, dtype=np.int64),
                                    np.ascontiguousarray(counts, dtype=np.int64),
                                    np.ascontiguousarray(common.layers, dtype=np.int32),
                                    np.ascontiguousarray(common.rects, dtype=np.int64),
                                    np.ascontiguousarray(common.shape_count, dtype=np.int64),
                                    np.ascontiguousarray(common.part, dtype=np.int64),
                                    costs, out.worst_change_utilization, out.worst_utilization,
                                    out.legal.view(np.uint8), out.breaks_limit.view(np.uint8), out.cost,
                                    out.added_area_um2)
        return out

    def check(self, name: str) -> NetReport:
        worst, legal, checks = self.net.check()
        layers = self.deck.layers
        return NetReport(name, legal, worst, tuple(
            CheckResult(layers[s].name, s, MEASURES[m], KINDS[k], self.compiled.oxides[o], ratio, limit, util,
                        is_legal(util), self.pins[g].name)
            for s, m, k, o, ratio, limit, util, g in checks))

    def headroom(self, layer: int, x: int, y: int) -> Headroom:
        found, area, side, length, step, kind, measure, oxide, gate = self.net.headroom(layer, x, y)
        name = self.deck.layers[layer].name
        if not found:
            return Headroom(name, False, math.inf, math.inf, math.inf)
        binding = ""
        if step >= 0:
            what = f"{MEASURES[measure]} {self.compiled.oxides[oxide]}"
            binding = (f"{name} partial {what}" if KINDS[kind] is RatioKind.PARTIAL
                       else f"{self.deck.layers[step].name} cumulative {what} of {self.pins[gate].name}")
        return Headroom(name, True, area, side, length, binding)

    def budget(self, layer: int, x: int, y: int, common: Sequence[Shape], window: Rect,
               costs: CostModel) -> Budget:
        """The budget of the component at (x, y) on ``layer``, ``common`` taken as
        committed (see _budget)."""
        raw = self.net.budget(layer, x, y, [(s.layer,) + s.rect for s in common], window)
        found, terms, ratios, watches, rest, fixed, common_added, own, own_pins, foreign = raw
        layers, oxides = self.deck.layers, self.compiled.oxides
        return Budget(
            found, layers[layer].name, layer,
            tuple(BudgetTerm(MEASURES[m], oxides[o], a, per_area, per_perimeter, factor, credit, gate)
                  for m, o, a, per_area, per_perimeter, factor, credit, gate in terms),
            tuple(BudgetRatio(layers[s].name, s, MEASURES[m], KINDS[k], oxides[o], self.pins[g].name if g >= 0 else "",
                              limit, term if term >= 0 else None, spent, floor, always)
                  for s, m, k, o, limit, term, spent, floor, always, g in ratios),
            tuple(BudgetWatch(s, term if term >= 0 else None, spent, floor, held)
                  for s, term, spent, floor, held in watches),
            rest, fixed, common_added, tuple(own), tuple(own_pins), tuple(foreign), window, costs)

    # -- what repair advice asks (see _advice) ----------------------------------------

    def touching(self, layer: int, rect: Rect) -> list[tuple[int, int]]:
        return self.net.touching(layer, rect)

    def reaches_gate(self, element: int, step: int) -> bool:
        return self.net.reaches_gate(element, step)

    def near(self, layer: int, rect: Rect) -> list[Rect]:
        return self.net.near(layer, rect)

    def worst_at(self, step: int) -> float:
        return self.net.worst_at(step)

    def memory_bytes(self) -> int:
        return self.net.memory_bytes()


def _new_score(added: dict[str, float], changes: tuple[RatioChange, ...], worst_change: float,
               worst: float, legal: bool, breaks: bool, cost: float) -> Score:
    """A Score without its generated __init__: a frozen dataclass sets each field through
    object.__setattr__, which is a third of a what-if's Python cost; the fields are set
    here at once, in the dataclass's own order, and the object is the same."""
    score = _object_new(Score)
    _set_attr(score, "__dict__", {"added_area_um2": added, "changes": changes,
                                  "worst_change_utilization": worst_change, "worst_utilization": worst,
                                  "legal": legal, "breaks_limit": breaks, "cost": cost})
    return score


_object_new = object.__new__
_set_attr = object.__setattr__
_DEFAULT_COSTS = (0.7, 3.0, 10.0, 1.0e6, 1.0e3)  # CostModel() as a tuple
_NO_PINS: list[tuple] = []  # read by the binding, never changed
