"""A technology LEF as a rule deck, and any deck as the contract's TOML text.

The mapping is the contract's table (the antenna model, "The same model from the open
LEF/DEF standard"), per layer and per ANTENNAMODEL oxide class:

* ANTENNA[SIDE]AREARATIO -> partial_max; ANTENNADIFF[SIDE]AREARATIO (a number v is the
  table [[0, v]]) -> diode_partial_max; the CUM forms -> cumulative_max and
  diode_cumulative_max; with only the DIFF form, the deck reads the table at D = 0.
* ANTENNA[SIDE]AREAFACTOR v [DIFFUSEONLY] -> area_factor, factor_with_diode_only.
* ANTENNAAREAMINUSDIFF -> diode_area_credit, ANTENNAGATEPLUSDIFF -> diode_gate_factor,
  on the area and the side rule of that layer and oxide.
* ANTENNAAREADIFFREDUCEPWL -> diode_area_reduction (the area and the side rule of that
  layer and oxide); ANTENNACUMROUTINGPLUSCUT -> cumulative_plus_cut on the layer.
* THICKNESS -> thickness_um; a side-wall rule on a layer without it is an error.

Layers: the ROUTING and CUT layers in process order; a cut layer below the first routing
layer (a contact) or above the last one is not a step of the model and is dropped with a
warning. A cut layer's cut_size and enclosure come from a DEFAULT fixed via between its
neighbours, else from a VIARULE GENERATE (DEFAULT first), else from the layer's WIDTH
and plain ENCLOSURE; the deck's via is square, so the larger side and overhang are used.
"""

from __future__ import annotations

import json
import math
from itertools import pairwise
from typing import Any

from ._errors import DeckError
from ._lef_model import AntennaSet, LayerKind, Lef, LefLayer, Located, Measure
from ._lefdef_geometry import to_dbu
from ._lefdef_tokens import Notes
from ._rules import CUT, ROUTING, Deck, Layer, Rule


def _error(at: Located, keyword: str, message: str) -> DeckError:
    return DeckError(message, f"{at}: {keyword}")


def deck_from_lef(lef: Lef, notes: Notes, dbu: int | None = None, name: str | None = None) -> Deck:
    """The rule deck a technology LEF states, at ``dbu`` per micron (default: its own)."""
    dbu = dbu or lef.dbu
    if not dbu:
        raise DeckError("no UNITS DATABASE MICRONS in the LEF; give the database units", "dbu")
    kept = _process_layers(lef, notes)
    layers: list[Layer] = []
    for index, info in enumerate(kept):
        extra: dict[str, Any] = {}
        if any(s.cum_routing_plus_cut for s in info.antenna.values()):
            extra["cumulative_plus_cut"] = True
        if info.kind is LayerKind.ROUTING:
            layers.append(Layer(info.name, index, ROUTING, direction=_direction(info),
                                thickness_um=info.thickness,
                                wire_width=_dbu(info, "WIDTH", info.width, dbu),
                                spacing=_dbu(info, "SPACING", info.spacing, dbu), **extra))
        else:
            size, enclosure = _cut_geometry(lef, kept, index, dbu, notes)
            layers.append(Layer(info.name, index, CUT, cut_size=size, enclosure=enclosure, **extra))
    rules: list[Rule] = []
    for index, info in enumerate(kept):
        for oxide, antenna in info.antenna.items():
            for measure in Measure:
                rule = _rule(info, index, oxide, measure, antenna, notes)
                if rule is not None:
                    rules.append(rule)
    deck_name = name or (lef.sources[0].rsplit("/", 1)[-1].rsplit(".", 1)[0] if lef.sources else "lef")
    return Deck(deck_name, dbu, False, tuple(layers), tuple(rules), ", ".join(lef.sources))


