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

from collections.abc import Sequence
from pathlib import Path

from ._lef_layer import read_layer
from ._lef_macro import read_macro
from ._lef_model import Lef, Located
from ._lef_via import add_via, read_ndr, read_via, read_via_rule
from ._lef_words import Words, skip_until_end
from ._lefdef_tokens import Notes, TokenStream

# Header statements that change nothing the model reads: accepted without a warning.
_QUIET = {"VERSION", "NAMESCASESENSITIVE", "BUSBITCHARS", "DIVIDERCHAR"}
_NAMED_BLOCKS = {"SITE", "ARRAY"}  # NAME ... END NAME, skipped
_KEYWORD_BLOCKS = {"PROPERTYDEFINITIONS", "SPACING", "IRDROP", "NOISETABLE", "CORRECTIONTABLE"}


def read_lef(paths: Sequence[str | Path], notes: Notes | None = None) -> Lef:
    """Read LEF files in order (technology first) into one ``Lef``."""
    lef = Lef()
    notes = notes if notes is not None else Notes()
    for path in paths:
        _read_file(lef, TokenStream(path, notes))
    return lef


def read_lef_texts(texts: Sequence[tuple[str, str]], notes: Notes | None = None) -> Lef:
    """As ``read_lef``, of (name, LEF text) pairs handed over whole (LoadDeck); the name
    stands for the file in errors and warnings."""
    lef = Lef()
    notes = notes if notes is not None else Notes()
    for name, text in texts:
        _read_file(lef, TokenStream(name, notes, text=text))
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
            read_layer(lef, stream, stream.next("LAYER"), at)
        elif up == "VIA":
            add_via(lef, stream, read_via(stream, stream.next("VIA"), at))
        elif up == "VIARULE":
            read_via_rule(lef, stream, stream.next("VIARULE"), at)
        elif up == "NONDEFAULTRULE":
            read_ndr(lef, stream, stream.next("NONDEFAULTRULE"), at)
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
