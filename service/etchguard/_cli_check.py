"""``etchguard check``: the offline check of a net file against a rule deck."""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Iterable, Iterator

from ._engine import Engine
from ._nets import NetSpec, load_net_file
from ._reports import NetReport
from ._rules import load_deck

HELP = "check every net of a net file against a rule deck (offline)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("nets", help="net file (JSON)")
    parser.add_argument("--rules", required=True, metavar="DECK", help="rule deck (TOML)")
    parser.add_argument("--json", action="store_true", help="print the contract's JSON instead of a table")
    parser.add_argument("--all", action="store_true", help="table: list legal nets too")


def _with_progress(items: list[NetSpec], label: str) -> Iterable[NetSpec]:
    try:
        from ._progress import progress
    except ImportError:
        return items
    return progress(items, len(items), label)


def check_specs(engine: Engine, specs: Iterable[NetSpec]) -> Iterator[NetReport]:
    """Open each net, check it and close it again (keeps memory flat on big files)."""
    for spec in specs:
        engine.open_net(spec.name, spec.pins, spec.layer_range, spec.shapes)
        try:
            yield engine.check(spec.name)
        finally:
            engine.close_net(spec.name)


def _worst(report: NetReport) -> str:
    if not report.checks:
        return "no gate-connected component"
    c = max(report.checks, key=lambda c: c.utilization)
    return f"{c.layer} {c.kind} {c.measure} {c.oxide}: {c.ratio:.4g} of {c.limit:.4g} at {c.gate}"


def format_table(reports: list[NetReport], show_all: bool) -> str:
    rows = [r for r in reports if show_all or not r.legal]
    rows.sort(key=lambda r: -r.worst_utilization)
    width = max([len(r.name) for r in rows] + [3])
    lines = [f"{'net':<{width}}  {'state':<5}  {'use':>7}  worst check"]
    for r in rows:
        state = "ok" if r.legal else "OVER"
        lines.append(f"{r.name:<{width}}  {state:<5}  {r.worst_utilization:>6.1%}  {_worst(r)}")
    bad = sum(not r.legal for r in reports)
    worst = max(reports, key=lambda r: r.worst_utilization, default=None)
    summary = f"{len(reports)} nets checked, {bad} over a limit"
    if worst is not None:
        summary += f"; highest use {worst.worst_utilization:.1%} on {worst.name}"
    if not rows:
        lines = []
    return "\n".join(lines + [summary])


def run(args: argparse.Namespace) -> int:
    deck = load_deck(args.rules)
    specs = load_net_file(deck, args.nets)
    engine = Engine(deck)
    reports = list(check_specs(engine, _with_progress(specs, "checking")))
    if args.json:
        json.dump([r.as_dict() for r in reports], sys.stdout, indent=1)
        sys.stdout.write("\n")
    else:
        print(format_table(reports, args.all))
    return 0 if all(r.legal for r in reports) else 1
