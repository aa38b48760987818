"""The router cost model: what a candidate costs from the worst utilization it leads to."""

from __future__ import annotations

from dataclasses import dataclass

from . import _core


@dataclass(frozen=True)
class CostModel:
    """Router cost of a candidate from the worst utilization u it leads to.

    ``0`` for u <= knee; ``scale * ((u - knee) / (1 - knee)) ** exponent`` up to the
    limit (so 0 -> scale, rising steeply near 1); above the limit
    ``violation + scale * over_slope * (u - 1)``, large enough to dominate any wire cost.
    The core computes it (one implementation); this record carries the settings.
    """

    knee: float = 0.7
    exponent: float = 3.0
    scale: float = 10.0
    violation: float = 1.0e6
    over_slope: float = 1.0e3

    def as_tuple(self) -> tuple[float, float, float, float, float]:
        return (self.knee, self.exponent, self.scale, self.violation, self.over_slope)

    def cost(self, u: float) -> float:
        return _core.cost(self.as_tuple(), u)
