"""gRPC bench: what etchguard's service costs a router, against a bare echo floor.

Both servers run in this run, on loopback, as separate processes, called by the same
Python client with the same requests:

* **ours**: ``etchguard serve`` on the bench deck (metrics on, as in production),
  holding one generated net (``bench.netgen``, 50 shapes);
* **floor**: ``bench.echo_server``, the same gRPC server (``grpc_server``: pool,
  options, limits) answering raw bytes with the replies ours gave to the same
  requests, captured just before: same message sizes both ways, no protobuf, no engine.

Each case is measured in rounds that alternate floor and ours (order swapped every
round), so the machine's drift hits both; p50 and p99 are over all rounds. Columns
that explain a ratio, measured in this process in thread CPU time (no transport):
``engine us``, the engine call alone (p50); ``service us``, what the service layer
adds to it (request parse, conversion, servicer, reply, metrics, serialization: the
median of paired differences). ``server cpu`` is ours / the floor's process CPU per
call (all threads, from /proc). Candidates mix run extensions (1 shape) and via +
run (4 shapes); the batch rows are 1,024 run extensions (one rectangle each) and
1,024 of the mix, both on the engine's columnar path (``score_columns``).

Target: streamed score p50 <= 1.10 x floor p50, in the same run. The other
rows have no target of their own here (the batch target is measured from
the C++ client, bench/cpp_bench.py). Ratios are reported; nothing here fails on them.

    python -m bench.grpc_bench [--quick] [--rounds N] [--calls N] [--batches N] [--json PATH]

Prints one table and writes bench/out/grpc_bench.json (``--json``). Bounded to
about a minute (a time budget stops the rounds early, and says so).
"""

from __future__ import annotations

import base64
import json
import os
import platform
import random
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import asdict, dataclass
from pathlib import Path

import grpc
import numpy as np
from etchguard import Engine
from etchguard._jobs import Jobs
from etchguard.client import Client, candidate_columns, pb
from etchguard.server.metrics import Metrics
from etchguard.server.servicer import AntennaServicer

from .netgen import BENCH_DECK, bench_deck, extension_candidates, generate_net, via_run_candidates
from .rounds import echo_ready, round_arguments, start_ours, start_process, stop_process

OUT_DIR = Path(__file__).resolve().parent / "out"
REPO = Path(__file__).resolve().parents[1]
SERVICE = "/etchguard.v1.AntennaService"
RATIO_TARGET = 1.10
BATCH_SIZE = 1024
NET = "bench"
TIME_BUDGET_S = 100.0


@dataclass
class Row:
    method: str
    p50_us: float
    p99_us: float
    floor_p50_us: float
    ratio: float
    target: str
    engine_p50_us: float  # the engine call alone, in process
    service_us: float  # what the service layer adds to it, in process (paired median)
    cpu_us: float  # our server process's CPU per call (all threads)
    floor_cpu_us: float  # the echo server's CPU per call
    throughput: str
    met: bool | None


def _pct(values: list[int], q: float) -> float:
    s = sorted(values)
    return s[min(len(s) - 1, int(q * len(s)))] / 1000.0  # ns -> us


def _pb_shapes(deck, shapes) -> list[pb.Shape]:
    names = [l.name for l in deck.layers]
    return [pb.Shape(layer=names[s.layer], rect=pb.Rect(xlo=s.rect[0], ylo=s.rect[1], xhi=s.rect[2], yhi=s.rect[3]))
            for s in shapes]


def _pb_pins(deck, pins) -> list[pb.Pin]:
    names = [l.name for l in deck.layers]
    return [pb.Pin(name=p.name, layer=names[p.layer],
                   rects=[pb.Rect(xlo=r[0], ylo=r[1], xhi=r[2], yhi=r[3]) for r in p.rects],
                   gate_area=dict(p.gate_area), diff_area=p.diff_area,
                   cell_area={names[k]: v for k, v in p.cell_area.items()}) for p in pins]


def _columns(deck, candidates) -> pb.CandidateColumns:
    names = [l.name for l in deck.layers]
    rects = [s.rect for c in candidates for s in c]
    layers = [names[s.layer] for c in candidates for s in c]
    return candidate_columns(rects, layers, [len(c) for c in candidates])


