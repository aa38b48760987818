"""``etchguard check``: the offline check of a net file against a rule deck, or of a
design given as LEF (technology, then cells) and DEF."""

from __future__ import annotations

import argparse
import fnmatch
import json
import sys
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass
from operator import attrgetter
from typing import Any, TextIO, TypeVar

from ._engine import Engine
from ._errors import InputError
from ._kinds import Verdict
from ._lefdef import open_design, print_notes
from ._lefdef_tokens import Notes
from ._names import shown
from ._nets import NetSpec, iter_net_file
from ._progress import progress
from ._results import NetReport
from ._rules import Deck, load_deck

T = TypeVar("T")

HELP = "check every net of a net file against a rule deck, or of a LEF/DEF design (offline)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("nets", nargs="?", help="net file (JSON), with --rules")
    parser.add_argument("--rules", metavar="DECK", help="rule deck (TOML)")
    add_lefdef_arguments(parser)
    parser.add_argument("--json", action="store_true",
                        help="print JSON instead of a table (docs/formats.md describes it)")
    parser.add_argument("--all", action="store_true", help="table: list legal nets too")
    add_selection_arguments(parser)
    parser.add_argument("--progress", choices=("auto", "always", "never"), default="auto",
                        help="count the nets read and checked on stderr: auto on a terminal only")


def add_selection_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--net", dest="select_names", action="append", default=[], metavar="NAME",
                        help="look only at this net (repeatable); every net is still read and validated")
    parser.add_argument("--match", dest="select_patterns", action="append", default=[], metavar="PATTERN",
                        help="look only at nets whose name matches this shell-style pattern "
                             "('blk_a/*', 'n[0-9]?'; repeatable)")


def selected(items: Iterable[T], names: Sequence[str], patterns: Sequence[str],
             name_of: Callable[[T], str] = attrgetter("name")) -> Iterator[T]:
    """The nets (``NetSpec``s, or anything ``name_of`` names) named in ``names`` or
    matching one of ``patterns`` (all when both are empty). A name the input does not
    have, or a selection nothing matches, is refused once the input is read (an
    unselected net is still validated)."""
    if not names and not patterns:
        yield from items
        return
    wanted, seen, matched = set(names), set(), 0
    for item in items:
        name = name_of(item)
        if name in wanted or any(fnmatch.fnmatchcase(name, p) for p in patterns):
            seen.add(name)
            matched += 1
            yield item
    missing = sorted(wanted - seen)
    if missing:
        raise InputError(f"the input has no net {shown(missing[0])}"
                         + (f" (nor {len(missing) - 1} more of the names given)" if len(missing) > 1 else ""),
                         "--net")
    if not matched:
        raise InputError(f"no net matches {', '.join(shown(p) for p in patterns)}", "--match")


def add_lefdef_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--lef", action="append", default=[], metavar="LEF",
                        help="LEF file, repeatable: the technology LEF first, then cell LEFs")
    parser.add_argument("--def", dest="def_path", metavar="DEF", help="the design (DEF), with --lef")


def specs_from_args(args: argparse.Namespace) -> tuple[Deck, Iterable[NetSpec], int | None, Notes | None]:
    """(deck, nets, how many, LEF/DEF warnings) from either input form."""
    if args.lef or args.def_path:
        if args.nets or args.rules:
            raise InputError("give a net file with --rules, or --lef ... --def DESIGN, not both", "--def")
        if not args.def_path:
            raise InputError("--lef needs --def DESIGN (to convert a tech LEF alone: etchguard deck-from-lef)",
                             "--def")
        design = open_design(args.lef, args.def_path)
        return design.deck, design.nets, design.nets_declared, design.notes
    if not args.nets or not args.rules:
        raise InputError("give a net file and --rules DECK, or --lef TECH [--lef CELLS] --def DESIGN", "nets")
    deck = load_deck(args.rules)
    return deck, iter_net_file(deck, args.nets), None, None


