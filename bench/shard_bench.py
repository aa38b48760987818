"""Farm bench: two shards against one, and what the sharding client costs.

Real processes on loopback, all measured in this run (medians of alternating rounds,
ratios between cases; nothing here compares with a fixed time):

* **Batch throughput, 2 shards vs 1.** ``etchguard serve --shards 1`` and ``--shards
  2`` (the same supervisor path), the same nets opened through the sharding client;
  ``--clients`` client processes each send ``--batches`` ScoreBatch calls of
  ``--candidates`` one-rectangle candidates, cycling over nets that spread over every
  shard. Figure: candidates scored per second over the whole round.
* **Client overhead.** The same unary Score (and the same Session score) sent by the
  plain client to a plain ``etchguard serve`` and by the sharding client to a
  one-shard farm (routing, the shard's ownership check, the shard service around it).
  Figure: median latency per call, and the ratio.
* **Memory per held shape.** Resident memory growth of the plain server and of the
  farm's shards (summed) while the same nets are opened, per held shape.

    python -m bench.shard_bench [--quick] [--rounds N] [--clients N]
"""

from __future__ import annotations

import argparse
import json
import multiprocessing
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from bench.rounds import REPO, start_ours, stop_process

DECK = REPO / "service" / "etchguard" / "data" / "lumen-6m.toml"
JSON_PATH = REPO / "bench" / "out" / "shard_bench.json"


def start_farm(shards: int, run_dir: Path):
    proc, ready = start_ours(["--shards", str(shards), "--listen", "127.0.0.1:0", "--rules", str(DECK),
                              "--topology-out", str(run_dir / f"topology-{shards}")], "shards listening")
    return proc, Path(ready["topology"]), ready["pids"]


def start_single():
    proc, ready = start_ours(["--listen", "127.0.0.1:0", "--rules", str(DECK)])
    return proc, ready["addresses"][0]


def net_names(count: int) -> list[str]:
    return [f"blk_bench/n{i}" for i in range(count)]


