"""``etchguard report``: a design report as HTML, CSV and/or JSON.

Two sources of nets, one builder (``etchguard._design_report``):
* a net file, checked offline against ``--rules`` (the same engine as ``check``);
  the page then draws each violating net with its offending components;
* ``--server ADDRESS``: every net a running server holds, as its CheckAll reports
  them, with the server's deck; the violating nets' pins and shapes come from GetNet
  and the deck's rules from GetDeck's TOML, so the page draws them the same way.
``--net``/``--match`` select the nets reported, as in ``check``.
Exit status as for ``check``: 0 every net legal, 1 violations found (the outputs are
written all the same), 2 bad input or an unreachable server.
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Callable, Iterable, Sequence
from operator import attrgetter
from pathlib import Path
from typing import Any

from ._cli_check import add_lefdef_arguments, add_selection_arguments, selected, specs_from_args
from ._design_report import NetRecord, OffenderFinder, check_records, render_html, report_json, write_csv
from ._errors import InputError
from ._kinds import Measure, RatioKind
from ._lefdef import print_notes
from ._nets import NetSpec
from ._progress import progress
from ._results import CheckResult, NetReport
from ._rules import Deck, loads_deck

HELP = "write a design report of a net file: an HTML page, and CSV or JSON for scripts"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("nets", nargs="?", help="net file (JSON); not with --server")
    parser.add_argument("--rules", metavar="DECK", help="rule deck (TOML), for a net file")
    add_lefdef_arguments(parser)
    parser.add_argument("--server", metavar="ADDRESS",
                        help="report the nets a running server holds (host:port or unix:PATH)")
    parser.add_argument("--timeout", type=float, default=60.0, metavar="S",
                        help="with --server: seconds to wait for the server (default 60)")
    parser.add_argument("-o", "--output", metavar="FILE", help="write the HTML page here")
    parser.add_argument("--csv", metavar="FILE", help="write one row per check here")
    # A flag, as in check and advise; nargs="?" only to recognise the old `--json FILE`
    # (refused in run, naming the new form) and to take a net file written right after it.
    parser.add_argument("--json", nargs="?", const=True, default=False,
                        help="print the report as JSON on stdout (docs/formats.md describes it)")
    parser.formatter_class = _FlagFormatter
    parser.add_argument("--top", type=int, default=25, metavar="N",
                        help="rows of the worst-nets table (default 25)")
    parser.add_argument("--max-drawings", type=int, default=40, metavar="N",
                        help="draw at most N violating nets (default 40)")
    add_selection_arguments(parser)
    parser.add_argument("--title", default="", help="page title (default: from the deck name)")
    parser.add_argument("--progress", choices=("auto", "always", "never"), default="auto",
                        help="progress bar on stderr: auto draws it on a terminal only")


class _FlagFormatter(argparse.HelpFormatter):
    """Shows ``--json`` as the flag it is (its optional word is only the old form's)."""

    def _format_args(self, action: argparse.Action, default_metavar: str) -> str:
        return "" if action.dest == "json" else super()._format_args(action, default_metavar)

    def _format_action_invocation(self, action: argparse.Action) -> str:
        return "--json" if action.dest == "json" else super()._format_action_invocation(action)


def _check_folders(args: argparse.Namespace) -> None:
    """Refuse an output whose folder does not exist before any work is done (the page of
    a large design takes minutes)."""
    for option, path in (("--output", args.output), ("--csv", args.csv)):
        if path and not Path(path).resolve().parent.is_dir():
            raise InputError(f"the folder {Path(path).parent} does not exist", option)


def _write(path: str, text: str, what: str) -> None:
    try:
        Path(path).write_text(text, encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot write the {what}: {exc.strerror}", path) from exc


def records_from_server(address: str, timeout: float,
                        bar: Callable[[Iterable[Any], int, str], Iterable[Any]],
                        names: Sequence[str] = (), patterns: Sequence[str] = ()
                        ) -> tuple[str, list[str], list[NetRecord], Deck | None]:
    """(deck name, layer order, records, deck) of every net a running server holds (or
    of those ``names`` and ``patterns`` select); the violating nets come with their
    geometry when the server hands out its deck's text."""
    try:
        import grpc

        from .client import Client, ServiceError, pb
    except ImportError as exc:  # the gRPC client is not in this tree or not installed
        raise InputError(f"--server needs the gRPC client: {exc}", "--server") from exc
    measure = {pb.MEASURE_AREA: Measure.AREA, pb.MEASURE_SIDE: Measure.SIDE}
    kind = {pb.RATIO_KIND_PARTIAL: RatioKind.PARTIAL, pb.RATIO_KIND_CUMULATIVE: RatioKind.CUMULATIVE}
    with Client(address, timeout=timeout) as client:
        try:
            # A call that does not wait for the channel: a refused connection answers at
            # once (UNAVAILABLE) instead of after the whole timeout.
            client.health()
            info = client.deck
            total = int(client.stats().nets)
            reports = []
            deck = loads_deck(info.toml, f"deck of {address}") if info.toml else None
            answers = selected(bar(client.check_all(), total, "fetching"), names, patterns,
                               name_of=attrgetter("net"))
            for r in answers:
                checks = tuple(CheckResult(c.layer, c.step, measure[c.measure], kind[c.kind], c.oxide,
                                           c.ratio, c.limit, c.utilization, c.legal, c.gate)
                               for c in r.checks)
                spec = None
                if deck is not None and not r.legal:  # the nets the page draws
                    spec = _spec_of(deck, client.get_net(r.net))
                reports.append(NetRecord(NetReport(r.net, r.legal, r.worst_utilization, checks), spec))
        except grpc.FutureTimeoutError as exc:
            raise InputError(f"no server answered at {address} within {timeout:g} s", "--server") from exc
        except ServiceError as exc:
            if exc.code == grpc.StatusCode.UNAVAILABLE:
                raise InputError(f"no server answers at {address}: {exc.message}", "--server") from None
            raise InputError(f"the server refused: {exc}", "--server") from exc
    return info.name, [layer.name for layer in info.layers], reports, deck


def _spec_of(deck: Deck, content: Any) -> NetSpec:
    """A NetSpec from a server's NetContent, validated like any other input."""
    from .server import convert

    layer_range = None
    if content.HasField("layer_range"):
        layer_range = convert.layer_range(deck, content.layer_range)
    return NetSpec(content.net, tuple(convert.pins(deck, content.pins)),
                   tuple(convert.shapes(deck, [h.shape for h in content.shapes], "shapes")), layer_range)


def _json_flag(args: argparse.Namespace) -> None:
    """``--json`` is a flag; a word after it is the net file, unless one is given too: then
    it is the old ``--json FILE`` form, refused with the new one."""
    if isinstance(args.json, str):
        if args.nets is None and not args.server:
            args.nets, args.json = args.json, True
        else:
            raise InputError(f"--json takes no file: it prints the JSON on stdout (etchguard report ... "
                             f"--json > {args.json})", "--json")


def run(args: argparse.Namespace) -> int:
    _json_flag(args)
    if not (args.output or args.csv or args.json):
        raise InputError("nothing to write: give -o FILE (the HTML page), --csv FILE and/or --json (stdout)",
                         "output")
    if args.top < 0 or args.max_drawings < 0:
        raise InputError("must be >= 0", "--top" if args.top < 0 else "--max-drawings")
    _check_folders(args)

    def bar(items: Iterable[Any], total: int | None, label: str) -> Iterable[Any]:
        if args.progress == "never":
            return items
        return progress(items, total, label, force=args.progress == "always")

    deck: Deck | None = None
    if args.server:
        if args.nets or args.rules or args.lef or args.def_path:
            raise InputError("--server reports the server's own nets and deck; give no net "
                             "file, --rules, --lef or --def with it", "--server")
        deck_name, layer_order, records, deck = records_from_server(
            args.server, args.timeout, bar, args.select_names, args.select_patterns)
        source = f"server {args.server}"
    else:
        if not (args.lef or args.def_path) and (not args.nets or not args.rules):
            raise InputError("give a net file and --rules DECK, --lef ... --def DESIGN, or --server ADDRESS",
                             "nets")
        deck, specs, total, notes = specs_from_args(args)
        if args.select_names or args.select_patterns:
            specs, total = selected(specs, args.select_names, args.select_patterns), None
        records = list(check_records(deck, bar(specs, total, "checking")))
        if notes is not None:
            print_notes(notes, sys.stderr)
        source = str(args.def_path or args.nets)
        deck_name, layer_order = deck.name, [l.name for l in deck.layers]
    if args.output:
        try:
            page = render_html(records, deck_name, deck=deck, layer_order=layer_order, source=source,
                               title=args.title, top=args.top, max_drawings=args.max_drawings,
                               progress=bar)
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
        data = report_json(records, deck_name, OffenderFinder(deck) if deck is not None else None)
        json.dump(data, sys.stdout, indent=1, allow_nan=False)
        sys.stdout.write("\n")
    violating = sum(not r.report.legal for r in records)
    written = [p for p in (args.output, args.csv) if p] + (["JSON on stdout"] if args.json else [])
    print(f"{len(records)} nets, {violating} illegal; wrote " + ", ".join(written), file=sys.stderr)
    return 0 if violating == 0 else 1
