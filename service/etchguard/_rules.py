"""The rule deck: process layers in process order and the antenna rules on them.

Loaded from the TOML format of the antenna model contract. Validation is strict:
an unknown key, a layer out of order, a cut layer that is not between two routing
layers, a rule on an unknown layer, a side-wall rule on a cut layer, non-increasing
diode-table points, negative values and a ``cumulative_plus_cut`` that is not a boolean
are each refused with a ``DeckError`` naming the file, the entry and the field.

The deck also answers which step feeds a step's cumulative ratio
(``Deck.feeding_step``), the chain of the contract's "Ratios and limits".
"""

from __future__ import annotations

import math
import re
import tomllib
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, NoReturn

from ._errors import DeckError
from ._kinds import LayerKind, Measure
from ._names import MAX_NAME_BYTES, byte_length, shown
from ._textfile import read_text

ROUTING = LayerKind.ROUTING
CUT = LayerKind.CUT
MEASURES = tuple(Measure)
DEFAULT_OXIDE = "thin"

_PROCESS_KEYS = {"name", "dbu_per_micron", "cumulative_includes_cuts"}
_LAYER_KEYS = {"name", "kind", "direction", "thickness_um", "wire_width", "spacing",
               "cut_size", "enclosure", "cumulative_plus_cut"}
_ROUTING_ONLY = {"direction", "thickness_um", "wire_width", "spacing"}
_CUT_ONLY = {"cut_size", "enclosure"}
_RULE_KEYS = {"layer", "oxide", "measure", "partial_max", "cumulative_max", "area_factor",
              "factor_with_diode_only", "diode_partial_max", "diode_cumulative_max",
              "diode_gate_factor", "diode_area_credit", "diode_area_reduction"}

Table = tuple[tuple[float, float], ...]


@dataclass(frozen=True)
class Layer:
    """One process layer; ``index`` is its process step (0 = bottom).

    ``cumulative_plus_cut`` is the layer's own flag as the deck gives it; the process-wide
    ``cumulative_includes_cuts`` is applied on top of it by ``Deck.feeding_step``.
    """

    name: str
    index: int
    kind: LayerKind
    direction: str | None = None
    thickness_um: float | None = None
    wire_width: int | None = None
    spacing: int | None = None
    cut_size: int | None = None
    enclosure: int | None = None
    cumulative_plus_cut: bool = False

    @property
    def is_routing(self) -> bool:
        return self.kind == ROUTING


def table_value(table: Table, x: float) -> float:
    """Piecewise-linear value at x, held constant beyond the first and last point."""
    if x <= table[0][0]:
        return table[0][1]
    for (x0, y0), (x1, y1) in zip(table, table[1:]):
        if x <= x1:
            return y0 + (y1 - y0) * (x - x0) / (x1 - x0)
    return table[-1][1]


@dataclass(frozen=True)
class Rule:
    """An antenna rule for one (layer, oxide, measure)."""

    layer: str
    step: int
    oxide: str
    measure: Measure
    partial_max: float | None
    cumulative_max: float | None
    area_factor: float = 1.0
    factor_with_diode_only: bool = False
    diode_partial_max: Table = ()
    diode_cumulative_max: Table = ()
    diode_gate_factor: float = 0.0
    diode_area_credit: float = 0.0
    diode_area_reduction: Table = ()  # (D um^2, factor r); empty: r = 1

    @property
    def has_partial(self) -> bool:
        return self.partial_max is not None or bool(self.diode_partial_max)

    @property
    def has_cumulative(self) -> bool:
        return self.cumulative_max is not None or bool(self.diode_cumulative_max)

    def area_reduction(self, diff_um2: float) -> float:
        """r(D): the reduction table at D (read at every D, 0 included), 1 without one."""
        if not self.diode_area_reduction:
            return 1.0
        return table_value(self.diode_area_reduction, diff_um2)

    def ratio(self, conductor: float, gate_um2: float, diff_um2: float) -> float:
        """Effective ratio: max(0, f*r(D)*A - k_credit*D) / (G + k_gate*D)."""
        factor = self.area_factor
        if self.factor_with_diode_only and diff_um2 <= 0:
            factor = 1.0
        reduced = factor * self.area_reduction(diff_um2) * conductor
        a_eff = max(0.0, reduced - self.diode_area_credit * diff_um2)
        return a_eff / (gate_um2 + self.diode_gate_factor * diff_um2)