def _process_layers(lef: Lef, notes: Notes) -> list[LefLayer]:
    layers = list(lef.layers)
    while layers and layers[0].kind is LayerKind.CUT:
        dropped = layers.pop(0)
        notes.warn(dropped.at.source, dropped.at.line, "LAYER", f"cut layer {dropped.name} lies below the "
                   "first routing layer (a contact): not a process step of the model, not checked")
    while layers and layers[-1].kind is LayerKind.CUT:
        dropped = layers.pop()
        notes.warn(dropped.at.source, dropped.at.line, "LAYER", f"cut layer {dropped.name} lies above the "
                   "last routing layer: not a process step of the model, not checked")
    if not layers:
        raise DeckError("the LEF defines no ROUTING layer", ", ".join(lef.sources) or "lef")
    for below, above in pairwise(layers):
        if below.kind is above.kind:
            raise _error(above.at, "LAYER", f"{below.name} and {above.name} are both {above.kind.value} "
                         "layers; the model needs routing and cut layers interleaved in process order")
    return layers


def _direction(info: LefLayer) -> str:
    at = info.at_keyword.get("DIRECTION", info.at)
    if info.direction in ("HORIZONTAL", "VERTICAL"):
        return info.direction.lower()
    if info.direction is None:
        raise _error(info.at, "DIRECTION", f"routing layer {info.name} has no DIRECTION; the model needs "
                     "HORIZONTAL or VERTICAL")
    raise _error(at, "DIRECTION", f"{info.direction} on {info.name} has no term in the model "
                 "(HORIZONTAL or VERTICAL only)")


def _dbu(info: LefLayer, keyword: str, value: float | None, dbu: int) -> int | None:
    if value is None:
        return None
    out = to_dbu(value, dbu)
    if out is None or out <= 0:
        raise _error(info.at_keyword.get(keyword, info.at), keyword,
                     f"{value:g} um on {info.name} is not a positive whole number of DBU at {dbu} per micron")
    return out


def _cut_geometry(lef: Lef, kept: list[LefLayer], index: int, dbu: int, notes: Notes) -> tuple[int | None, int | None]:
    cut, below, above = kept[index], kept[index - 1].name, kept[index + 1].name
    size = enclosure = None
    for via in lef.vias.values():
        if via.default and via.generated is None and set(via.shapes) == {below, cut.name, above}:
            cuts, pads = via.shapes[cut.name], via.shapes[below] + via.shapes[above]
            if not cuts or not pads:
                continue
            c = cuts[0]
            size = max(c[2] - c[0], c[3] - c[1])
            enclosure = max(max(c[0] - p[0], c[1] - p[1], p[2] - c[2], p[3] - c[3]) for p in pads)
            if not math.isclose(c[2] - c[0], c[3] - c[1]):
                notes.warn(via.at.source, via.at.line, "VIA", f"the default via {via.name} has a cut of "
                           f"{c[2] - c[0]:g} x {c[3] - c[1]:g} um; the deck's square via uses {size:g}")
            break
    if size is None:
        rules = sorted(lef.via_rules.values(), key=lambda r: not r.default)
        for rule in rules:
            if cut.name in rule.cut_rects:
                c = rule.cut_rects[cut.name]
                size = max(c[2] - c[0], c[3] - c[1])
                enclosure = max((max(v) for layer, v in rule.enclosures.items() if layer in (below, above)),
                                default=0.0)
                break
    if size is None and cut.width is not None:
        size, enclosure = cut.width, cut.enclosure or 0.0
    size_dbu = _dbu(cut, "WIDTH", size, dbu) if size is not None else None
    enclosure_dbu = to_dbu(enclosure, dbu) if enclosure is not None else None
    if enclosure is not None and (enclosure_dbu is None or enclosure_dbu < 0):
        raise _error(cut.at, "ENCLOSURE", f"the via enclosure {enclosure:g} um of {cut.name} is not a "
                     f"whole number of DBU at {dbu} per micron")
    return size_dbu, enclosure_dbu


