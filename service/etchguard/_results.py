"""Plain result records the engine hands out (no behaviour, no gRPC)."""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

from ._kinds import Measure, RatioKind


def json_number(value: float) -> float | str:
    """A float as JSON can hold it: finite numbers as they are, the others as the strings
    the protobuf JSON mapping uses ("Infinity", "-Infinity", "NaN"); JSON has no literal
    for them (a gate area of 5e-324 makes a ratio overflow to infinity)."""
    if math.isfinite(value):
        return value
    if math.isnan(value):
        return "NaN"
    return "Infinity" if value > 0 else "-Infinity"


@dataclass(frozen=True)
class CheckResult:
    """The worst case of one checked quantity at one step over a net's components."""

    layer: str
    step: int
    measure: Measure
    kind: RatioKind
    oxide: str
    ratio: float
    limit: float
    utilization: float
    legal: bool
    gate: str = ""  # pin name of (one of) the gate(s) seeing the worst case


@dataclass(frozen=True)
class NetReport:
    name: str
    legal: bool
    worst_utilization: float
    checks: tuple[CheckResult, ...]

    def as_dict(self) -> dict[str, object]:
        """The report as JSON values, with the field names of the API's ``NetReport``."""
        return {"net": self.name, "legal": self.legal, "worst_utilization": json_number(self.worst_utilization),
                "checks": [check_dict(c) for c in self.checks]}


# The API's ``Check`` fields, in its order: every output of a check (check --json,
# report JSON and CSV) writes these names.
CHECK_FIELDS = tuple(f.name for f in fields(CheckResult))


def check_dict(c: CheckResult) -> dict[str, object]:
    """One check as JSON values (the one serializer of a check record)."""
    return {name: json_number(v) if isinstance(v, float) else v
            for name, v in ((name, getattr(c, name)) for name in CHECK_FIELDS)}


@dataclass(frozen=True)
class RatioChange:
    """One ratio a candidate changes, before and after, on the component it joins."""

    layer: str
    step: int
    measure: Measure
    kind: RatioKind
    oxide: str
    gate: str  # the gate pin with the worst ratio after
    before_ratio: float | None  # None when no gate-connected component was there
    before_utilization: float | None
    ratio: float
    limit: float
    utilization: float
    headroom_um2: float  # conductor (um^2 of the measure) still allowed on this layer
    headroom_length_um: float | None  # the same as run length at the layer's default width


@dataclass(frozen=True)
class Score:
    """What a candidate would do if committed. Computing it changes nothing."""

    added_area_um2: dict[str, float]  # exact union area added, per layer name
    changes: tuple[RatioChange, ...]
    worst_change_utilization: float  # worst utilization among the changed ratios
    worst_utilization: float  # the whole net's worst after the candidate
    legal: bool  # the whole net legal after the candidate
    breaks_limit: bool  # a changed ratio goes over its limit
    cost: float  # router cost from worst_change_utilization (see CostModel)


@dataclass(frozen=True)
class Headroom:
    """How much more conductor the component at a point may take on its layer."""

    layer: str
    found: bool  # False when nothing of the net lies on the layer at the point
    area_um2: float  # remaining area (area rules); inf when unconstrained
    side_um2: float  # remaining side-wall area (side rules); inf when unconstrained
    length_um: float  # remaining run length at the layer's default width
    binding: str = ""  # which check binds, e.g. "M3 cumulative area thin of u1.a"
