"""A LEF reader (the open LEF/DEF 5.8 standard): technology and cell library.

Kept: DATABASE MICRONS; ROUTING and CUT layers in process order with WIDTH, THICKNESS,
DIRECTION, PITCH, plain SPACING, plain cut ENCLOSURE and every antenna statement of the
contract's table per ANTENNAMODEL (also when carried in LEF57_/LEF58_ PROPERTY strings);
fixed and generated VIAs; VIARULE GENERATE cut and enclosures; NONDEFAULTRULE widths
(and the vias defined inside them); MACROs (``_lef_macro``). Everything else is skipped
with a warning naming file:line and keyword (``Notes``); layers of other types are
remembered by name only, so that a reference to them is not an unknown layer.

Keywords are matched in any case, names as written. Errors (``InputError``) name
file:line and the keyword: a truncated file or a missing END, a bad number, a PWL whose
diffusion areas do not increase, a non-UTF-8 byte.
"""

from __future__ import annotations

from pathlib import Path

from ._errors import InputError
from ._lef_macro import read_macro
from ._lef_model import (
    OXIDES,
    AntennaSet,
    GeneratedVia,
    LayerKind,
    Lef,
    LefLayer,
    LefVia,
    Located,
    Measure,
    Table,
    ViaRuleGenerate,
)
from ._lef_words import (
    Words,
    finish_block,
    rect_words,
    skip_current_density,
    skip_until_end,
)
from ._lefdef_geometry import bounding_box, rectilinear_pieces
from ._lefdef_tokens import Notes, TokenStream

# Header statements that change nothing the model reads: accepted without a warning.
_QUIET = {"VERSION", "NAMESCASESENSITIVE", "BUSBITCHARS", "DIVIDERCHAR"}
_NAMED_BLOCKS = {"SITE", "ARRAY"}  # NAME ... END NAME, skipped
_KEYWORD_BLOCKS = {"PROPERTYDEFINITIONS", "SPACING", "IRDROP", "NOISETABLE", "CORRECTIONTABLE"}

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


def read_lef(paths: list[str | Path], notes: Notes | None = None) -> Lef:
    """Read LEF files in order (technology first) into one ``Lef``."""
    lef = Lef()
    notes = notes if notes is not None else Notes()
    for path in paths:
        _read_file(lef, TokenStream(path, notes))
    return lef


def _read_file(lef: Lef, stream: TokenStream) -> None:
    lef.sources.append(stream.source)
    while not stream.at_end():
        keyword = stream.next("statement")
        up = keyword.upper()
        at = Located(stream.source, stream.line)
        if up == "END":
            word = stream.next("END")
            if word.upper() != "LIBRARY":
                raise stream.error("END", f"END {word} outside any block (expected END LIBRARY)")
            if not stream.at_end():
                stream.warn("END LIBRARY", "words after END LIBRARY are ignored")
            return
        if up == "LAYER":
            _read_layer(lef, stream, stream.next("LAYER"), at)
        elif up == "VIA":
            _add_via(lef, stream, _read_via(stream, stream.next("VIA"), at))
        elif up == "VIARULE":
            _read_via_rule(lef, stream, stream.next("VIARULE"), at)
        elif up == "NONDEFAULTRULE":
            _read_ndr(lef, stream, stream.next("NONDEFAULTRULE"), at)
        elif up == "MACRO":
            name = stream.next("MACRO")
            if name in lef.macros:
                raise stream.error("MACRO", f"macro {name} is defined twice (first at {lef.macros[name].at})")
            lef.macros[name] = read_macro(lef, stream, name, at)
        elif up == "UNITS":
            _read_units(lef, stream)
        elif up == "BEGINEXT":
            stream.warn(up, "extension block skipped")
            while stream.next("BEGINEXT").upper() != "ENDEXT":
                pass
        elif up in _NAMED_BLOCKS:
            name = stream.next(up)
            stream.warn(up, "block skipped (not used by the antenna model)")
            skip_until_end(stream, up, name)
        elif up in _KEYWORD_BLOCKS:
            stream.warn(up, "block skipped (not used by the antenna model)")
            skip_until_end(stream, up, up)
        else:
            stream.skip_statement(up)
            if up not in _QUIET:
                stream.warn(up, "statement skipped (not used by the antenna model)", at.line)


