"""LEF LAYER blocks: kind, the widths the deck needs, and the antenna statements.

Antenna statements go to the set of the current ANTENNAMODEL (OXIDE1 until one is
named), also when they come in a LEF57_/LEF58_ PROPERTY string; a statement given twice
keeps the later value, with a warning. A PWL's diffusion areas must increase.
"""

from __future__ import annotations

from ._lef_model import (
    OXIDES,
    AntennaSet,
    LayerKind,
    Lef,
    LefLayer,
    Located,
    Measure,
    Table,
)
from ._lef_words import Words, finish_block, skip_current_density
from ._lefdef_tokens import TokenStream

# layer antenna keyword -> (measure, which limit); the rest are handled one by one
_RATIOS = {
    "ANTENNAAREARATIO": (Measure.AREA, "ratio"), "ANTENNASIDEAREARATIO": (Measure.SIDE, "ratio"),
    "ANTENNACUMAREARATIO": (Measure.AREA, "cum_ratio"), "ANTENNACUMSIDEAREARATIO": (Measure.SIDE, "cum_ratio"),
}
_DIFF_RATIOS = {
    "ANTENNADIFFAREARATIO": (Measure.AREA, "diff_ratio"),
    "ANTENNADIFFSIDEAREARATIO": (Measure.SIDE, "diff_ratio"),
    "ANTENNACUMDIFFAREARATIO": (Measure.AREA, "cum_diff_ratio"),
    "ANTENNACUMDIFFSIDEAREARATIO": (Measure.SIDE, "cum_diff_ratio"),
}
_FACTORS = {"ANTENNAAREAFACTOR": Measure.AREA, "ANTENNASIDEAREAFACTOR": Measure.SIDE}


def read_layer(lef: Lef, stream: TokenStream, name: str, at: Located) -> None:
    if lef.layer(name) is not None or name in lef.other_layers:
        first = lef.layer(name)
        raise stream.error("LAYER", f"layer {name} is defined twice"
                           + (f" (first at {first.at})" if first else ""))
    kind: LayerKind | None = None
    type_word = ""
    layer = LefLayer(name, LayerKind.ROUTING, at)
    oxide = OXIDES["OXIDE1"]
    while True:
        keyword = stream.next(f"LAYER {name}")
        up = keyword.upper()
        if up == "END":
            finish_block(stream, "LAYER", name)
            break
        if up in ("ACCURRENTDENSITY", "DCCURRENTDENSITY"):
            skip_current_density(stream, up)
            continue
        words = Words(stream, up)
        if up == "TYPE":
            type_word = words.text(0).upper()
            kind = {"ROUTING": LayerKind.ROUTING, "CUT": LayerKind.CUT}.get(type_word)
        elif up == "ANTENNAMODEL":
            oxide = _oxide(words)
        elif up.startswith("ANTENNA"):
            _layer_antenna(layer, oxide, up, words)
        elif up == "PROPERTY":
            oxide = _layer_properties(layer, oxide, words, stream)
        elif up in ("WIDTH", "THICKNESS", "PITCH") and len(words) >= 1:
            value = words.number(0)
            setattr(layer, up.lower(), value)
            layer.at_keyword[up] = words.at
            if up == "PITCH" and len(words) > 1:
                stream.warn(up, "separate x and y pitches: the first is kept", words.at.line)
        elif up == "DIRECTION":
            layer.direction = words.text(0).upper()
            layer.at_keyword[up] = words.at
        elif up == "SPACING" and len(words) == 1:
            value = words.number(0)
            layer.spacing = value if layer.spacing is None else min(layer.spacing, value)
        elif up == "ENCLOSURE" and (overhang := _plain_enclosure(words)) is not None:
            layer.enclosure = overhang if layer.enclosure is None else max(layer.enclosure, overhang)
        else:
            stream.warn(up, "layer statement skipped (not used by the antenna model)", words.at.line)
    if kind is None:
        lef.other_layers[name] = type_word or "(no TYPE)"
        if any(s.ratio or s.diff_ratio or s.cum_ratio or s.cum_diff_ratio for s in layer.antenna.values()):
            stream.warn("LAYER", f"antenna rules on layer {name} of type {type_word or 'none'} are not "
                        "used: only ROUTING and CUT layers are process steps of the model", at.line)
        return
    layer.kind = kind
    lef.layers.append(layer)


