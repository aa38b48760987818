"""What a LEF reader keeps: the technology and the cell library, as the files state them.

Values stay in the file's units (microns, um^2) and layer names stay names; mapping
onto the rule deck (``_lef_deck``) and onto placed pins (``_def_bind``) happens later,
once the database units of the design are known. Every record keeps the file:line it
came from, so that whatever is refused later can still name it.

Oxide classes: LEF names them ``ANTENNAMODEL OXIDE1..OXIDE4``. OXIDE1 (also the model
when none is named) is the deck's default class ``thin``; OXIDE2..4 are ``oxide2``..
``oxide4``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from ._kinds import LayerKind, Measure
from ._rules import DEFAULT_OXIDE

Table = tuple[tuple[float, float], ...]
RectUm = tuple[float, float, float, float]

OXIDES = {"OXIDE1": DEFAULT_OXIDE, "OXIDE2": "oxide2", "OXIDE3": "oxide3", "OXIDE4": "oxide4"}


@dataclass
class Located:
    """Where a statement was: file and line."""

    source: str
    line: int

    def __str__(self) -> str:
        return f"{self.source}:{self.line}"


@dataclass
class AntennaSet:
    """A layer's antenna statements under one ANTENNAMODEL, as given (later wins)."""

    ratio: dict[Measure, float] = field(default_factory=dict)
    diff_ratio: dict[Measure, Table] = field(default_factory=dict)
    cum_ratio: dict[Measure, float] = field(default_factory=dict)
    cum_diff_ratio: dict[Measure, Table] = field(default_factory=dict)
    factor: dict[Measure, tuple[float, bool]] = field(default_factory=dict)  # value, DIFFUSEONLY
    area_minus_diff: float | None = None
    gate_plus_diff: float | None = None
    diff_reduce: Table = ()
    cum_routing_plus_cut: bool = False
    at: dict[str, Located] = field(default_factory=dict)  # keyword -> where last given

    def has_limit(self, measure: Measure) -> bool:
        return any(measure in d for d in (self.ratio, self.diff_ratio, self.cum_ratio, self.cum_diff_ratio))


@dataclass
class LefLayer:
    name: str
    kind: LayerKind
    at: Located
    width: float | None = None  # um (routing: default wire width; cut: cut size)
    thickness: float | None = None  # um
    direction: str | None = None  # as written: HORIZONTAL, VERTICAL, DIAG45, DIAG135
    pitch: float | None = None
    spacing: float | None = None  # least plain SPACING, um
    enclosure: float | None = None  # cut layers: largest plain ENCLOSURE overhang, um
    antenna: dict[str, AntennaSet] = field(default_factory=dict)  # oxide class -> set
    at_keyword: dict[str, Located] = field(default_factory=dict)


@dataclass
class LefVia:
    """A fixed via (shapes per layer, um, about the via origin) or a generated one."""

    name: str
    at: Located
    default: bool = False
    shapes: dict[str, list[RectUm]] = field(default_factory=dict)
    generated: GeneratedVia | None = None


@dataclass
class GeneratedVia:
    """Parameters of a via made by a via rule (LEF ``VIA ... VIARULE`` or DEF VIAS)."""

    rule: str
    cut_size: tuple[float, float]
    layers: tuple[str, str, str]  # bottom metal, cut, top metal
    cut_spacing: tuple[float, float]
    enclosure: tuple[float, float, float, float]  # bottom x, y, top x, y
    rowcol: tuple[int, int] = (1, 1)
    origin: tuple[float, float] = (0.0, 0.0)
    offset: tuple[float, float, float, float] = (0.0, 0.0, 0.0, 0.0)
    pattern: str | None = None


@dataclass
class ViaRuleGenerate:
    """A VIARULE ... GENERATE: enough of it to size a default via of its cut layer."""

    name: str
    at: Located
    default: bool
    enclosures: dict[str, tuple[float, float]] = field(default_factory=dict)  # metal -> overhangs
    cut_rects: dict[str, RectUm] = field(default_factory=dict)  # cut layer -> cut


@dataclass
class PinAntenna:
    """A macro pin's (or DEF pin's) antenna statements."""

    gate_area: dict[str, float] = field(default_factory=dict)  # oxide class -> um^2
    gate_area_by_layer: dict[str, dict[str, float]] = field(default_factory=dict)  # oxide -> layer -> um^2
    diff_area: float | None = None
    diff_area_by_layer: dict[str, float] = field(default_factory=dict)
    partial: dict[tuple[Measure, str], float] = field(default_factory=dict)  # (measure, layer) -> um^2
    max_car: list[tuple[str, str, str, float]] = field(default_factory=list)  # keyword, oxide, layer, value
    at: dict[str, Located] = field(default_factory=dict)


@dataclass
class MacroPin:
    name: str
    at: Located
    direction: str | None = None
    use: str | None = None
    shapes: list[tuple[str, RectUm]] = field(default_factory=list)  # (layer, rect um)
    antenna: PinAntenna = field(default_factory=PinAntenna)


@dataclass
class Macro:
    name: str
    at: Located
    class_words: tuple[str, ...] = ()
    size: tuple[float, float] | None = None  # um
    origin: tuple[float, float] = (0.0, 0.0)  # um
    pins: dict[str, MacroPin] = field(default_factory=dict)

    @property
    def is_antenna_cell(self) -> bool:
        """CLASS CORE ANTENNACELL: a diode cell."""
        return self.class_words[:2] == ("CORE", "ANTENNACELL")


@dataclass
class Lef:
    """Everything read from one or more LEF files (technology first, then cells)."""

    dbu: int | None = None  # UNITS DATABASE MICRONS
    dbu_at: Located | None = None
    layers: list[LefLayer] = field(default_factory=list)  # routing and cut, process order
    other_layers: dict[str, str] = field(default_factory=dict)  # name -> TYPE (not modelled)
    vias: dict[str, LefVia] = field(default_factory=dict)
    via_rules: dict[str, ViaRuleGenerate] = field(default_factory=dict)
    ndr_widths: dict[str, dict[str, float]] = field(default_factory=dict)  # rule -> layer -> um
    macros: dict[str, Macro] = field(default_factory=dict)
    sources: list[str] = field(default_factory=list)

    def layer(self, name: str) -> LefLayer | None:
        for layer in self.layers:
            if layer.name == name:
                return layer
        return None

    @property
    def antenna_cells(self) -> list[Macro]:
        return [m for m in self.macros.values() if m.is_antenna_cell]