def _read_units(lef: Lef, stream: TokenStream) -> None:
    while True:
        keyword = stream.next("UNITS").upper()
        if keyword == "END":
            stream.expect("UNITS", "END UNITS")
            return
        words = Words(stream, keyword)
        if keyword == "DATABASE":
            if len(words) != 2 or words.text(0).upper() != "MICRONS":
                raise words.error("expected DATABASE MICRONS value ;")
            value = words.number(1)
            if value <= 0 or value != int(value):
                raise words.error(f"database units per micron must be a positive integer, got {words.text(1)}")
            if lef.dbu is not None and lef.dbu != int(value):
                raise words.error(f"DATABASE MICRONS {int(value)} differs from {lef.dbu} given at {lef.dbu_at}")
            lef.dbu, lef.dbu_at = int(value), words.at
        else:
            stream.warn(keyword, "unit skipped (not used by the antenna model)", words.at.line)


# -- layers -------------------------------------------------------------------------------

def _read_layer(lef: Lef, stream: TokenStream, name: str, at: Located) -> None:
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


# -- vias, via rules, non-default rules -----------------------------------------------------

def _add_via(lef: Lef, stream: TokenStream, via: LefVia) -> None:
    if via.name in lef.vias:
        raise stream.error("VIA", f"via {via.name} is defined twice (first at {lef.vias[via.name].at})")
    lef.vias[via.name] = via


def _read_via(stream: TokenStream, name: str, at: Located) -> LefVia:
    via = LefVia(name, at)
    while stream.peek() is not None and stream.peek().upper() in ("DEFAULT", "GENERATED", "TOPOFSTACKONLY"):  # type: ignore[union-attr]
        via.default |= stream.next("VIA").upper() == "DEFAULT"
    layer: str | None = None
    gen: dict[str, Words] = {}
    while True:
        keyword = stream.next(f"VIA {name}").upper()
        if keyword == "END":
            finish_block(stream, "VIA", name)
            break
        words = Words(stream, keyword)
        if keyword == "LAYER":
            layer = words.text(0)
            via.shapes.setdefault(layer, [])
        elif keyword in ("RECT", "POLYGON"):
            if layer is None:
                raise words.error("a shape before any LAYER")
            via.shapes[layer].extend(_via_shape(keyword, words))
        elif keyword in ("VIARULE", "CUTSIZE", "LAYERS", "CUTSPACING", "ENCLOSURE", "ROWCOL", "ORIGIN",
                         "OFFSET", "PATTERN"):
            gen[keyword] = words
        else:
            stream.warn(keyword, "via statement skipped (not used by the antenna model)", words.at.line)
    if gen:
        via.generated = generated_via(gen, f"VIA {name}")
    return via


def _via_shape(keyword: str, words: Words) -> list[tuple[float, float, float, float]]:
    values = [words.parse(w) for w in rect_words(words.items)]
    if keyword == "RECT":
        if len(values) != 4:
            raise words.error("expected RECT x1 y1 x2 y2")
        x1, y1, x2, y2 = values
        if x1 == x2 or y1 == y2:
            words.warn("a rectangle without area; skipped")
            return []
        return [(min(x1, x2), min(y1, y2), max(x1, x2), max(y1, y2))]
    points = list(zip(values[0::2], values[1::2]))
    pieces = rectilinear_pieces(points)
    if pieces is None:
        words.warn("a polygon with slanted edges: its bounding box is used")
        return [bounding_box(points)]
    return pieces


