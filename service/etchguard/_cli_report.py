"""``etchguard report``: a design report of a net file as HTML, CSV and/or JSON.

The nets are checked offline against the rule deck (the same engine as ``check``);
the page and the files are built by ``etchguard._report`` from the resulting records.
Exit status as for ``check``: 0 every net legal, 1 violations found (the outputs are
written all the same), 2 bad input.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from ._errors import InputError
from ._nets import load_net_file
from ._progress import progress
from ._report import NetRecord, check_records, render_html, report_json, write_csv, OffenderFinder
from ._rules import load_deck

HELP = "write a design report of a net file: an HTML page, and CSV or JSON for scripts"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("nets", help="net file (JSON)")
    parser.add_argument("--rules", required=True, metavar="DECK", help="rule deck (TOML)")
    parser.add_argument("-o", "--output", metavar="FILE", help="write the HTML page here")
    parser.add_argument("--csv", metavar="FILE", help="write one row per check here")
    parser.add_argument("--json", metavar="FILE", help="write the report as JSON here")
    parser.add_argument("--top", type=int, default=25, metavar="N",
                        help="rows of the worst-nets table (default 25)")
    parser.add_argument("--max-drawings", type=int, default=40, metavar="N",
                        help="draw at most N violating nets (default 40)")
    parser.add_argument("--title", default="", help="page title (default: from the deck name)")
    parser.add_argument("--progress", choices=("auto", "always", "never"), default="auto",
                        help="progress bar on stderr: auto draws it on a terminal only")


def _write(path: str, text: str, what: str) -> None:
    try:
        Path(path).write_text(text, encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot write the {what}: {exc.strerror}", path) from exc


def run(args: argparse.Namespace) -> int:
    if not (args.output or args.csv or args.json):
        raise InputError("nothing to write: give -o FILE, --csv FILE and/or --json FILE", "output")
    if args.top < 0 or args.max_drawings < 0:
        raise InputError("must be >= 0", "--top" if args.top < 0 else "--max-drawings")
    deck = load_deck(args.rules)
    specs = load_net_file(deck, args.nets)

    def bar(items, total, label):  # type: ignore[no-untyped-def]
        if args.progress == "never":
            return items
        return progress(items, total, label, force=args.progress == "always")

    records: list[NetRecord] = list(check_records(deck, bar(specs, len(specs), "checking")))
    if args.output:
        try:
            page = render_html(records, deck.name, deck=deck, source=str(args.nets), title=args.title,
                               top=args.top, max_drawings=args.max_drawings, progress=bar)
        except ImportError as exc:
            raise InputError("the HTML page needs matplotlib: install the 'report' extra "
                             "(pip install 'etchguard[report]')", "output") from exc
        _write(args.output, page, "HTML page")
    if args.csv:
        import io
        buf = io.StringIO()
        write_csv(records, buf)
        _write(args.csv, buf.getvalue(), "CSV file")
    if args.json:
        data = report_json(records, deck.name, OffenderFinder(deck))
        _write(args.json, json.dumps(data, indent=1) + "\n", "JSON file")
    violating = sum(not r.report.legal for r in records)
    print(f"{len(records)} nets, {violating} violating; wrote "
          + ", ".join(p for p in (args.output, args.csv, args.json) if p), file=sys.stderr)
    return 0 if violating == 0 else 1
