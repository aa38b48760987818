"""The narrow per-net view that repair advice and the report read a net through.

Advice (``_advice``) and the report's offending components (``_report``) ask a net
only these questions, so they do not depend on how net state is held: an
implementation needs the net's components at every step (with their union areas,
pin sums and member lists), per-gate cumulative sums, a per-layer lookup of the
net's rectangles and the what-if. Everything is read under the net's lock; a view
is not kept past the call it was made for.

Definitions are the contract's (the project's antenna model); an element is a pin rectangle
or a held shape, named by an opaque integer that only ``touching`` hands out and
only ``reaches_gate`` takes back.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Protocol

from ._geometry import Rect
from ._kinds import Measure, RatioKind
from ._nets import Pin, Shape
from ._results import NetReport, Score
from ._rules import Deck


@dataclass(frozen=True)
class Offence:
    """One failing check on one component at one step, with what the component holds."""

    step: int
    measure: Measure
    kind: RatioKind
    oxide: str
    ratio: float
    limit: float
    utilization: float  # not legal: above 1 + the contract's tolerance
    gate: int  # pin index of the gate with this (worst) ratio in the component
    shapes: tuple[int, ...]  # the component's shapes at the step: indices in commit order, sorted
    pins: tuple[int, ...]  # the component's pins at the step: pin indices, sorted


class NetView(Protocol):
    """One net as advice and the report see it (see the module docstring). A view is
    made with the engine's cost model; ``Score.cost`` comes from it."""

    deck: Deck  # the loaded deck
    pins: tuple[Pin, ...]  # the net's pins; a pin's index here is its index everywhere

    def score(self, shapes: Sequence[Shape], detail: bool = True,
              extra_pins: Sequence[Pin] = ()) -> Score:
        """What committing ``shapes`` and adding ``extra_pins`` would do; changes nothing.

        Equal to a full check after doing so: ``worst_utilization`` and ``legal`` cover
        every check of the net. A pin in ``extra_pins`` is given as the net would hold
        it (a trial diode at gate pin g: g's layer and rectangles, diff_area D, no gate
        area, no in-cell area). ``shapes`` may be empty when ``extra_pins`` is not (both
        empty: ``InputError`` on field "shapes").
        With ``detail``, ``changes`` lists every ratio of a component that holds a new
        shape or pin (or merges components) whose value or limit differs from the net
        as held, or whose component is a merge of several; ``before_*`` are the worst
        of those components' figures as held. ``worst_change_utilization`` and ``cost``
        are over the components holding a new shape or pin, as today's what-if has them.
        """
        ...

    def diode_excess(self, shapes: Sequence[Shape], pin: int, diff_area: float) -> tuple[float, Score]:
        """For the trial diode d of ``diff_area`` um^2 at pin ``pin`` (``trial_diode``:
        the pin's layer and lowest rectangles, that diffusion, nothing else), the most
        by which a changed ratio of ``score(shapes, True, [d])`` exceeds its limit
        (ratio - limit; -inf when nothing changes), with that score's verdict and
        figures but without its list of changes: the diode search's question, asked of
        every trial diode; ``shapes`` not empty."""
        ...

    def touching(self, layer: int, rect: Rect) -> list[tuple[int, int]]:
        """Elements that connect to ``rect`` on ``layer`` by the contract's contact rules
        (same layer: a shared area or edge segment; a cut and a routing layer next to
        each other: a shared area), each with the step from which the contact exists."""
        ...

    def reaches_gate(self, element: int, step: int) -> bool:
        """Whether the component holding ``element`` at ``step`` has gate area (the
        element must exist at that step: its layer <= step)."""
        ...

    def near(self, layer: int, rect: Rect) -> list[Rect]:
        """The net's own rectangles on ``layer`` (pin rectangles and shapes) whose closed
        rectangle meets the closed ``rect``, in no particular order."""
        ...

    def pin_diffusion(self, pin: int, shapes: Sequence[Shape] = ()) -> list[float | None]:
        """Per step: the diffusion area (um^2) of the component holding ``pin`` once
        ``shapes`` are committed (nothing is committed); None at steps below the pin's
        layer. The diode search needs it for the breakpoints of the diode tables."""
        ...

    def worst_at(self, step: int) -> float:
        """The net's worst utilization at ``step``, as held (0.0 without a check)."""
        ...

    def check(self) -> NetReport:
        """The net's report as held: the worst case per (step, measure, kind, oxide)."""
        ...

    def offences(self) -> list[Offence]:
        """Every failing check of every gate-connected component at every step, as held,
        each with the component's member shapes and pins; in no particular order."""
        ...


def trial_diode(gate: Pin, diff_area: float) -> Pin:
    """The diode advice tries at a gate pin: a pin on the gate's layer with the gate's
    rectangles there, ``diff_area`` um^2 of diffusion and nothing else."""
    return Pin(f"{gate.name} (trial diode)", gate.layer, gate.lowest_rects(), {}, diff_area, {})
