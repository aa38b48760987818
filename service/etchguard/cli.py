"""The ``etchguard`` command: one sub-command per job, each in its own module.

A sub-command module exposes ``HELP`` (one line), ``add_arguments(parser)`` and
``run(args) -> int``. Exit status: 0 legal / done, 1 violations found, 2 bad input.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from ._errors import EtchguardError

# sub-command -> module implementing it
COMMANDS = {
    "check": "etchguard._cli_check",
    "advise": "etchguard._cli_advise",
    "report": "etchguard._cli_report",
    "serve": "etchguard.server.cli",
    "deck-from-lef": "etchguard._cli_deck_from_lef",
}

EXIT_OK, EXIT_VIOLATIONS, EXIT_BAD_INPUT = 0, 1, 2


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="etchguard", description=(
        "Process-antenna ratios for detail routers. The tool advises; the foundry's rule "
        "deck and sign-off verification decide."))
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for name, module_name in COMMANDS.items():
        try:
            module = importlib.import_module(module_name)
        except ModuleNotFoundError as exc:
            if exc.name is None or not (module_name + ".").startswith(exc.name + "."):
                raise  # a missing dependency inside the module, not the module itself
            continue  # a sub-command not built into this tree
        p = sub.add_parser(name, help=module.HELP, description=module.HELP)
        module.add_arguments(p)
        p.set_defaults(_run=module.run)
    return parser


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    try:
        return int(args._run(args))
    except EtchguardError as exc:
        print(f"etchguard {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except BrokenPipeError:  # output piped into a pager or `head` that quit early
        sys.stderr.close()
        return EXIT_OK


if __name__ == "__main__":
    sys.exit(main())