@dataclass(frozen=True)
class Deck:
    """A loaded rule deck. Layers are in process order; a layer's index is its step."""

    name: str
    dbu_per_micron: int
    cumulative_includes_cuts: bool
    layers: tuple[Layer, ...]
    rules: tuple[Rule, ...]
    source: str = "<deck>"
    layer_index: dict[str, int] = field(init=False, repr=False, compare=False)
    _by_key: dict[tuple[int, str, str], Rule] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "layer_index", {l.name: l.index for l in self.layers})
        object.__setattr__(self, "_by_key", {(r.step, r.measure, r.oxide): r for r in self.rules})

    def rule(self, step: int, measure: Measure, oxide: str) -> Rule | None:
        return self._by_key.get((step, measure, oxide))

    @property
    def oxides(self) -> tuple[str, ...]:
        return tuple(sorted({r.oxide for r in self.rules}))

    def plus_cut(self, step: int) -> bool:
        """Whether the step directly below feeds ``step``'s area sum, whatever its kind."""
        return self.cumulative_includes_cuts or self.layers[step].cumulative_plus_cut

    def feeding_step(self, step: int, measure: Measure) -> int | None:
        """The step p with CAR_step = PAR_step + CAR_p (the contract), None below the first.

        Side measure: the nearest lower routing step. Area measure: the step directly
        below when ``plus_cut(step)``, else the nearest lower step of the same kind.
        """
        if measure not in MEASURES:
            raise ValueError(f"unknown measure {measure!r} (one of {', '.join(MEASURES)})")
        if measure == Measure.SIDE:
            wanted = ROUTING
        elif self.plus_cut(step):
            return step - 1 if step > 0 else None
        else:
            wanted = self.layers[step].kind
        for lower in range(step - 1, -1, -1):
            if self.layers[lower].kind == wanted:
                return lower
        return None

    def layer(self, name: str) -> Layer:
        return self.layers[self.layer_index[name]]