def _with_progress(items: Iterable[NetSpec], total: int | None, label: str, when: str) -> Iterable[NetSpec]:
    """Count the nets as they are read and checked (the net file is read one net at a
    time, so reading shows too); ``when`` is auto, always or never."""
    if when == "never":
        return items
    return progress(items, total, label, force=when == "always")


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


@dataclass
class _Layer:
    name: str
    worst: float = 0.0  # the highest utilization of any net at the step
    worst_net: str = ""
    illegal_nets: int = 0  # nets with an illegal check at the step


class Tally:
    """What the table says, gathered one report at a time (the reports are not kept:
    only the rows the table shows): nets, illegal nets, the worst, and per process step
    the worst utilization and the illegal nets there."""

    def __init__(self, show_all: bool) -> None:
        self.show_all = show_all
        self.rows: list[NetReport] = []
        self.nets = self.illegal = 0
        self.worst: NetReport | None = None
        self.layers: dict[int, _Layer] = {}

    def add(self, report: NetReport) -> None:
        self.nets += 1
        self.illegal += not report.legal
        if self.worst is None or report.worst_utilization > self.worst.worst_utilization:
            self.worst = report
        if self.show_all or not report.legal:
            self.rows.append(report)
        illegal_steps = set()
        for c in report.checks:
            layer = self.layers.setdefault(c.step, _Layer(c.layer))
            if c.utilization > layer.worst or not layer.worst_net:
                layer.worst, layer.worst_net = c.utilization, report.name
            if not c.legal:
                illegal_steps.add(c.step)
        for step in illegal_steps:
            self.layers[step].illegal_nets += 1

    def table(self) -> str:
        lines = []
        if self.rows:
            rows = sorted(self.rows, key=lambda r: -r.worst_utilization)
            width = max([len(r.name) for r in rows] + [3])
            lines.append(f"{'net':<{width}}  {'verdict':<7}  {'use':>7}  worst check")
            lines += [f"{r.name:<{width}}  {Verdict.of(r.legal):<7}  {r.worst_utilization:>6.1%}  {_worst(r)}"
                      for r in rows]
            lines.append("")
        if self.layers:
            width = max(len(layer.name) for layer in self.layers.values())
            lines.append(f"{'layer':<{max(width, 5)}}  step  {'worst use':>9}  illegal nets  worst net")
            lines += [f"{layer.name:<{max(width, 5)}}  {step:>4}  {layer.worst:>9.1%}  {layer.illegal_nets:>12}  "
                      f"{layer.worst_net}" for step, layer in sorted(self.layers.items())]
            lines.append("")
        summary = f"{self.nets} nets checked, {self.illegal} {Verdict.ILLEGAL}"
        if self.worst is not None:
            summary += f"; highest use {self.worst.worst_utilization:.1%} on {self.worst.name}"
        return "\n".join(lines + [summary])


def write_json_array(items: Iterable[dict[str, Any]], out: TextIO) -> None:
    """A JSON array written one item at a time, as ``json.dump(list, indent=1)`` would."""
    out.write("[")
    count = 0
    for item in items:
        out.write(",\n " if count else "\n ")
        out.write(json.dumps(item, indent=1, allow_nan=False).replace("\n", "\n "))
        count += 1
    out.write("\n]\n" if count else "]\n")


def run(args: argparse.Namespace) -> int:
    deck, specs, total, notes = specs_from_args(args)
    engine = Engine(deck)
    if args.select_names or args.select_patterns:
        specs, total = selected(specs, args.select_names, args.select_patterns), None
    reports = check_specs(engine, _with_progress(specs, total, "checking", args.progress))
    legal = True
    if args.json:
        def dicts() -> Iterator[dict[str, Any]]:
            nonlocal legal
            for r in reports:
                legal &= r.legal
                yield r.as_dict()
        write_json_array(dicts(), sys.stdout)
    else:
        tally = Tally(args.all)
        for r in reports:
            tally.add(r)
        legal = tally.illegal == 0
        print(tally.table())
    if notes is not None:
        print_notes(notes, sys.stderr)
    return 0 if legal else 1
