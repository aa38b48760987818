"""LEF VIA, VIARULE ... GENERATE and NONDEFAULTRULE blocks.

A fixed via keeps its shapes per layer (microns, about its origin; rectilinear polygons
cut into rectangles); a via made by a rule keeps the rule's parameters (``GeneratedVia``,
the same words as DEF's VIAS use). A via rule keeps the cut rectangle and the metal
enclosures, enough to size a default via; a non-default rule keeps its widths per layer
and adds the vias it defines to the library's vias.
"""

from __future__ import annotations

from ._errors import InputError
from ._lef_model import GeneratedVia, Lef, LefVia, Located, ViaRuleGenerate
from ._lef_words import Words, finish_block, rect_words, skip_until_end
from ._lefdef_geometry import bounding_box, rectilinear_pieces
from ._lefdef_tokens import TokenStream


def add_via(lef: Lef, stream: TokenStream, via: LefVia) -> None:
    if via.name in lef.vias:
        raise stream.error("VIA", f"via {via.name} is defined twice (first at {lef.vias[via.name].at})")
    lef.vias[via.name] = via


def read_via(stream: TokenStream, name: str, at: Located) -> LefVia:
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


def read_via_rule(lef: Lef, stream: TokenStream, name: str, at: Located) -> None:
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


def read_ndr(lef: Lef, stream: TokenStream, name: str, at: Located) -> None:
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
            add_via(lef, stream, read_via(stream, stream.next("VIA"), Located(stream.source, stream.line)))
        elif keyword == "SPACING":
            skip_until_end(stream, "SPACING", "SPACING")
        else:
            words = Words(stream, keyword)
            stream.warn(keyword, "non-default rule statement skipped (not used by the antenna model)",
                        words.at.line)
    if name in lef.ndr_widths:
        raise stream.error("NONDEFAULTRULE", f"non-default rule {name} is defined twice")
    lef.ndr_widths[name] = widths