def generated_via(gen: dict[str, Words], what: str) -> GeneratedVia:
    """The parameters of a via rule via, from its statements (LEF or DEF, same words)."""
    def numbers(keyword: str, count: int, default: tuple[float, ...] | None = None) -> tuple[float, ...]:
        if keyword not in gen:
            if default is None:
                raise InputError(f"a generated via needs {keyword}", what)
            return default
        words = gen[keyword]
        if len(words) != count:
            raise words.error(f"expected {count} numbers")
        return tuple(words.number(i) for i in range(count))

    if "LAYERS" not in gen or len(gen["LAYERS"]) != 3:
        raise (gen["LAYERS"].error("expected LAYERS bottom cut top") if "LAYERS" in gen
               else InputError("a generated via needs LAYERS", what))
    rows, cols = numbers("ROWCOL", 2, (1.0, 1.0))
    if "PATTERN" in gen:
        gen["PATTERN"].warn("cut PATTERN not applied: every cut of the array is kept")
    layers = gen["LAYERS"].items
    return GeneratedVia(
        rule=gen["VIARULE"].text(0) if "VIARULE" in gen else "",
        cut_size=numbers("CUTSIZE", 2)[:2],  # type: ignore[arg-type]
        layers=(layers[0], layers[1], layers[2]),
        cut_spacing=numbers("CUTSPACING", 2)[:2],  # type: ignore[arg-type]
        enclosure=numbers("ENCLOSURE", 4)[:4],  # type: ignore[arg-type]
        rowcol=(int(rows), int(cols)),
        origin=numbers("ORIGIN", 2, (0.0, 0.0))[:2],  # type: ignore[arg-type]
        offset=numbers("OFFSET", 4, (0.0, 0.0, 0.0, 0.0))[:4],  # type: ignore[arg-type]
        pattern=gen["PATTERN"].text(0) if "PATTERN" in gen else None)


def _read_via_rule(lef: Lef, stream: TokenStream, name: str, at: Located) -> None:
    generate = default = False
    while stream.peek() is not None and stream.peek().upper() in ("GENERATE", "DEFAULT"):  # type: ignore[union-attr]
        word = stream.next("VIARULE").upper()
        generate |= word == "GENERATE"
        default |= word == "DEFAULT"
    rule = ViaRuleGenerate(name, at, default)
    layer: str | None = None
    while True:
        keyword = stream.next(f"VIARULE {name}").upper()
        if keyword == "END":
            finish_block(stream, "VIARULE", name)
            break
        words = Words(stream, keyword)
        if keyword == "LAYER":
            layer = words.text(0)
        elif keyword == "ENCLOSURE" and layer is not None and len(words) == 2:
            rule.enclosures[layer] = (words.number(0), words.number(1))
        elif keyword == "RECT" and layer is not None:
            rule.cut_rects.update((layer, r) for r in _via_shape("RECT", words))
        elif generate:
            stream.warn(keyword, "via rule statement skipped (not used by the antenna model)", words.at.line)
    if not generate:
        stream.warn("VIARULE", "a via rule without GENERATE only lists vias; skipped", at.line)
        return
    if name in lef.via_rules:
        raise stream.error("VIARULE", f"via rule {name} is defined twice (first at {lef.via_rules[name].at})")
    lef.via_rules[name] = rule


def _read_ndr(lef: Lef, stream: TokenStream, name: str, at: Located) -> None:
    widths: dict[str, float] = {}
    while True:
        keyword = stream.next(f"NONDEFAULTRULE {name}").upper()
        if keyword == "END":
            finish_block(stream, "NONDEFAULTRULE", name, optional_name=True)
            break
        if keyword == "LAYER":
            layer = stream.next("LAYER")
            while True:
                inner = stream.next(f"LAYER {layer}").upper()
                if inner == "END":
                    finish_block(stream, "LAYER", layer)
                    break
                words = Words(stream, inner)
                if inner == "WIDTH":
                    widths[layer] = words.single_number(positive=True)
        elif keyword == "VIA":
            _add_via(lef, stream, _read_via(stream, stream.next("VIA"), Located(stream.source, stream.line)))
        elif keyword == "SPACING":
            skip_until_end(stream, "SPACING", "SPACING")
        else:
            words = Words(stream, keyword)
            stream.warn(keyword, "non-default rule statement skipped (not used by the antenna model)",
                        words.at.line)
    if name in lef.ndr_widths:
        raise stream.error("NONDEFAULTRULE", f"non-default rule {name} is defined twice")
    lef.ndr_widths[name] = widths