class _Reader:
    """Typed field access that names file, entry and field on every refusal."""

    def __init__(self, source: str, entry: str, table: Any, allowed: set[str]) -> None:
        self.source, self.entry = source, entry
        if not isinstance(table, dict):
            self.fail(None, "must be a table")
        self.table = table
        for key in table:
            if key not in allowed:
                self.fail(key, f"unknown key (allowed: {', '.join(sorted(allowed))})")

    def fail(self, key: str | None, message: str) -> NoReturn:
        where = self.entry if key is None else f"{self.entry}.{key}"
        raise DeckError(message, f"{self.source}: {where}")

    def has(self, key: str) -> bool:
        return key in self.table

    def text(self, key: str, default: str | None = None, choices: tuple[str, ...] = ()) -> str:
        if key not in self.table:
            if default is None:
                self.fail(key, "is required")
            return default
        value = self.table[key]
        if not isinstance(value, str) or not value:
            self.fail(key, f"must be a non-empty string, got {shown(value)}")
        if choices and value not in choices:
            self.fail(key, f"must be one of {', '.join(choices)}, got {shown(value)}")
        return value

    def name(self, key: str, default: str | None = None) -> str:
        """A name (process, layer, oxide class): text within MAX_NAME_BYTES."""
        value = self.text(key, default)
        if byte_length(value) > MAX_NAME_BYTES:
            self.fail(key, f"a name of {byte_length(value)} bytes is longer than the limit of "
                           f"{MAX_NAME_BYTES} bytes (UTF-8): {shown(value)}")
        return value

    def number(self, key: str, default: float | None = None, positive: bool = False) -> float | None:
        if key not in self.table:
            return default
        value = self.table[key]
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            self.fail(key, f"must be a finite number, got {value!r}")
        if value < 0 or (positive and value == 0):
            self.fail(key, f"must be {'positive' if positive else 'non-negative'}, got {value!r}")
        return float(value)

    def integer(self, key: str, default: int | None = None, positive: bool = False) -> int | None:
        if key not in self.table:
            return default
        value = self.table[key]
        if isinstance(value, bool) or not isinstance(value, int):
            self.fail(key, f"must be an integer (DBU), got {value!r}")
        if value < 0 or (positive and value == 0):
            self.fail(key, f"must be {'positive' if positive else 'non-negative'}, got {value!r}")
        return value

    def flag(self, key: str, default: bool = False) -> bool:
        value = self.table.get(key, default)
        if not isinstance(value, bool):
            self.fail(key, f"must be true or false, got {value!r}")
        return value

    def table_points(self, key: str, value_name: str = "max ratio") -> Table:
        if key not in self.table:
            return ()
        raw = self.table[key]
        if not isinstance(raw, list) or not raw:
            self.fail(key, f"must be a non-empty list of [diffusion um^2, {value_name}] points")
        points: list[tuple[float, float]] = []
        for i, point in enumerate(raw):
            if (not isinstance(point, list) or len(point) != 2
                    or any(isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v)
                           for v in point)):
                self.fail(f"{key}[{i}]", f"must be a pair of finite numbers, got {point!r}")
            if point[0] < 0 or point[1] < 0:
                self.fail(f"{key}[{i}]", f"values must be non-negative, got {point!r}")
            if points and point[0] <= points[-1][0]:
                self.fail(f"{key}[{i}]", "diffusion areas must be strictly increasing")
            points.append((float(point[0]), float(point[1])))
        return tuple(points)


def parse_deck(data: dict[str, Any], source: str = "<deck>") -> Deck:
    """Build a Deck from parsed TOML, validating every entry."""
    top = _Reader(source, "deck", data, {"process", "layers", "rules"})
    if not top.has("process"):
        top.fail("process", "is required")
    errors: list[DeckError] = []
    name, dbu, includes_cuts = "", 0, False
    with _collected(errors):
        name, dbu, includes_cuts = _process(source, data["process"])
    raw_layers = data.get("layers")
    if not isinstance(raw_layers, list) or not raw_layers:
        with _collected(errors):
            top.fail("layers", "must list at least one layer, bottom-up")
        raise DeckErrors(errors)
    layers: list[Layer] = []
    seen: set[str] = set()
    for i, raw in enumerate(raw_layers):
        with _collected(errors):
            layers.append(_layer(source, i, raw, seen))
    if errors:  # the layers' order and the rules need every layer
        raise DeckErrors(errors)
    _check_layer_order(source, layers)
    raw_rules = data.get("rules", [])
    if not isinstance(raw_rules, list):
        top.fail("rules", "must be an array of tables ([[rules]])")
    index = {l.name: l.index for l in layers}
    rules: list[Rule] = []
    keys: set[tuple[int, str, str]] = set()
    for i, raw in enumerate(raw_rules):
        with _collected(errors):
            rules.append(_rule(source, i, raw, layers, index, keys))
    if errors:
        raise DeckErrors(errors)
    return Deck(name, dbu, includes_cuts, tuple(layers), tuple(rules), source)


def _process(source: str, raw: Any) -> tuple[str, int, bool]:
    process = _Reader(source, "process", raw, _PROCESS_KEYS)
    name = process.name("name")
    dbu = process.integer("dbu_per_micron", positive=True)
    if dbu is None:
        process.fail("dbu_per_micron", "is required")
    return name, dbu, process.flag("cumulative_includes_cuts")


