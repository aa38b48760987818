"""A design given as LEF + DEF, opened for checking: the deck and a stream of nets.

``open_design`` reads the LEF files (technology first, then cells), the DEF up to its
NETS section, builds the rule deck at the DEF's database units (so coordinates stay
exact integers) and hands out the nets one at a time.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TextIO

from ._def import DefReader
from ._def_bind import DesignBinder, bound_nets
from ._def_model import DefHeader
from ._errors import InputError
from ._lef import read_lef, read_lef_texts
from ._lef_deck import deck_from_lef, deck_toml
from ._lef_model import Lef
from ._lefdef_tokens import Note, Notes
from ._nets import NetSpec
from ._rules import Deck, loads_deck


@dataclass
class Design:
    deck: Deck
    lef: Lef
    header: DefHeader
    nets: Iterator[NetSpec]  # streamed: each net is read when asked for
    nets_declared: int  # the count the DEF's NETS section declares
    notes: Notes


def open_design(lef_paths: Sequence[str | Path], def_path: str | Path, notes: Notes | None = None) -> Design:
    notes = notes if notes is not None else Notes()
    if not lef_paths:
        raise InputError("give the technology LEF (and cell LEFs) with --lef", "--lef")
    lef = read_lef(list(lef_paths), notes)
    reader = DefReader(def_path, notes)
    header = reader.read_header()
    if header.dbu is None:
        raise InputError("the DEF has no UNITS DISTANCE MICRONS before its nets", f"{def_path}: UNITS")
    deck = deck_from_lef(lef, notes, dbu=header.dbu)
    binder = DesignBinder(deck, lef, header, notes)
    return Design(deck, lef, header, bound_nets(binder, reader.raw_nets()), reader.nets_declared, notes)


def lef_rules(lef: Lef, notes: Notes, name: str | None = None, dbu: int | None = None,
              by: str = "etchguard") -> tuple[Deck, str]:
    """A technology LEF already read, as the deck it states (``deck_from_lef``, the one
    mapping) and that deck's TOML text: what deck-from-lef prints and LoadDeck keeps."""
    deck = deck_from_lef(lef, notes, dbu=dbu, name=name)
    return deck, _converted_toml(deck, lef.sources, by)


def _converted_toml(deck: Deck, sources: Sequence[str | Path], by: str) -> str:
    names = ", ".join(Path(source).name for source in sources)
    return deck_toml(deck, header=f"Rule deck converted from {names} by {by}.")


def lef_text_rules(texts: Sequence[tuple[str, str]], name: str | None = None,
                   dbu: int | None = None) -> tuple[Deck, str, list[str]]:
    """LEF texts handed over whole, each with a name errors and warnings give as a file
    name: the deck as its TOML text states it (so that the deck held is the one a journal
    replays), that text, and the warnings (statements skipped or not expressible)."""
    if not texts:
        raise InputError("give at least one LEF text (the technology LEF first)", "lef.files")
    if dbu is not None and dbu <= 0:
        raise InputError(f"must be a positive integer, got {dbu}", "lef.dbu_per_micron")
    notes = Notes()
    _, text = lef_rules(read_lef_texts(texts, notes), notes, name=name, dbu=dbu)
    return loads_deck(text, f"the deck converted from {texts[0][0]}"), text, notes.summary()


def lef_deck_text(lef_paths: Sequence[str | Path], deck: Deck | None = None, notes: Notes | None = None) -> str:
    """The deck TOML of a technology LEF (``deck`` when already built from it, e.g. at a
    DEF's database units)."""
    notes = notes if notes is not None else Notes()
    if deck is None:
        deck = deck_from_lef(read_lef(list(lef_paths), notes), notes)
    return _converted_toml(deck, lef_paths, "etchguard")


def print_notes(notes: Notes, stream: TextIO) -> None:
    """Warnings on stderr: one line per kind with where it first happened and how often."""
    if not notes.total:
        return
    firsts: dict[tuple[str, str], Note] = {}
    for note in notes.kept:
        firsts.setdefault((note.keyword, note.message), note)
    print(f"{notes.total} warnings reading LEF/DEF (statements skipped or not expressible):", file=stream)
    for key, count in notes.counts.items():
        times = f" ({count} times, the first here)" if count > 1 else ""
        print(f"  {firsts[key]}{times}", file=stream)