class _InProcess:
    """The little of a grpc.ServicerContext the servicer reads on a call that succeeds:
    no job named (the unnamed job), no deadline, never cancelled."""

    def invocation_metadata(self):
        return ()

    def time_remaining(self):
        return None

    def is_active(self) -> bool:
        return True


class Case:
    """One measured question: how to ask it on a client, and its canned replies."""

    def __init__(self, name: str, label: str, kind: str, requests: list, op: str = "",
                 engine: Callable[[int], object] | None = None, per_call: int = 1) -> None:
        self.name, self.label, self.kind, self.requests, self.op = name, label, kind, requests, op
        self.engine, self.per_call = engine, per_call

    def translator(self, servicer: AntennaServicer) -> Callable[[int], object]:
        """Request i through the service layer in this process: bytes in, the servicer
        (conversion, engine call, reply, metrics), bytes out; no transport."""
        if self.kind == "stream":
            wire = [pb.SessionRequest(seq=i + 1, **{self.op: r}).SerializeToString()
                    for i, r in enumerate(self.requests)]
            parse = pb.SessionRequest.FromString
            return lambda i: [r.SerializeToString() for r in servicer.Session(iter([parse(wire[i])]), _InProcess())]
        wire = [r.SerializeToString() for r in self.requests]
        parse = type(self.requests[0]).FromString
        method = getattr(servicer, self.kind)
        context = _InProcess()
        return lambda i: method(parse(wire[i]), context).SerializeToString()

    def capture(self, client: Client) -> dict[str, list[str]]:
        """Our server's reply bytes to every request, in order (for the echo floor)."""
        if self.kind == "stream":
            with client.session() as s:
                seqs = [s.send(self.op, r) for r in self.requests]
                replies = [s.receive().SerializeToString() for _ in seqs]
            return {f"{SERVICE}/Session": [base64.b64encode(r).decode() for r in replies]}
        method = getattr(client.stub, self.kind).with_call
        replies = [method(r, timeout=60)[0].SerializeToString() for r in self.requests]
        return {f"{SERVICE}/{self.kind}": [base64.b64encode(r).decode() for r in replies]}

    def run(self, client: Client, warmup: int, calls: int) -> list[int]:
        """Latencies (ns) of ``calls`` questions after ``warmup``, cycling the requests."""
        reqs, n = self.requests, len(self.requests)
        clock = time.perf_counter_ns
        out = []
        if self.kind == "stream":
            with client.session() as s:
                ask, op = s.ask, self.op
                for i in range(warmup + calls):
                    t = clock()
                    ask(op, reqs[i % n])
                    if i >= warmup:
                        out.append(clock() - t)
            return out
        method = getattr(client.stub, self.kind)
        for i in range(warmup + calls):
            t = clock()
            method(reqs[i % n], timeout=60)
            if i >= warmup:
                out.append(clock() - t)
        return out


def _in_process(engine: Callable[[int], object], service: Callable[[int], object], count: int,
                n: int) -> tuple[float, float]:
    """(engine p50, service-layer p50) in us of thread CPU time, in this process: each
    request once through the engine alone and once through the service layer, paired
    and interleaved, so the service figure is the median of the pairs' differences."""
    for i in range(min(count, 50)):
        engine(i % n)
        service(i % n)
    clock = time.thread_time_ns
    alone, extra = [], []
    for i in range(count):
        t = clock()
        engine(i % n)
        a = clock() - t
        t = clock()
        service(i % n)
        extra.append(clock() - t - a)
        alone.append(a)
    return _pct(alone, 0.5), _pct(extra, 0.5)


_TICK_S = 1.0 / os.sysconf("SC_CLK_TCK") if hasattr(os, "sysconf") else 0.01


def _cpu_s(pid: int) -> float:
    """User + system CPU seconds of a process so far (Linux /proc; NaN elsewhere)."""
    try:
        fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    except OSError:
        return float("nan")
    return (int(fields[11]) + int(fields[12])) * _TICK_S