@contextmanager
def _collected(errors: list[DeckError]) -> Iterator[None]:
    """Note an entry's refusal and go on to the next entry, so that one reading of a deck
    shows every entry's first fault."""
    try:
        yield
    except DeckError as exc:
        errors.append(exc)


def _layer(source: str, i: int, raw: Any, seen: set[str]) -> Layer:
    entry = f"layers[{i}]"
    r = _Reader(source, entry, raw, _LAYER_KEYS)
    layer_name = r.name("name")
    if layer_name in seen:
        r.fail("name", f"layer {layer_name!r} is listed twice")
    seen.add(layer_name)
    kind = LayerKind(r.text("kind", choices=tuple(LayerKind)))
    wrong = (_CUT_ONLY if kind == ROUTING else _ROUTING_ONLY) & set(raw)
    if wrong:
        r.fail(sorted(wrong)[0], f"does not apply to a {kind} layer")
    plus_cut = r.flag("cumulative_plus_cut")
    if kind == ROUTING:
        return Layer(
            layer_name, i, kind,
            direction=r.text("direction", choices=("horizontal", "vertical")),
            thickness_um=r.number("thickness_um", positive=True),
            wire_width=r.integer("wire_width", positive=True),
            spacing=r.integer("spacing"),
            cumulative_plus_cut=plus_cut)
    return Layer(layer_name, i, kind,
                 cut_size=r.integer("cut_size", positive=True),
                 enclosure=r.integer("enclosure", default=0),
                 cumulative_plus_cut=plus_cut)


def _check_layer_order(source: str, layers: list[Layer]) -> None:
    for layer in layers:
        if layer.kind == CUT:
            below = layers[layer.index - 1] if layer.index > 0 else None
            above = layers[layer.index + 1] if layer.index + 1 < len(layers) else None
            if below is None or above is None or not below.is_routing or not above.is_routing:
                raise DeckError("a cut layer must lie between two routing layers (layers are "
                                "listed bottom-up in process order)",
                                f"{source}: layers[{layer.index}] ({layer.name})")

    for above, below in zip(layers[1:], layers):
        if above.is_routing and below.is_routing:
            raise DeckError("routing layers are interleaved with cut layers (M1, V1, M2, ...); "
                            f"{below.name} and {above.name} have no cut layer between them",
                            f"{source}: layers[{above.index}] ({above.name})")


def _rule(source: str, i: int, raw: Any, layers: list[Layer], index: dict[str, int],
      keys: set[tuple[int, str, str]]) -> Rule:
    entry = f"rules[{i}]"
    r = _Reader(source, entry, raw, _RULE_KEYS)
    layer_name = r.text("layer")
    if layer_name not in index:
        r.fail("layer", f"unknown layer {shown(layer_name)} (deck has {', '.join(index)})")
    step = index[layer_name]
    measure = Measure(r.text("measure", default=Measure.AREA, choices=MEASURES))
    if measure == Measure.SIDE:
        if layers[step].kind == CUT:
            r.fail("measure", f"a side-wall rule needs a routing layer; {layer_name} is a cut layer")
        if layers[step].thickness_um is None:
            r.fail("measure", f"a side-wall rule needs thickness_um on layer {layer_name}")
    oxide = r.name("oxide", default=DEFAULT_OXIDE)
    if (step, measure, oxide) in keys:
        r.fail("layer", f"a second {measure} rule for {layer_name}, oxide {oxide}")
    keys.add((step, measure, oxide))
    rule = Rule(
        layer=layer_name, step=step, oxide=oxide, measure=measure,
        partial_max=r.number("partial_max", positive=True),
        cumulative_max=r.number("cumulative_max", positive=True),
        area_factor=r.number("area_factor", default=1.0, positive=True),  # type: ignore[arg-type]
        factor_with_diode_only=r.flag("factor_with_diode_only"),
        diode_partial_max=r.table_points("diode_partial_max"),
        diode_cumulative_max=r.table_points("diode_cumulative_max"),
        diode_gate_factor=r.number("diode_gate_factor", default=0.0),  # type: ignore[arg-type]
        diode_area_credit=r.number("diode_area_credit", default=0.0),  # type: ignore[arg-type]
        diode_area_reduction=r.table_points("diode_area_reduction", "reduction factor"),
    )
    if not rule.has_partial and not rule.has_cumulative:
        r.fail("partial_max", "a rule needs a partial or a cumulative limit")
    return rule