def _rule(info: LefLayer, index: int, oxide: str, measure: Measure, antenna: AntennaSet,
          notes: Notes) -> Rule | None:
    side = measure is Measure.SIDE
    prefix = "ANTENNASIDE" if side else "ANTENNA"
    if not antenna.has_limit(measure):
        factor_at = antenna.at.get(f"{prefix}AREAFACTOR")
        if measure in antenna.factor and factor_at is not None:
            notes.warn(factor_at.source, factor_at.line, f"{prefix}AREAFACTOR", f"a factor on {info.name} "
                       f"({oxide}) without any {measure.value} ratio: no rule, the factor is not used")
        return None
    keyword, at = next((k, a) for k, a in antenna.at.items() if ("SIDE" in k) == side and "RATIO" in k)
    if side and info.kind is LayerKind.CUT:
        raise _error(at, keyword, f"a side-wall rule needs a routing layer; {info.name} is a cut layer")
    if side and info.thickness is None:
        raise _error(at, keyword, f"a side-wall rule on {info.name}, which has no THICKNESS "
                     "(a silent zero would hide every side-wall violation)")
    factor, diffuse_only = antenna.factor.get(measure, (1.0, False))
    return Rule(layer=info.name, step=index, oxide=oxide, measure=measure,
                partial_max=antenna.ratio.get(measure), cumulative_max=antenna.cum_ratio.get(measure),
                area_factor=factor, factor_with_diode_only=diffuse_only,
                diode_partial_max=antenna.diff_ratio.get(measure, ()),
                diode_cumulative_max=antenna.cum_diff_ratio.get(measure, ()),
                diode_gate_factor=antenna.gate_plus_diff or 0.0,
                diode_area_credit=antenna.area_minus_diff or 0.0,
                diode_area_reduction=antenna.diff_reduce or ())


# -- TOML text ------------------------------------------------------------------------------

def _value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return repr(v) if math.isfinite(v) else ("inf" if v > 0 else "-inf")
    if isinstance(v, int):
        return str(v)
    if isinstance(v, str):
        return json.dumps(v)
    return "[" + ", ".join(_value(x) for x in v) + "]"


def deck_toml(deck: Deck, header: str = "") -> str:
    """The contract's TOML text of a deck."""
    out = [f"# {line}" for line in header.splitlines()]
    out += ["[process]", f"name = {_value(deck.name)}", f"dbu_per_micron = {deck.dbu_per_micron}",
            f"cumulative_includes_cuts = {_value(deck.cumulative_includes_cuts)}"]
    for layer in deck.layers:
        out += ["", "[[layers]]", f"name = {_value(layer.name)}", f"kind = {_value(layer.kind)}"]
        keys = (("direction", "thickness_um", "wire_width", "spacing") if layer.is_routing
                else ("cut_size", "enclosure"))
        out += [f"{k} = {_value(getattr(layer, k))}" for k in keys if getattr(layer, k) is not None]
        if layer.cumulative_plus_cut:
            out.append("cumulative_plus_cut = true")
    for rule in deck.rules:
        out += ["", "[[rules]]", f"layer = {_value(rule.layer)}", f"oxide = {_value(rule.oxide)}",
                f"measure = {_value(rule.measure)}"]
        for key in ("partial_max", "cumulative_max"):
            if getattr(rule, key) is not None:
                out.append(f"{key} = {_value(getattr(rule, key))}")
        if rule.area_factor != 1.0 or rule.factor_with_diode_only:
            out += [f"area_factor = {_value(rule.area_factor)}",
                    f"factor_with_diode_only = {_value(rule.factor_with_diode_only)}"]
        for key in ("diode_partial_max", "diode_cumulative_max"):
            if getattr(rule, key):
                out.append(f"{key} = {_value(getattr(rule, key))}")
        for key in ("diode_gate_factor", "diode_area_credit"):
            if getattr(rule, key):
                out.append(f"{key} = {_value(getattr(rule, key))}")
        if rule.diode_area_reduction:
            out.append(f"diode_area_reduction = {_value(rule.diode_area_reduction)}")
    return "\n".join(out) + "\n"
