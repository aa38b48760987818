"""What the client benches share: the options of a run against ours and the echo floor."""

from __future__ import annotations

import argparse
from pathlib import Path


def round_arguments(prog: str, doc: str | None, rounds: int, json_path: Path,
                    argv: list[str] | None) -> argparse.Namespace:
    """Parse the options of a bench that alternates rounds between our server and the
    bare echo floor (``--quick``: a few calls only, a smoke test)."""
    parser = argparse.ArgumentParser(prog=prog, description=(doc or "").split("\n")[0])
    parser.add_argument("--quick", action="store_true", help="a few calls only (smoke test)")
    parser.add_argument("--rounds", type=int, default=rounds, help="alternating rounds per case")
    parser.add_argument("--calls", type=int, default=400, help="timed calls per round and server")
    parser.add_argument("--batches", type=int, default=6, help="timed batches per round and server")
    parser.add_argument("--shapes", type=int, default=50, help="routed shapes of the bench net")
    parser.add_argument("--json", type=Path, default=json_path, help="where the rows go")
    args = parser.parse_args([] if argv is None else argv)
    if args.quick:
        args.rounds, args.calls, args.batches = 1, 30, 1
    return args
