"""``etchguard deck-from-lef``: a technology LEF as the contract's TOML rule deck.

So a user sees what etchguard understood of the foundry's antenna rules (and can keep or
edit the deck). Warnings (statements skipped or not expressible) go to stderr with
their file:line; exit status 2 on bad input.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from ._errors import InputError
from ._lef import read_lef
from ._lefdef import lef_rules, print_notes
from ._lefdef_tokens import Notes

HELP = "convert a technology LEF's layers and antenna rules into a rule deck (TOML)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("lef", nargs="+", help="technology LEF (more LEF files may follow)")
    parser.add_argument("-o", "--output", metavar="FILE", help="write the deck here (default: stdout)")
    parser.add_argument("--name", help="process name in the deck (default: the first LEF's file name)")
    parser.add_argument("--dbu", type=int, metavar="N",
                        help="database units per micron (default: the LEF's UNITS DATABASE MICRONS)")


def run(args: argparse.Namespace) -> int:
    if args.dbu is not None and args.dbu <= 0:
        raise InputError(f"must be a positive integer, got {args.dbu}", "--dbu")
    notes = Notes()
    _, text = lef_rules(read_lef(args.lef, notes), notes, name=args.name, dbu=args.dbu,
                        by="etchguard deck-from-lef")
    if args.output:
        try:
            Path(args.output).write_text(text, encoding="utf-8")
        except OSError as exc:
            raise InputError(f"cannot write the deck: {exc.strerror}", args.output) from exc
    else:
        sys.stdout.write(text)
    print_notes(notes, sys.stderr)
    return 0
