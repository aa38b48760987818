"""Route an invented block twice through a real etchguard server and compare.

    .venv/bin/python client_examples/router/demo.py [--block FILE] [--server ADDRESS]

Without --server it starts ``etchguard serve`` on the demo deck on a free loopback
port, and stops it at the end. Both modes route the same block on the same server
(their nets are named apart); the table's figures come from these two runs.
"""

from __future__ import annotations

import argparse
import json
import os
import signal
import subprocess
import sys
import threading
from contextlib import contextmanager
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
REPO = HERE.parents[1]
DECK = REPO / "service" / "etchguard" / "data" / "lumen-6m.toml"
BLOCK = HERE / "data" / "blk_r.json"

from etchguard.client import Client  # noqa: E402

from route import Router, Stats, load_block  # noqa: E402


@contextmanager
def serve(deck: Path):
    """A real ``etchguard serve`` on 127.0.0.1 with a port the kernel picks."""
    cmd = [sys.executable, "-m", "etchguard.cli", "serve", "--rules", str(deck),
           "--listen", "127.0.0.1:0", "--metrics-port", "0"]
    proc = subprocess.Popen(cmd, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                            stderr=subprocess.PIPE, text=True, cwd=REPO,
                            env=dict(os.environ, PYTHONUNBUFFERED="1"))
    address: list[str] = []
    ready = threading.Event()

    def read() -> None:
        assert proc.stderr is not None
        for line in proc.stderr:
            try:
                entry = json.loads(line)
            except json.JSONDecodeError:
                continue
            if entry.get("msg") == "listening" and not address:
                address.append(entry["addresses"][0])
                ready.set()
        ready.set()

    threading.Thread(target=read, daemon=True).start()
    try:
        if not ready.wait(30) or not address:
            raise RuntimeError("etchguard serve did not start")
        yield address[0]
    finally:
        proc.send_signal(signal.SIGTERM)
        try:
            proc.wait(15)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()


def run_mode(address: str, block_path: Path, aware: bool, deck: Path = DECK, verbose: bool = False) -> Stats:
    block = load_block(block_path)
    with Client(address, timeout=120.0) as client:
        client.wait_ready(20)
        router = Router(client, block, aware, log=print if verbose else None)
        try:
            router.route_all()
            return router.finish(deck)
        finally:
            router.close()


COLUMNS = (("mode", "{}"), ("nets routed", "{}"), ("wirelength um", "{:.1f}"), ("vias", "{}"),
           ("antenna violations", "{}"), ("post-route diode um2", "{:.4f}"),
           ("no diode fixes", "{}"), ("hops", "{}"), ("jumpers", "{}"),
           ("diodes placed um2", "{:.4f}"), ("rip-ups", "{}"), ("unscored searches", "{}"), ("scored", "{}"), ("time s", "{:.1f}"))


def table(rows: list[Stats]) -> str:
    cells = [[c for c, _ in COLUMNS]]
    for s in rows:
        values = (s.mode, f"{s.routed}/{s.nets}", s.wirelength_um, s.vias, s.violations,
                  s.fix_diode_um2, s.fix_no_diode, s.hops, s.jumpers, s.diode_um2, s.ripups,
                  s.plain_searches, s.scored, s.seconds)
        cells.append([fmt.format(v) for (_, fmt), v in zip(COLUMNS, values)])
    widths = [max(len(row[i]) for row in cells) for i in range(len(COLUMNS))]
    lines = ["  ".join(c.rjust(w) if i else c.ljust(w) for i, (c, w) in enumerate(zip(row, widths)))
             for row in cells]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--block", type=Path, default=BLOCK, help="block file (JSON)")
    parser.add_argument("--server", help="address of a running server on the demo deck")
    parser.add_argument("--verbose", action="store_true", help="print rip-ups and repairs")
    args = parser.parse_args(argv)

    def both(address: str) -> list[Stats]:
        return [run_mode(address, args.block, aware, verbose=args.verbose) for aware in (False, True)]

    if args.server:
        rows = both(args.server)
    else:
        with serve(DECK) as address:
            rows = both(address)
    print(f"block {load_block(args.block).name}: {rows[0].nets} nets, deck {DECK.name}")
    print(table(rows))
    for s in rows:
        for note in s.unrepaired:
            print(f"  {s.mode}: {note}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
