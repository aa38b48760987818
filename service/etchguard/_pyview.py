"""``NetView`` (see ``_netview``) over the pure-Python net state, until the core holds it.

The one module that reads ``NetState`` and ``Assessment`` on behalf of advice and the
report. Questions about the net as held are answered from the incremental state.
A what-if with extra pins, and a pin's diffusion after candidate shapes, are
answered by building a fresh state with everything added and comparing it with the
held one, component by component: slow but exact, because a fresh build gives the
same figures as an incremental one (integer areas, exactly rounded pin sums). The
diode search asks for the same shapes and pin with one diffusion after another, so
the last build is kept and only the pin's diffusion term is replaced in the
components holding it (a pin sum is the exactly rounded sum of the multiset of pin
terms, so the figures equal a fresh build's).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

from ._assess import Assessment
from ._errors import InputError
from ._geometry import Rect
from ._netstate import NetState
from ._netview import Offence
from ._nets import NetSpec, Pin, Shape
from ._ratios import StepModel, is_legal
from ._reports import NetReport, RatioChange, Score
from ._rules import Deck
from ._whatif import CostModel, _change, score


class PyNetView:
    """A view of one net's held state (the caller holds the net's lock while using it)."""

    def __init__(self, name: str, state: NetState, assessment: Assessment, costs: CostModel) -> None:
        self.name = name
        self.state, self.assessment, self.costs = state, assessment, costs
        self.deck: Deck = state.model.deck
        self.pins: tuple[Pin, ...] = tuple(state.pins)
        self._last: tuple[object, list[Pin], NetState, set[int]] | None = None  # see _built_with_pins

    # -- what-if --------------------------------------------------------------------

    def score(self, shapes: Sequence[Shape], detail: bool = True,
              extra_pins: Sequence[Pin] = ()) -> Score:
        if not extra_pins:
            if not shapes:
                raise InputError("a what-if needs at least one shape or pin", "shapes")
            return score(self.state, self.assessment, list(shapes), self.costs, detail)
        return self._score_with_pins(list(shapes), detail, list(extra_pins))

    def _built_with(self, shapes: list[Shape], extra_pins: list[Pin]) -> tuple[NetState, set[int]]:
        """A fresh state of the net plus ``shapes`` and ``extra_pins`` (held shapes keep
        their ids, held pins their elements), and the elements that are new."""
        held = self.state
        after = NetState(held.model, list(held.pins) + extra_pins)
        for sid in sorted(held.shape_ids):
            after.add_shape(sid, held.layer_of[sid], held.rect_of[sid])
        first = max(held.shape_ids, default=0) + 1
        for k, s in enumerate(shapes):
            after.add_shape(first + k, s.layer, s.rect)
        new = set(range(first, first + len(shapes)))
        new.update(e for e, p in after.pin_of.items() if p >= len(held.pins))
        return after, new

    def _built_with_pins(self, shapes: list[Shape], extra_pins: list[Pin]) -> tuple[NetState, set[int]]:
        """``_built_with``, reusing the last build when only the extra pins' diffusion
        differs (see the module docstring)."""
        key = (tuple(shapes), tuple((p.name, p.layer, p.rects, tuple(sorted(p.gate_area.items())),
                                     tuple(sorted(p.cell_area.items()))) for p in extra_pins))
        if self._last is None or self._last[0] != key:
            after, new = self._built_with(shapes, extra_pins)
            self._last = (key, list(extra_pins), after, new)
            return after, new
        _key, built_pins, after, new = self._last
        first = len(self.state.pins)
        for k, (old, pin) in enumerate(zip(built_pins, extra_pins)):
            if old.diff_area == pin.diff_area:
                continue
            anchor = after.anchor_of_pin[first + k]
            for s in range(pin.layer, after.model.steps):
                comp = after.comp_at[s][anchor]
                held_term = (old.total_gate_area, old.diff_area, old.cell_area.get(s, 0.0), old.gate_area)
                comp.terms[comp.terms.index(held_term)] = (pin.total_gate_area, pin.diff_area,
                                                           pin.cell_area.get(s, 0.0), pin.gate_area)
                comp._sum_terms()
            after.pins[first + k] = built_pins[k] = pin
        return after, new

    def _score_with_pins(self, shapes: list[Shape], detail: bool, extra_pins: list[Pin]) -> Score:
        held, model = self.state, self.state.model
        after, new = self._built_with_pins(shapes, extra_pins)
        judged = Assessment(after)
        new_pins = {e for e in new if e in after.pin_of}
        changes: list[RatioChange] = []
        worst_change = 0.0
        for s in range(model.steps):
            held_at = held.comp_at[s]
            found: list[RatioChange] = []
            for comp in after.comps[s]:
                if comp.gate <= 0 or not comp.members & new:
                    continue
                olds = {held_at[m] for m in comp.members if m in held_at}
                # partial figures change only where the component itself does at this
                # step; below that only its gates' cumulative sums move (as in _whatif)
                changed_here = len(olds) != 1 or any(
                    m in new_pins or after.layer_of[m] == s for m in comp.members & new)
                before = [e for c in olds for e in self.assessment.entries[s].get(c, ())]
                for e in judged.entries[s].get(comp, ()):
                    if e.kind == "partial" and not changed_here:
                        continue
                    worst_change = max(worst_change, e.utilization)
                    if detail:
                        change = _change(after, e, before, len(olds) == 1)
                        if change is not None:
                            found.append(change)
            found.sort(key=lambda c: (-c.utilization, c.measure, c.kind, c.oxide, c.gate))
            changes.extend(found)
        added: dict[str, float] = {}
        for s in sorted({c.layer for c in shapes}):
            grown = sum(c.area for c in after.comps[s]) - sum(c.area for c in held.comps[s])
            added[self.deck.layers[s].name] = grown * model.scale_area
        worst = max(judged.step_worst, default=0.0)
        return Score(added, tuple(changes), worst_change, worst, is_legal(worst),
                     not is_legal(worst_change), self.costs.cost(worst_change))

    def pin_diffusion(self, pin: int, shapes: Sequence[Shape] = ()) -> list[float | None]:
        state = self._built_with(list(shapes), [])[0] if shapes else self.state
        lowest = self.pins[pin].layer
        return [state.comp_of_pin(pin, s).diff if s >= lowest else None  # type: ignore[union-attr]
                for s in range(state.model.steps)]

    # -- the net as held ------------------------------------------------------------

    def touching(self, layer: int, rect: Rect) -> list[tuple[int, int]]:
        return self.state.touching(layer, rect)

    def reaches_gate(self, element: int, step: int) -> bool:
        return self.state.comp_at[step][element].gate > 0

    def near(self, layer: int, rect: Rect) -> list[Rect]:
        return [r for _e, r in self.state.index[layer].near(rect)
                if r[0] <= rect[2] and rect[0] <= r[2] and r[1] <= rect[3] and rect[1] <= r[3]]

    def worst_at(self, step: int) -> float:
        return self.assessment.step_worst[step]

    def check(self) -> NetReport:
        return self.assessment.report(self.name, self.state)

    def offences(self) -> list[Offence]:
        state = self.state
        index_of = {sid: i for i, sid in enumerate(sorted(state.shape_ids))}  # ids grow with commits
        out: list[Offence] = []
        for step, per_comp in enumerate(self.assessment.entries):
            for comp, entries in per_comp.items():
                failing = [e for e in entries if not is_legal(e.utilization)]
                if not failing:
                    continue
                shapes = tuple(sorted(index_of[m] for m in comp.members if m > 0))
                pins = tuple(sorted({state.pin_of[m] for m in comp.members if m < 0}))
                out.extend(Offence(step, e.measure, e.kind, e.oxide, e.ratio, e.limit, e.utilization,
                                   e.gate, shapes, pins) for e in failing)
        return out


def spec_views(deck: Deck) -> Callable[[NetSpec], PyNetView]:
    """Views of nets given as specifications (shapes committed in spec order), for the
    report; the deck's per-step tables are built once."""
    model = StepModel(deck)
    costs = CostModel()

    def open_view(spec: NetSpec) -> PyNetView:
        state = NetState(model, spec.pins)
        for i, shape in enumerate(spec.shapes):
            state.add_shape(i + 1, shape.layer, shape.rect)
        return PyNetView(spec.name, state, Assessment(state), costs)

    return open_view
