"""The ``etchguard`` command: one sub-command per job, each in its own module.

A sub-command module exposes ``HELP`` (one line), ``add_arguments(parser)`` and
``run(args) -> int``. Exit status: 0 legal / done, 1 violations found, 2 bad input,
3 an internal fault; each sub-command's ``--help`` states what its codes mean.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import traceback

from . import __version__
from ._errors import EtchguardError

# sub-command -> module implementing it
COMMANDS = {
    "check": "etchguard._cli_check",
    "advise": "etchguard._cli_advise",
    "report": "etchguard._cli_report",
    "serve": "etchguard.server.cli",
    "deck-from-lef": "etchguard._cli_deck_from_lef",
}

EXIT_OK, EXIT_VIOLATIONS, EXIT_BAD_INPUT, EXIT_INTERNAL = 0, 1, 2, 3

_BAD_INPUT = (f"{EXIT_BAD_INPUT} bad input (the message names file, line where there is one, "
              f"and field), {EXIT_INTERNAL} an internal fault (please report it with the input)")
# What each sub-command's exit status means, shown at the end of its --help.
EXIT_CODES = {
    "check": f"{EXIT_OK} every net legal, {EXIT_VIOLATIONS} violations found, {_BAD_INPUT}",
    "report": f"{EXIT_OK} every net legal, {EXIT_VIOLATIONS} violations found, {_BAD_INPUT}",
    "advise": (f"{EXIT_OK} the run is legal as it is or a legal fix was found, {EXIT_VIOLATIONS} only "
               f"illegal or blocked options exist, {_BAD_INPUT}"),
    "serve": f"{EXIT_OK} stopped cleanly (SIGTERM or Ctrl-C), {_BAD_INPUT} (settings, files, state folder)",
    "deck-from-lef": f"{EXIT_OK} deck written, {_BAD_INPUT}",
}


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(prog="etchguard", description=(
        "Process-antenna ratios for detail routers. The tool advises; the foundry's rule "
        "deck and sign-off verification decide."),
        epilog=f"exit status: {EXIT_OK} done or legal, {EXIT_VIOLATIONS} violations found, {_BAD_INPUT}; "
               "'etchguard COMMAND --help' says what each command's codes mean")
    parser.add_argument("--version", action="version", version=f"etchguard {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for name, module_name in COMMANDS.items():
        try:
            module = importlib.import_module(module_name)
        except ModuleNotFoundError as exc:
            if exc.name is None or not (module_name + ".").startswith(exc.name + "."):
                raise  # a missing dependency inside the module, not the module itself
            continue  # a sub-command not built into this tree
        p = sub.add_parser(name, help=module.HELP, description=module.HELP,
                           epilog=f"exit status: {EXIT_CODES[name]}")
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
    except KeyboardInterrupt:
        return 130  # the shell's code for a command ended by Ctrl-C
    except Exception:  # a fault of ours must not read as exit 1, "violations found"
        traceback.print_exc()
        print(f"etchguard {args.command}: internal error (exit {EXIT_INTERNAL}); please report it "
              "with the input that caused it", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":
    sys.exit(main())
