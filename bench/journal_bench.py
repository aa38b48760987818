"""Journal bench: what the journal costs a streamed commit.

Three ``etchguard serve`` processes on loopback, started in this run on the demo deck:
no journal (the baseline), ``--state-dir --sync batch`` (the default policy) and
``--sync always`` (shown for scale). One Python client opens a net on each and sends
commits of one rectangle on a Session stream, one at a time (send, wait for the
reply), rips them up again every 64 commits so the net stays router-sized (the
rip-ups are journaled too, and not timed). Rounds alternate the servers, order
rotated every round, so the machine's drift hits all; p50 and p99 are over all
rounds. The figure asked for is ``batch p50 / no-journal p50`` (target <= 1.2).

    python -m bench.journal_bench [--rounds N] [--commits N] [--json PATH]

Prints one table and writes bench/out/journal_bench.json. Bounded: a time budget
(45 s of measuring) stops the rounds early, and says so.
"""

from __future__ import annotations

import argparse
import json
import platform
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from etchguard.client import Client, pin, rect

from .rounds import start_ours

OUT_DIR = Path(__file__).resolve().parent / "out"
REPO = Path(__file__).resolve().parents[1]
DECK = REPO / "service" / "etchguard" / "data" / "lumen-6m.toml"
BUDGET_S = 45.0
GATE = pin("u1.a", "M1", [(0, 0, 200, 200)], gate_area={"thin": 0.05})


def start(extra: list[str]) -> tuple[subprocess.Popen, str]:
    proc, ready = start_ours(["--listen", "127.0.0.1:0", "--rules", str(DECK), *extra])
    return proc, ready["addresses"][0]


def round_of_commits(session, net: str, commits: int, x0: int) -> list[float]:
    """Per-commit round trip (s) of ``commits`` one-rectangle commits on the stream."""
    out, live = [], []
    for k in range(commits):
        x = x0 + (k % 64) * 300
        t0 = time.perf_counter()
        live += session.commit(net, [rect("M1", x, 30, x + 400, 170)])
        out.append(time.perf_counter() - t0)
        if len(live) >= 64:
            session.remove(net, live)
            live = []
    if live:
        session.remove(net, live)
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.journal_bench", description=__doc__.split("\n")[0])
    parser.add_argument("--rounds", type=int, default=12)
    parser.add_argument("--commits", type=int, default=400, help="commits per server per round")
    parser.add_argument("--json", type=Path, default=OUT_DIR / "journal_bench.json")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory() as tmp:
        configs = {"no journal": [], "batch": ["--state-dir", f"{tmp}/batch", "--sync", "batch"],
                   "always": ["--state-dir", f"{tmp}/always", "--sync", "always"]}
        servers = {name: start(extra) for name, extra in configs.items()}
        samples: dict[str, list[float]] = {name: [] for name in configs}
        clients, sessions = [], {}
        rounds_done, stopped_early = 0, False
        try:
            for name, (_, address) in servers.items():
                c = Client(address, timeout=30)
                clients.append(c)
                c.open_net("bench/n", [GATE])
                sessions[name] = c.session()
                round_of_commits(sessions[name], "bench/n", 64, 0)  # warm up
            t_start = time.monotonic()
            names = list(configs)
            for r in range(args.rounds):
                order = names[r % len(names):] + names[:r % len(names)]
                for name in order:
                    samples[name] += round_of_commits(sessions[name], "bench/n", args.commits, 0)
                rounds_done += 1
                if time.monotonic() - t_start > BUDGET_S:
                    stopped_early = r + 1 < args.rounds
                    break
        finally:
            for s in sessions.values():
                s.close()
            for c in clients:
                c.close()
            for proc, _ in servers.values():
                proc.terminate()
                proc.wait(20)
    rows = {name: {"p50_us": float(np.percentile(v, 50) * 1e6), "p99_us": float(np.percentile(v, 99) * 1e6),
                   "commits": len(v)} for name, v in samples.items()}
    base = rows["no journal"]["p50_us"]
    for row in rows.values():
        row["p50_ratio"] = row["p50_us"] / base
    print("journal bench: streamed one-rectangle commit, round trip (one client, loopback)")
    print(f"{'server':<12}{'p50 us':>10}{'p99 us':>10}{'p50 / no journal':>20}{'commits':>10}")
    for name, row in rows.items():
        print(f"{name:<12}{row['p50_us']:>10.1f}{row['p99_us']:>10.1f}{row['p50_ratio']:>20.3f}{row['commits']:>10}")
    target = rows["batch"]["p50_ratio"]
    print(f"--sync batch / no journal p50 = {target:.3f} (target <= 1.2: {'met' if target <= 1.2 else 'NOT met'})"
          + (f"; time budget stopped after {rounds_done} rounds" if stopped_early else ""))
    args.json.parent.mkdir(parents=True, exist_ok=True)
    args.json.write_text(json.dumps({"rows": rows, "rounds": rounds_done, "stopped_early": stopped_early,
                                     "machine": platform.platform(), "python": platform.python_version()},
                                    indent=2) + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
