"""A component's budget: every ratio an addition to it on one layer changes, as
coefficients a router evaluates itself.

For the component R holding a point on layer L (the net taken with ``common`` shapes
committed, e.g. a search's partial path), an addition X on L that touches nothing of
the net but R changes only R's conductor on L: A' = A + per_area * a + per_perimeter * p
for an added union area a (um^2) and perimeter p (um). Each ``BudgetTerm`` is R's term
at L for one (measure, oxide), ``max(0, factor * A' - credit) / gate`` (affine in a and p
while above 0; the contract's PAR formula with the rule's factors); each
``BudgetRatio`` is ``max(floor, spent + term)`` (or its floor where X does not reach
it), a partial ratio at L or a cumulative ratio at a step whose feeding chain passes
through L. The candidate common + X gets from the service exactly:

* worst_change_utilization = max(fixed_change_utilization, the utilizations of the
  ratios that count: ``always``, or a ``BudgetWatch`` at their step moved off its held
  value (R's best cumulative ratio of some (measure, oxide) there moved; a term feeding
  the step may move while the best belongs to a gate X does not reach, and then the
  service's score counts nothing there);
* worst_utilization = max(rest_worst_utilization, every ratio's utilization);
* cost = the cost curve at worst_change_utilization; added area = common's + a.

``own``/``own_pins`` (R's routed and pin rectangles on L) and ``foreign`` (every other
element of the net a shape on L would touch, with its layer) tell a client which
candidates are covered and what they add (see ``_budgetlocal``). The computation is
the core's (``core/src/budget.cpp``).
"""

from __future__ import annotations

from dataclasses import dataclass

from ._costs import CostModel
from ._geometry import Rect
from ._kinds import Measure, RatioKind


@dataclass(frozen=True)
class BudgetTerm:
    """R's term at the budget's layer for one (measure, oxide)."""

    measure: Measure
    oxide: str
    conductor_um2: float  # A now (side: side-wall um^2)
    per_area: float  # dA per um^2 of added area
    per_perimeter_um: float  # dA per um of added perimeter
    factor: float  # f * r(D)
    credit_um2: float  # k_credit * D
    gate_um2: float  # G + k_gate * D

    def value(self, added_area_um2: float = 0.0, added_perimeter_um: float = 0.0) -> float:
        conductor = self.conductor_um2 + self.per_area * added_area_um2 + self.per_perimeter_um * added_perimeter_um
        return max(0.0, self.factor * conductor - self.credit_um2) / self.gate_um2


def _reached(term: int | None, spent: float, floor: float, terms: tuple[BudgetTerm, ...], added_area_um2: float,
             added_perimeter_um: float) -> float:
    """``max(floor, spent + terms[term])`` for an addition (the floor without a term)."""
    if term is None:
        return floor
    return max(floor, spent + terms[term].value(added_area_um2, added_perimeter_um))


@dataclass(frozen=True)
class BudgetRatio:
    """One ratio the addition may change: ``max(floor, spent + terms[term])``."""

    layer: str
    step: int
    measure: Measure
    kind: RatioKind
    oxide: str
    gate: str  # the gate with this ratio now
    limit: float
    term: int | None  # index into Budget.terms; None: the addition does not change it
    spent: float  # the other steps' sum
    floor: float  # other gates of the component (-inf: none)
    always: bool  # a change of every candidate (else when a watch at its step moves)

    def value(self, terms: tuple[BudgetTerm, ...], added_area_um2: float = 0.0,
              added_perimeter_um: float = 0.0) -> float:
        return _reached(self.term, self.spent, self.floor, terms, added_area_um2, added_perimeter_um)


@dataclass(frozen=True)
class BudgetWatch:
    """The component's best cumulative ratio at a step for one (measure, oxide): the
    step's ratios count as changes when ``value`` differs from ``held`` (the best in the
    net as held), as the service's score counts them."""

    step: int
    term: int | None  # index into Budget.terms; None: the addition does not change it
    spent: float
    floor: float  # gates the addition does not reach (-inf: none)
    held: float  # compared exactly

    def value(self, terms: tuple[BudgetTerm, ...], added_area_um2: float = 0.0,
              added_perimeter_um: float = 0.0) -> float:
        return _reached(self.term, self.spent, self.floor, terms, added_area_um2, added_perimeter_um)


@dataclass(frozen=True)
class Budget:
    found: bool  # False: nothing of the net (or common) lies on the layer at the point
    layer: str
    step: int
    terms: tuple[BudgetTerm, ...]
    ratios: tuple[BudgetRatio, ...]
    watches: tuple[BudgetWatch, ...]
    rest_worst_utilization: float
    fixed_change_utilization: float
    common_added_area_um2: float
    own: tuple[Rect, ...]
    own_pins: tuple[Rect, ...]
    foreign: tuple[tuple[int, Rect], ...]  # (step, rect)
    window: Rect
    costs: CostModel