def _plain_enclosure(words: Words) -> float | None:
    """``ENCLOSURE [ABOVE|BELOW] a b ;`` with nothing after: the larger overhang."""
    values = [w for w in words.items if w.upper() not in ("ABOVE", "BELOW")]
    if len(values) != 2:
        return None
    try:
        return max(float(values[0]), float(values[1]))
    except ValueError:
        return None


def _oxide(words: Words) -> str:
    model = words.text(0).upper() if len(words) else ""
    if model not in OXIDES:
        raise words.error(f"expected OXIDE1..OXIDE4, got {model or 'nothing'}")
    return OXIDES[model]


def _layer_properties(layer: LefLayer, oxide: str, words: Words, stream: TokenStream) -> str:
    """PROPERTY name value ...: antenna statements in LEF57_/LEF58_ strings are read."""
    items = words.items
    for i in range(0, len(items) - 1, 2):
        name, value = items[i], items[i + 1]
        if not (name.upper().startswith(("LEF57_", "LEF58_")) and value.startswith('"')):
            stream.warn("PROPERTY", "property skipped (not used by the antenna model)", words.at.line)
            continue
        inner = value.strip('"').replace(";", " ; ").split()
        statement: list[str] = []
        for word in inner:
            if word != ";":
                statement.append(word)
                continue
            if statement:
                sub = Words.of(statement[1:], statement[0].upper(), words.at, stream)
                if sub.keyword == "ANTENNAMODEL":
                    oxide = _oxide(sub)
                elif sub.keyword.startswith("ANTENNA"):
                    _layer_antenna(layer, oxide, sub.keyword, sub)
                else:
                    stream.warn(f"PROPERTY {name}", f"{sub.keyword} skipped (not used by the antenna model)",
                                words.at.line)
            statement = []
    return oxide


def _layer_antenna(layer: LefLayer, oxide: str, keyword: str, words: Words) -> None:
    rules = layer.antenna.setdefault(oxide, AntennaSet())
    if keyword in rules.at:
        words.warn(f"given again for oxide {oxide} (first at {rules.at[keyword]}); the later value is used")
    rules.at[keyword] = words.at
    if keyword in _RATIOS:
        measure, slot = _RATIOS[keyword]
        getattr(rules, slot)[measure] = words.single_number(positive=True)
    elif keyword in _DIFF_RATIOS:
        measure, slot = _DIFF_RATIOS[keyword]
        getattr(rules, slot)[measure] = _ratio_or_pwl(words)
    elif keyword in _FACTORS:
        if not 1 <= len(words) <= 2 or (len(words) == 2 and words.text(1).upper() != "DIFFUSEONLY"):
            raise words.error("expected a factor and optionally DIFFUSEONLY")
        value = words.number(0)
        if value <= 0:
            raise words.error(f"the factor must be positive, got {words.text(0)}")
        rules.factor[_FACTORS[keyword]] = (value, len(words) == 2)
    elif keyword == "ANTENNAAREAMINUSDIFF":
        rules.area_minus_diff = words.single_number()
    elif keyword == "ANTENNAGATEPLUSDIFF":
        rules.gate_plus_diff = words.single_number()
    elif keyword == "ANTENNAAREADIFFREDUCEPWL":
        rules.diff_reduce = pwl(words, 0)
    elif keyword == "ANTENNACUMROUTINGPLUSCUT":
        if len(words):
            raise words.error("takes no value")
        rules.cum_routing_plus_cut = True
    else:
        del rules.at[keyword]
        words.warn("antenna statement not in the model (skipped)")


def _ratio_or_pwl(words: Words) -> Table:
    if len(words) and words.text(0).upper() == "PWL":
        return pwl(words, 1)
    return ((0.0, words.single_number(positive=True)),)


def pwl(words: Words, start: int) -> Table:
    """``( ( d1 v1 ) ( d2 v2 ) ... )`` from word ``start``: d strictly increasing, all >= 0."""
    items = [w for w in words.items[start:] if w not in ("(", ")")]
    if not items or len(items) % 2:
        raise words.error("a PWL is ( ( x1 y1 ) ( x2 y2 ) ... ) with at least one point")
    points: list[tuple[float, float]] = []
    for i in range(0, len(items), 2):
        x, y = words.parse(items[i]), words.parse(items[i + 1])
        if x < 0 or y < 0:
            raise words.error(f"PWL values must be non-negative, got ( {items[i]} {items[i + 1]} )")
        if points and x <= points[-1][0]:
            raise words.error(f"PWL diffusion areas must increase: {items[i]} after {points[-1][0]:g}")
        points.append((x, y))
    return tuple(points)