def open_nets(client, names: list[str]) -> int:
    """Open the bench nets (a gate, a driver, an M1 trunk and a via each); returns shapes held."""
    from etchguard.client import pin, rect, via
    shapes = 0
    for i, name in enumerate(names):
        x0 = 50_000 * (i % 40)
        y0 = 50_000 * (i // 40)
        client.open_net(name, [pin(f"u{i}.a", "M1", [(x0, y0, x0 + 200, y0 + 200)], gate_area={"thin": 0.05}),
                               pin(f"u{i}.y", "M1", [(x0 + 20_000, y0, x0 + 20_200, y0 + 200)], diff_area=0.3)])
        trunk = [rect("M1", x0, y0 + 30, x0 + 20_200, y0 + 170)] + via(client.deck, "V1", x0 + 4900, y0 + 100)
        for k in range(6):  # a little more metal: a realistic idle footprint per net
            trunk.append(rect("M2", x0 + 4800 + 10 * k, y0, x0 + 5000 + 10 * k, y0 + 3000 + 500 * k))
        shapes += len(client.commit(name, trunk))
    return shapes


def _batch_worker(topology: str, names: list[str], batches: int, candidates: int, start, out) -> None:
    from etchguard.client import candidate_columns, pb
    from etchguard.sharded_client import ShardedClient
    lengths = np.linspace(2000, 200_000, candidates).astype(np.int64)
    with ShardedClient(Path(topology), timeout=120) as farm:
        requests = []
        for i, name in enumerate(names):
            x0, y0 = 50_000 * (int(name.rsplit("n", 1)[1]) % 40), 50_000 * (int(name.rsplit("n", 1)[1]) // 40)
            rects = np.column_stack([np.full(candidates, x0 + 4800), np.full(candidates, y0),
                                     np.full(candidates, x0 + 5000), y0 + lengths])
            requests.append((farm.client_for(name), pb.ScoreBatchRequest(net=name, candidates=candidate_columns(rects, "M2"))))
        requests[0][0].stub.ScoreBatch(requests[0][1])  # warm the channels
        start.wait()
        cpu0 = time.process_time()
        for b in range(batches):
            client, request = requests[b % len(requests)]
            client.stub.ScoreBatch(request, timeout=120)
        cpu = time.process_time() - cpu0
    out.put((batches * candidates, cpu))


def cpu_s(pid: int) -> float:
    """User + system CPU seconds of a process (/proc/PID/stat fields 14 and 15)."""
    import os
    fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def batch_round(topology: Path, names: list[str], clients: int, batches: int, candidates: int,
                shard_pids: list[int]) -> tuple[float, float, float]:
    """(candidates/s, client CPU us per candidate, shard CPU us per candidate) of one round."""
    ctx = multiprocessing.get_context("spawn")
    start, out = ctx.Event(), ctx.Queue()
    share = [names[i::clients] for i in range(clients)]
    procs = [ctx.Process(target=_batch_worker, args=(str(topology), share[i], batches, candidates, start, out))
             for i in range(clients)]
    for p in procs:
        p.start()
    time.sleep(2.0)  # let every worker connect and warm up before the clock starts
    server0 = sum(cpu_s(pid) for pid in shard_pids)
    t0 = time.perf_counter()
    start.set()
    results = [out.get(timeout=600) for _ in procs]
    elapsed = time.perf_counter() - t0
    server = sum(cpu_s(pid) for pid in shard_pids) - server0
    for p in procs:
        p.join(30)
    scored = sum(r[0] for r in results)
    return scored / elapsed, sum(r[1] for r in results) / scored * 1e6, server / scored * 1e6


def latency_round(call, calls: int) -> float:
    times = []
    for _ in range(calls):
        t0 = time.perf_counter()
        call()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def rss_kib(pid: int) -> int:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1])
    return 0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.shard_bench", description=__doc__.split("\n")[0])
    parser.add_argument("--quick", action="store_true", help="a few calls only (smoke test)")
    parser.add_argument("--rounds", type=int, default=5)
    parser.add_argument("--clients", type=int, default=2, help="client processes in the throughput case")
    parser.add_argument("--batches", type=int, default=60, help="ScoreBatch calls per client and round")
    parser.add_argument("--candidates", type=int, default=1024, help="candidates per ScoreBatch")
    parser.add_argument("--calls", type=int, default=400, help="timed unary calls per round")
    parser.add_argument("--nets", type=int, default=400, help="nets opened on every server")
    parser.add_argument("--json", type=Path, default=JSON_PATH)
    args = parser.parse_args([] if argv is None else argv)
    if args.quick:
        args.rounds, args.batches, args.calls, args.nets = 1, 4, 20, 16
    from etchguard.client import Client, run
    from etchguard.sharded_client import ShardedClient

    names = net_names(args.nets)
    rows: dict[str, object] = {"rounds": args.rounds, "clients": args.clients, "candidates": args.candidates}
    procs = []
    with tempfile.TemporaryDirectory() as tmp:
        try:
            one, topo1, pids1 = start_farm(1, Path(tmp))
            procs.append(one)
            two, topo2, pids2 = start_farm(2, Path(tmp))
            procs.append(two)
            single, address = start_single()
            procs.append(single)
            single_pid = single.pid  # `etchguard serve` runs in the process started
            before = {"single": rss_kib(single_pid), "farm2": sum(rss_kib(p) for p in pids2)}
            with Client(address) as plain, ShardedClient(topo1) as f1, ShardedClient(topo2) as f2:
                shapes = open_nets(plain, names)
                open_nets(f1, names)
                open_nets(f2, names)
                after = {"single": rss_kib(single_pid), "farm2": sum(rss_kib(p) for p in pids2)}
                rows["bytes_per_shape"] = {k: round((after[k] - before[k]) * 1024 / shapes, 1) for k in after}
                # throughput: alternate 1-shard and 2-shard rounds
                thr: dict[str, list[tuple[float, float, float]]] = {"1 shard": [], "2 shards": []}
                for _ in range(args.rounds):
                    thr["1 shard"].append(batch_round(topo1, names, args.clients, args.batches, args.candidates, pids1))
                    thr["2 shards"].append(batch_round(topo2, names, args.clients, args.batches, args.candidates, pids2))
                med = {k: statistics.median(r[0] for r in v) for k, v in thr.items()}
                rows["candidates_per_s"] = {k: round(v) for k, v in med.items()}
                rows["two_vs_one"] = round(med["2 shards"] / med["1 shard"], 3)
                # where the CPU goes: on a 2-core machine the client processes share the
                # cores with the shards, which bounds what a second shard can add
                rows["cpu_us_per_candidate"] = {k: {"clients": round(statistics.median(r[1] for r in v), 3),
                                                    "shards": round(statistics.median(r[2] for r in v), 3)}
                                                for k, v in thr.items()}
                # client overhead: plain client + plain server vs sharding client + 1-shard farm
                net = names[0]
                candidate = [run("M2", 4900, 100, 4900, 30_000)]
                lat: dict[str, list[float]] = {"plain unary": [], "sharded unary": [], "plain session": [],
                                               "sharded session": []}
                with plain.session() as ps, f1.session() as fs:
                    for _ in range(args.rounds):
                        lat["plain unary"].append(latency_round(lambda: plain.score(net, candidate), args.calls))
                        lat["sharded unary"].append(latency_round(lambda: f1.score(net, candidate), args.calls))
                        lat["plain session"].append(latency_round(lambda: ps.score(net, candidate), args.calls))
                        lat["sharded session"].append(latency_round(lambda: fs.score(net, candidate), args.calls))
                med_lat = {k: statistics.median(v) for k, v in lat.items()}
                rows["latency_us"] = {k: round(v * 1e6, 1) for k, v in med_lat.items()}
                rows["sharded_vs_plain"] = {
                    "unary": round(med_lat["sharded unary"] / med_lat["plain unary"], 3),
                    "session": round(med_lat["sharded session"] / med_lat["plain session"], 3)}
        finally:
            for p in procs:
                stop_process(p)
    args.json.parent.mkdir(parents=True, exist_ok=True)
    args.json.write_text(json.dumps(rows, indent=2) + "\n")
    print(json.dumps(rows, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
