"""A held net as repair advice and the report read it: the ``NetView`` protocol
(``_netview``) answered by the compiled core.

Made under the net's lock for one call and not kept. Shape indices in offences are
positions in commit order (the report draws a spec whose shapes are in that order).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

from ._corenet import KINDS, MEASURES, CompiledDeck, CoreNet, compile_deck
from ._costs import CostModel
from ._errors import InputError
from ._geometry import Rect
from ._nets import NetSpec, Pin, Shape
from ._netview import Offence
from ._results import NetReport, Score
from ._rules import Deck

# Ids for shapes committed only for the length of one question (pin_diffusion): far
# above any id the engine hands out (it counts from 1).
_PROBE_IDS = 1 << 62


class CoreView:
    """``NetView`` over a net's core state."""

    def __init__(self, name: str, core: CoreNet, costs: CostModel) -> None:
        self.name, self.core, self.costs = name, core, costs.as_tuple()
        self.deck = core.deck
        self.pins = core.pins

    def score(self, shapes: Sequence[Shape], detail: bool = True, extra_pins: Sequence[Pin] = ()) -> Score:
        if not shapes and not extra_pins:
            raise InputError("a what-if needs a shape or a pin", "shapes")
        return self.core.score(shapes, detail, extra_pins, self.costs)

    def diode_excess(self, shapes: Sequence[Shape], pin: int, diff_area: float) -> tuple[float, Score]:
        if not shapes:
            raise InputError("a trial diode is tried with the run's shapes", "shapes")
        return self.core.diode_excess(shapes, pin, diff_area, self.costs)

    def touching(self, layer: int, rect: Rect) -> list[tuple[int, int]]:
        return self.core.touching(layer, rect)

    def reaches_gate(self, element: int, step: int) -> bool:
        return self.core.reaches_gate(element, step)

    def near(self, layer: int, rect: Rect) -> list[Rect]:
        return self.core.near(layer, rect)

    def pin_diffusion(self, pin: int, shapes: Sequence[Shape] = ()) -> list[float | None]:
        # Committed and removed again around the question: a removal restores every
        # figure to the bit (exact sums), and the caller holds the net's lock.
        ids = list(range(_PROBE_IDS, _PROBE_IDS + len(shapes)))
        self.core.add(ids, shapes)
        try:
            values = self.core.net.pin_diffusion(pin)
        finally:
            if ids:
                self.core.remove(ids)
        return [None if math.isnan(v) else v for v in values]

    def element(self, element: int) -> tuple[int, Rect, int]:
        """(layer, rectangle, shape id) of an element ``touching`` named; a pin
        rectangle's shape id is -1 - its pin index. For tests and diagnostics."""
        return self.core.net.element(element)

    def worst_at(self, step: int) -> float:
        return self.core.worst_at(step)

    def check(self) -> NetReport:
        return self.core.check(self.name)

    def offences(self) -> list[Offence]:
        position = {row[0]: i for i, row in enumerate(self.core.shape_rows())}
        oxides = self.core.compiled.oxides
        return [Offence(s, MEASURES[m], KINDS[k], oxides[o], ratio, limit, util, gate,
                        tuple(sorted(position[x] for x in shape_ids)), tuple(pins))
                for s, m, k, o, ratio, limit, util, gate, shape_ids, pins in self.core.net.offences()]


def spec_views(deck: Deck | CompiledDeck) -> Callable[[NetSpec], CoreView]:
    """Views of nets given as specifications (shapes committed in spec order), for the
    report; the deck is compiled once."""
    compiled = deck if isinstance(deck, CompiledDeck) else compile_deck(deck)
    costs = CostModel()

    def open_view(spec: NetSpec) -> CoreView:
        core = CoreNet(compiled, spec.pins)
        core.add(list(range(1, len(spec.shapes) + 1)), spec.shapes)
        return CoreView(spec.name, core, costs)

    return open_view
