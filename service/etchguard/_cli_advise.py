"""``etchguard advise``: repair advice for one candidate run, for people at a terminal.

Loads every net of the net file (so other nets' metal counts as obstacles), then asks
the engine for advice on a run of the named net. Exit status: 0 when the run is legal
as is or a legal fix was found, 1 when only illegal (or blocked) options exist, 2 on
bad input.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any

from ._advice import ANSWERS, Advice
from ._engine import Engine
from ._errors import InputError
from ._nets import load_net_file, resolve_layer
from ._protojson import message_dict
from ._rules import Deck, load_deck

HELP = "advise on a candidate run of one net: nearest legal layer hop, jumper point, diode"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("nets", help="net file (JSON); every net in it is loaded")
    parser.add_argument("--rules", required=True, metavar="DECK", help="rule deck (TOML)")
    parser.add_argument("--net", required=True, help="the net the run belongs to")
    parser.add_argument("--run", required=True, nargs=5, metavar=("LAYER", "X1", "Y1", "X2", "Y2"),
                        help="the candidate run: routing layer name and centre-line end points (DBU)")
    parser.add_argument("--width", type=int, default=None, metavar="DBU",
                        help="run width in DBU (default: the layer's)")
    parser.add_argument("--non-preferred", action="store_true",
                        help="also consider layers whose preferred direction differs from the run's")
    parser.add_argument("--only", nargs="+", choices=ANSWERS, default=None, metavar="ANSWER",
                        help=f"compute only these answers ({', '.join(ANSWERS)}; default: all)")
    parser.add_argument("--json", action="store_true", help="print the whole advice as JSON")


def advice_dict(advice: Advice, deck: Deck) -> dict[str, Any]:
    """The advice as the API's ``AdviseReply`` says it (its field names and units), in
    the command line's one JSON form of a message (``_protojson``)."""
    from .server import convert
    from .v1 import etchguard_pb2 as pb

    reply = pb.AdviseReply()
    convert.advice_into(reply, advice, [layer.name for layer in deck.layers])
    return message_dict(reply)


# The engine's field names (AdviseRequest's) -> what the user typed: every field an
# error names is an option, the parts of --run by its metavar.
_OPTION_FIELDS = {"layer": "--run LAYER", "x1": "--run X1", "y1": "--run Y1", "x2": "--run X2",
                  "y2": "--run Y2", "run": "--run", "width": "--width", "want": "--only", "net": "--net"}


def format_text(advice: Advice) -> str:
    lines = [f"net {advice.net}: {advice.layer} run {advice.run} width {advice.width}"]
    lines += [f"  warning: {w}" for w in advice.warnings]
    lines += [f"  {sentence}" for sentence in advice.explanation]
    if advice.options:
        lines.append("  layer  state    use      cuts  blocked by")
        for o in advice.options:
            u = o.score.worst_utilization
            use = "inf" if math.isinf(u) else f"{u:.1%}"
            blocker = ", ".join(sorted({c.owner for c in o.conflicts})) or "-"
            lines.append(f"  {o.layer:<5}  {o.status:<7}  {use:>7}  {o.cuts:>4}  {blocker}")
    if advice.best is not None:
        lines.append(f"  shapes for {advice.best.layer} (layer, rect in DBU):")
        lines += [f"    {p.layer:<4} {list(p.rect)}" for p in advice.best.shapes]
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    deck = load_deck(args.rules)
    specs = load_net_file(deck, args.nets)
    layer = resolve_layer(deck, args.run[0], _OPTION_FIELDS["layer"])
    coords = []
    for name, text in zip(("x1", "y1", "x2", "y2"), args.run[1:]):
        try:
            coords.append(int(text))
        except ValueError:
            raise InputError(f"coordinates are integer DBU, got {text!r}", _OPTION_FIELDS[name]) from None
    if not any(s.name == args.net for s in specs):
        raise InputError(f"the net file has no net {args.net!r}", "--net")
    engine = Engine(deck)
    for spec in specs:
        engine.open_net(spec.name, spec.pins, spec.layer_range, spec.shapes)
    try:
        x1, y1, x2, y2 = coords
        advice = engine.advise(args.net, layer, x1, y1, x2, y2, width=args.width,
                               allow_non_preferred=args.non_preferred, want=args.only)
    except InputError as exc:  # the engine names the API's fields; this command's are options
        raise InputError(exc.message, _OPTION_FIELDS.get(exc.field or "", exc.field)) from None
    if args.json:
        json.dump(advice_dict(advice, deck), sys.stdout, indent=1, allow_nan=False)
        sys.stdout.write("\n")
    else:
        print(format_text(advice))
    return 0 if advice.found else 1