def main(argv: list[str] | None = None) -> int:
    args = round_arguments("python -m bench.grpc_bench", __doc__, 5, OUT_DIR / "grpc_bench.json", argv)
    warmup = max(20, args.calls // 5)
    started, load_start = time.monotonic(), os.getloadavg()[0]

    deck = bench_deck()
    net = generate_net(deck, args.shapes, seed=1, name=NET)
    rng = random.Random(3)
    singles = extension_candidates(deck, net, 64, seed=1) + via_run_candidates(deck, net, 64, seed=1)
    rng.shuffle(singles)
    runs = extension_candidates(deck, net, BATCH_SIZE, seed=2)  # one rectangle each
    mixed = extension_candidates(deck, net, BATCH_SIZE // 2, seed=3) + via_run_candidates(deck, net, BATCH_SIZE // 2, seed=3)
    rng.shuffle(mixed)

    engine = Engine(deck)
    engine.open_net(NET, net.pins, None, net.shapes)
    servicer = AntennaServicer(Jobs.single(engine), Metrics(engine.stats, AntennaServicer.METHODS))  # as served
    pb_singles = [_pb_shapes(deck, c) for c in singles]
    score_reqs = [pb.ScoreRequest(net=NET, candidate=c) for c in pb_singles]
    lean_reqs = [pb.ScoreRequest(net=NET, candidate=c, without_changes=True) for c in pb_singles]
    runs_req = pb.ScoreBatchRequest(net=NET, candidates=_columns(deck, runs))
    mixed_req = pb.ScoreBatchRequest(net=NET, candidates=_columns(deck, mixed))
    run_steps = np.array([c[0].layer for c in runs], dtype=np.int64)
    run_rects = np.array([c[0].rect for c in runs], dtype=np.int64)
    mixed_steps = np.array([s.layer for c in mixed for s in c], dtype=np.int64)
    mixed_rects = np.array([s.rect for c in mixed for s in c], dtype=np.int64)
    mixed_counts = np.array([len(c) for c in mixed], dtype=np.int64)
    cases = [
        Case("stream_score", "stream score", "stream", score_reqs, "score",
             lambda i: engine.score(NET, singles[i], True)),
        Case("unary_score", "unary score", "Score", score_reqs, "",
             lambda i: engine.score(NET, singles[i], True)),
        Case("stream_lean", "stream score, no changes", "stream", lean_reqs, "score",
             lambda i: engine.score(NET, singles[i], False)),
        Case("unary_lean", "unary score, no changes", "Score", lean_reqs, "",
             lambda i: engine.score(NET, singles[i], False)),
        Case("batch", f"batch x{BATCH_SIZE}, 1 rect", "ScoreBatch", [runs_req], "",
             lambda i: engine.score_columns(NET, run_steps, run_rects), per_call=BATCH_SIZE),
        Case("batch_mixed", f"batch x{BATCH_SIZE}, 1-4 shapes", "ScoreBatch", [mixed_req], "",
             lambda i: engine.score_columns(NET, mixed_steps, mixed_rects, mixed_counts), per_call=BATCH_SIZE),
    ]

    ours, ready = start_ours(["--rules", str(BENCH_DECK), "--listen", "127.0.0.1:0",
                              "--metrics-port", "0"])
    ours_addr = ready["addresses"][0]
    echo = None
    try:
        with Client(ours_addr, timeout=60) as setup:
            setup.open_net(NET, _pb_pins(deck, net.pins), _pb_shapes(deck, net.shapes))
            canned = {c.name: c.capture(setup) for c in cases}
        with tempfile.NamedTemporaryFile("w", suffix=".json", delete=False) as f:
            json.dump(canned, f)
            replies_file = f.name
        echo, echo_addr = start_process([sys.executable, "-m", "bench.echo_server", "--replies", replies_file,
                                  "--listen", "127.0.0.1:0"], echo_ready, on_stderr=False)
        os.unlink(replies_file)
        rows = []
        with Client(ours_addr, timeout=60) as mine, Client(echo_addr, timeout=60) as floor:
            select = floor.channel.unary_unary("/bench.Echo/Select")
            for case in cases:
                calls = args.batches if case.kind == "ScoreBatch" else args.calls
                warm = 1 if case.kind == "ScoreBatch" else warmup
                samples: dict[str, list[int]] = {"ours": [], "floor": []}
                cpu = {"ours": 0.0, "floor": 0.0}
                pids = {"ours": ours.pid, "floor": echo.pid}
                for r in range(args.rounds):
                    order = ("floor", "ours") if r % 2 == 0 else ("ours", "floor")
                    for who in order:
                        if who == "floor":
                            select(case.name.encode())
                        before = _cpu_s(pids[who])
                        samples[who] += case.run(mine if who == "ours" else floor, warm, calls)
                        cpu[who] += (_cpu_s(pids[who]) - before) / (warm + calls)
                    if time.monotonic() - started > TIME_BUDGET_S:
                        print(f"(time budget reached: {case.label} after {r + 1} rounds)", flush=True)
                        break
                engine_cpu = _in_process(case.engine, case.translator(servicer),
                                         calls * 2 if case.per_call == 1 else 3, len(case.requests))
                rounds_done = r + 1
                rows.append(_row(case, samples, engine_cpu,
                                 {k: v / rounds_done * 1e6 for k, v in cpu.items()}))
    finally:
        for proc in (ours, echo):
            stop_process(proc)

    _print(rows, args, time.monotonic() - started, load_start)
    args.json.parent.mkdir(parents=True, exist_ok=True)
    args.json.write_text(json.dumps({
        "machine": {"cpus": os.cpu_count(), "python": platform.python_version(), "grpc": grpc.__version__},
        "net_shapes": args.shapes, "rounds": args.rounds, "calls": args.calls,
        "rows": [asdict(r) for r in rows]}, indent=2))
    return 0


def _row(case: Case, samples: dict[str, list[int]], in_process: tuple[float, float],
         cpu: dict[str, float]) -> Row:
    p50, p99 = _pct(samples["ours"], 0.5), _pct(samples["ours"], 0.99)
    floor = _pct(samples["floor"], 0.5)
    engine_p50, service = in_process
    common = dict(method=case.label, p50_us=p50, p99_us=p99, floor_p50_us=floor, ratio=p50 / floor,
                  engine_p50_us=engine_p50, service_us=service, cpu_us=cpu["ours"],
                  floor_cpu_us=cpu["floor"])
    if case.per_call > 1:
        per_s = case.per_call / (p50 / 1e6)
        return Row(**common, target="",
                   throughput=f"{per_s:,.0f}/s (floor {case.per_call / (floor / 1e6):,.0f}/s, "
                              f"engine {case.per_call / (engine_p50 / 1e6):,.0f}/s)",
                   met=None)
    target = f"<= {RATIO_TARGET:.2f}x" if case.name == "stream_score" else ""
    return Row(**common, target=target, throughput=f"{1e6 / p50:,.0f} calls/s",
               met=p50 / floor <= RATIO_TARGET if target else None)


def _print(rows: list[Row], args, elapsed: float, load_start: float) -> None:
    head = (f"{'method':<26} {'p50 us':>9} {'p99 us':>9} {'floor p50':>10} {'ratio':>6} {'target':>20} "
            f"{'engine us':>10} {'service us':>10} {'server cpu':>14}  throughput")
    print(f"gRPC bench: {args.shapes}-shape net, {args.rounds} rounds x {args.calls} calls per server "
          f"({args.batches} batches), floor = bare echo in the same run; {elapsed:.0f} s; "
          f"load {load_start:.2f} at start, {os.getloadavg()[0]:.2f} at end")
    print(head)
    print("-" * len(head))
    for r in rows:
        met = "" if r.met is None else ("  met" if r.met else "  NOT met")
        print(f"{r.method:<26} {r.p50_us:>9.0f} {r.p99_us:>9.0f} {r.floor_p50_us:>10.0f} {r.ratio:>6.2f} "
              f"{r.target + met:>20} {r.engine_p50_us:>10.0f} {r.service_us:>10.0f} "
              f"{f'{r.cpu_us:.0f} / {r.floor_cpu_us:.0f}':>14}  {r.throughput}")


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
