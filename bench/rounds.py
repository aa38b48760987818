"""What the client benches share: the options of a run against ours and the echo
floor, and the starting and stopping of those server processes."""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import threading
from collections.abc import Callable
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


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


def start_process(cmd: list[str], ready: Callable[[str], str | None], on_stderr: bool,
                  timeout_s: float = 30.0) -> tuple[subprocess.Popen, str]:
    """Start a server process; return it with the address its ready line names."""
    proc = subprocess.Popen(cmd, cwd=REPO, stdin=subprocess.DEVNULL, text=True,
                            stdout=subprocess.DEVNULL if on_stderr else subprocess.PIPE,
                            stderr=subprocess.PIPE if on_stderr else subprocess.DEVNULL,
                            env=dict(os.environ, PYTHONUNBUFFERED="1"))
    pipe = proc.stderr if on_stderr else proc.stdout
    assert pipe is not None
    found: list[str] = []
    event = threading.Event()

    def read() -> None:  # keeps draining, so the server never blocks on a full pipe
        for line in pipe:
            if not found:
                address = ready(line)
                if address:
                    found.append(address)
                    event.set()
        event.set()

    threading.Thread(target=read, daemon=True).start()
    if not event.wait(timeout_s) or not found:
        proc.kill()
        raise RuntimeError(f"{' '.join(cmd[2:5])} did not start")
    return proc, found[0]


def stop_process(proc: subprocess.Popen | None) -> None:
    if proc is not None and proc.poll() is None:
        proc.terminate()
        try:
            proc.wait(15)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()


def _json_field(line: str, pick: Callable[[dict], str | None]) -> str | None:
    try:
        entry = json.loads(line)
    except json.JSONDecodeError:
        return None
    return pick(entry) if isinstance(entry, dict) else None


def start_ours(args: list[str], ready_message: str = "listening") -> tuple[subprocess.Popen, dict]:
    """``etchguard serve ARGS`` through the package's launcher: the process and its
    ready log line (``addresses``, ``metrics_port``, ...)."""
    from etchguard.server.launch import launch

    server = launch(args, cwd=REPO, ready_message=ready_message)
    return server.proc, server.ready


def echo_ready(line: str) -> str | None:
    """The address the bare echo server prints when it listens."""
    return _json_field(line, lambda e: e.get("listening"))
