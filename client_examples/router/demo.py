"""Route an invented block three ways through a real etchguard server and compare.

    .venv/bin/python client_examples/router/demo.py [--block FILE] [--server ADDRESS]

Without --server it starts ``etchguard serve`` on the demo deck on a free loopback
port, and stops it at the end. The modes (blind; aware; blind followed by repair from
advice) route the same block on the same server (their nets are named apart); the
table's figures come from these runs.
"""

from __future__ import annotations

import argparse
import os
import sys
from contextlib import contextmanager
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
REPO = HERE.parents[1]
DECK = REPO / "service" / "etchguard" / "data" / "lumen-6m.toml"
BLOCK = HERE / "data" / "blk_r.json"

from etchguard.client import Client  # noqa: E402
from etchguard.server.launch import launch  # noqa: E402
from route import Router, Stats, load_block  # noqa: E402


@contextmanager
def serve(deck: Path):
    """A real ``etchguard serve`` on 127.0.0.1 with a port the kernel picks."""
    server = launch(["--rules", str(deck), "--listen", "127.0.0.1:0"], cwd=REPO)
    try:
        yield server.address
    finally:
        server.stop()


MODES = {"blind": dict(aware=False), "aware": dict(aware=True), "blind + repair": dict(aware=False, repair_after=True)}


def run_mode(address: str, block_path: Path, mode: str, deck: Path = DECK, verbose: bool = False) -> Stats:
    block = load_block(block_path)
    with Client(address, timeout=120.0) as client:
        client.wait_ready(20)
        router = Router(client, block, log=print if verbose else None, **MODES[mode])  # type: ignore[arg-type]
        try:
            router.route_all()
            return router.finish(deck)
        finally:
            router.close()


COLUMNS = (("mode", "{}"), ("nets routed", "{}"), ("wirelength um", "{:.1f}"), ("vias", "{}"),
           ("nets still illegal", "{}"), ("repairs", "{}"), ("added vias", "{}"), ("diode um2", "{:.4f}"),
           ("rip-ups", "{}"), ("service calls", "{}"), ("cand/call p50", "{:g}"), ("service s", "{:.1f}"),
           ("client build s", "{:.1f}"), ("time s", "{:.1f}"), ("router cpu s", "{:.1f}"))


def table(rows: list[Stats]) -> str:
    cells = [[c for c, _ in COLUMNS]]
    for s in rows:
        m = s.meter
        values = (s.mode, f"{s.routed}/{s.nets}", s.wirelength_um, s.vias, s.violations, s.repairs,
                  s.added_vias, s.diode_um2, s.ripups, m.calls, m.batch_p50, m.seconds, m.build_seconds,
                  s.seconds, s.cpu_seconds)
        cells.append([fmt.format(v) for (_, fmt), v in zip(COLUMNS, values)])
    widths = [max(len(row[i]) for row in cells) for i in range(len(COLUMNS))]
    lines = ["  ".join(c.rjust(w) if i else c.ljust(w) for i, (c, w) in enumerate(zip(row, widths)))
             for row in cells]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def details(s: Stats) -> str:
    """Where a mode's calls went, and what the router priced without one."""
    m = s.meter
    ops = ", ".join(f"{op} {n}" for op, n in sorted(m.requests.items()))
    out = f"  {s.mode}: requests by op: {ops}"
    if m.batch_sizes:
        out += (f"; ScoreBatch candidates {sum(m.batch_sizes)} in {len(m.batch_sizes)} calls; budgets "
                f"{m.budgets}; priced locally from budgets {m.local}")
    out += f"; hops {s.hops}, jumpers {s.jumpers}, diodes {s.diodes}; search expansions {s.expanded}"
    if s.sinks_screened:
        out += (f"; sink paths searched unpriced and scored whole {s.sinks_screened}, of them searched "
                f"again with prices {s.sinks_repriced}")
    if s.repriced:
        outcomes = [r[-1] for r in s.repriced]
        out += (f" (found a legal path {outcomes.count('found')}, none within the detour "
                f"{outcomes.count('none')}, out of budget {outcomes.count('out of budget')}; "
                f"{sum(r[3] for r in s.repriced)} expansions)")
        if outcomes.count("skipped"):
            out += (f"; repaired without a priced search, their plain search already past its "
                    f"ceiling {outcomes.count('skipped')}")
    if s.plain_searches:
        out += f"; scored searches out of budget {s.plain_searches}"
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--block", type=Path, default=BLOCK, help="block file (JSON)")
    parser.add_argument("--server", help="address of a running server on the demo deck")
    parser.add_argument("--verbose", action="store_true", help="print rip-ups and repairs")
    args = parser.parse_args(argv)

    def every(address: str) -> list[Stats]:
        return [run_mode(address, args.block, mode, verbose=args.verbose) for mode in MODES]

    if args.server:
        rows = every(args.server)
    else:
        with serve(DECK) as address:
            rows = every(address)
    print(f"block {load_block(args.block).name}: {rows[0].nets} nets, deck {DECK.name}")
    print(table(rows))
    for s in rows:
        print(details(s))
    blind, aware, fixed = rows
    print(f"ratios to blind: aware time {aware.seconds / blind.seconds:.2f}x (router cpu "
          f"{aware.cpu_seconds / blind.cpu_seconds:.2f}x), blind + repair time {fixed.seconds / blind.seconds:.2f}x "
          f"(router cpu {fixed.cpu_seconds / blind.cpu_seconds:.2f}x); aware wirelength "
          f"{aware.wirelength_um / blind.wirelength_um:.3f}x, vias {aware.vias / blind.vias:.3f}x")
    print(f"load average (1, 5, 15 min) at the end: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")
    for s in rows:
        for name, why in s.unrepaired:
            print(f"  {s.mode}: {name}: {why}")
        for failure in s.advice_failures:
            print(f"  {s.mode}: advice failed for {failure}")
        if s.notes_outdated:
            print(f"  {s.mode}: {s.notes_outdated} net(s) noted illegal after a repair while routing are "
                  "legal at the end (a later change fixed them)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