class DeckErrors(DeckError):
    """Several entries of a deck refused at once; ``errors`` holds each (the first one's
    field is the error's field, so a caller that wants one field gets the first)."""

    def __init__(self, errors: list[DeckError]) -> None:
        first = errors[0]
        if len(errors) == 1:
            message = first.message
        else:
            message = f"{first.message}\n" + "\n".join(f"  and {e}" for e in errors[1:])
        super().__init__(message, first.field, first.line)
        self.errors = errors

    def at_line(self, line: int | None) -> DeckError:
        return DeckErrors(self.errors)


def load_deck(path: str | Path) -> Deck:
    """Read and validate a rule deck file (UTF-8, a byte-order mark allowed)."""
    return loads_deck(read_text(path, "the rule deck", DeckError), str(path))


def loads_deck(text: str, source: str = "<deck>") -> Deck:
    """Parse and validate rule-deck TOML text; every refusal names the line it is about
    where the entry can be found in the text."""
    try:
        data = tomllib.loads(text.removeprefix("\ufeff"))
    except tomllib.TOMLDecodeError as exc:
        found = re.search(r"\(at line (\d+), column (\d+)\)", str(exc))
        line = int(found.group(1)) if found else None
        raise DeckError(f"not valid TOML: {str(exc).split(' (at line')[0]}", source, line) from None
    try:
        return parse_deck(data, source)
    except DeckErrors as exc:
        raise DeckErrors([_placed(e, text, source) for e in exc.errors]) from None
    except DeckError as exc:
        raise _placed(exc, text, source) from None


def _placed(error: DeckError, text: str, source: str) -> DeckError:
    prefix = f"{source}: "
    if error.line is not None or not (error.field or "").startswith(prefix):
        return error
    placed = error.at_line(entry_line(text, (error.field or "")[len(prefix):]))
    assert isinstance(placed, DeckError)
    return placed


_HEADER = re.compile(r"\s*\[\[?\s*([A-Za-z0-9_-]+)\s*\]\]?")
_ENTRY = re.compile(r"([a-z]+)(?:\[(\d+)\])?(?:\s*\([^)]*\))?(?:\.([A-Za-z0-9_-]+))?")


def entry_line(text: str, where: str) -> int | None:
    """The line of ``where`` (``rules[3].partial_max``, ``process``, ``deck.extras``) in
    deck text written with table headers (``[process]``, ``[[rules]]``): the key's line
    inside its table, else the table's header; None when neither is found."""
    match = _ENTRY.match(where)
    if match is None:
        return None
    table, index, key = match.group(1), int(match.group(2) or 0), match.group(3)
    lines = text.splitlines()
    if table == "deck":  # a top-level key: a table of that name, or a key before any table
        table, key = key or "", None
    header_at, count = None, 0
    for number, line in enumerate(lines, 1):
        header = _HEADER.match(line)
        if header and header.group(1) == table:
            if count == index:
                header_at = number
                break
            count += 1
    if header_at is None:
        return None
    if key is None:
        return header_at
    key_pattern = re.compile(rf"\s*{re.escape(key)}\s*=")
    for number in range(header_at + 1, len(lines) + 1):
        if _HEADER.match(lines[number - 1]):
            break
        if key_pattern.match(lines[number - 1]):
            return number
    return header_at
