"""C++ client bench: etchguard seen from a C++ router, against a bare echo floor.

One run, on loopback, two servers as separate processes, one C++ client
(bench/cpp, built with CMake in build/cpp-bench and reused between runs):

* **ours**: ``etchguard serve`` on the bench deck (metrics on, as in production),
  holding one generated net (``bench.netgen``, 50 shapes);
* **floor**: ``bench.echo_server``, a bare Python gRPC echo service on the same
  grpc.Server set-up, answering the raw reply bytes ours gave to the same requests,
  captured just before: the same message sizes both ways, no engine, no protobuf.

The C++ client sends the very same serialized requests to both (this script writes
them as length-delimited SessionRequest messages), rounds alternating floor and ours.
Cases: streamed score (Session stream, one request in flight), unary score (Score),
and batches of 1,024 candidates (ScoreBatch): "mixed" as in bench.grpc_bench (run
extensions of one shape and via + run of four), "1 rect" all one-rectangle run
extensions, which the server scores on its columnar path.

Targets (the compiled core's): streamed score p50 <= 1.10 x the floor's p50 in the same run;
one-rectangle batches >= 1,000,000 candidates per second from this C++ client. The
other rows are reported without a target. Ratios are reported, nothing fails on them.
The timed part is bounded to about 75 s; a first build of the C++ client adds about a
minute and a half on 2 cores (later runs reuse it).

    python -m bench.cpp_bench [--quick] [--rounds N] [--calls N] [--batches N]

Prints one table and writes bench/out/cpp_bench.json.
"""

from __future__ import annotations

import base64
import json
import os
import platform
import random
import shutil
import subprocess
import sys
import tempfile
import time
from dataclasses import asdict, dataclass
from pathlib import Path

import grpc
from etchguard.client import Client, candidate_columns, pb

from .native import cmake, cmake_build
from .netgen import BENCH_DECK, bench_deck, extension_candidates, generate_net, via_run_candidates
from .rounds import echo_ready, round_arguments, start_ours, start_process, stop_process

REPO = Path(__file__).resolve().parents[1]
SOURCE = REPO / "bench" / "cpp"
BUILD = REPO / "build" / "cpp-bench"
BINARY = BUILD / "etchguard_cpp_bench"
OUT_DIR = Path(__file__).resolve().parent / "out"
SERVICE = "/etchguard.v1.AntennaService"
NET = "bench"
BATCH_SIZE = 1024
RATIO_TARGET = 1.10
BATCH_TARGET_PER_S = 1_000_000
MEASURE_BUDGET_S = 75.0  # the C++ client's rounds stop early past this
LABELS = {"stream_score": "stream score", "unary_score": "unary score",
          "batch_mixed": f"batch x{BATCH_SIZE}, mixed", "batch_rects": f"batch x{BATCH_SIZE}, 1 rect"}


@dataclass
class Row:
    method: str
    calls: int
    p50_us: float
    p99_us: float
    floor_p50_us: float
    floor_p99_us: float
    ratio: float  # p50 / floor p50
    target: str
    throughput_per_s: float  # candidates per second (from the mean call time)
    floor_throughput_per_s: float
    met: bool | None


# -- build -------------------------------------------------------------------------

def missing_prerequisites() -> list[str]:
    missing = [tool for tool in ("protoc", "grpc_cpp_plugin") if shutil.which(tool) is None]
    if cmake() is None:
        missing.append("cmake")
    if shutil.which("c++") is None and shutil.which("g++") is None:
        missing.append("a C++ compiler")
    if not any(Path(p, "grpcpp", "grpcpp.h").exists() for p in ("/usr/include", "/usr/local/include")):
        missing.append("gRPC C++ headers (libgrpc++-dev)")
    return missing


# -- requests --------------------------------------------------------------------------

def _pb_shapes(names: list[str], shapes) -> list[pb.Shape]:
    return [pb.Shape(layer=names[s.layer], rect=pb.Rect(xlo=s.rect[0], ylo=s.rect[1], xhi=s.rect[2],
                                                        yhi=s.rect[3])) for s in shapes]


def _pb_pins(names: list[str], pins) -> list[pb.Pin]:
    return [pb.Pin(name=p.name, layer=names[p.layer],
                   rects=[pb.Rect(xlo=r[0], ylo=r[1], xhi=r[2], yhi=r[3]) for r in p.rects],
                   gate_area=dict(p.gate_area), diff_area=p.diff_area,
                   cell_area={names[k]: v for k, v in p.cell_area.items()}) for p in pins]


def _varint(n: int) -> bytes:
    out = bytearray()
    while True:
        byte = n & 0x7F
        n >>= 7
        if n:
            out.append(byte | 0x80)
        else:
            out.append(byte)
            return bytes(out)


def write_delimited(path: Path, messages: list[pb.SessionRequest]) -> None:
    """Protobuf's length-delimited stream: varint size, then the message, each."""
    with open(path, "wb") as f:
        for m in messages:
            data = m.SerializeToString()
            f.write(_varint(len(data)) + data)


def _b64(replies: list[bytes]) -> list[str]:
    return [base64.b64encode(r).decode() for r in replies]


def capture(client: Client, scores: list[pb.ScoreRequest], batches: list[pb.ScoreBatchRequest]) -> dict:
    """Our server's reply bytes to the very requests the C++ client will send, in order,
    per case and method path (bench.echo_server's replies file)."""
    with client.session() as s:
        for r in scores:
            s.send("score", r)
        stream = [s.receive().SerializeToString() for _ in scores]
    unary = [client.stub.Score(r, timeout=60).SerializeToString() for r in scores]
    out = {"stream_score": {f"{SERVICE}/Session": _b64(stream)},
           "unary_score": {f"{SERVICE}/Score": _b64(unary)}}
    for case, batch in zip(("batch_mixed", "batch_rects"), batches):
        out[case] = {f"{SERVICE}/ScoreBatch": _b64([client.stub.ScoreBatch(batch, timeout=60).SerializeToString()])}
    return out


# -- the run -------------------------------------------------------------------------

def parse_results(stdout: str) -> tuple[dict[tuple[str, str], dict[str, float]], dict[str, int]]:
    results: dict[tuple[str, str], dict[str, float]] = {}
    items: dict[str, int] = {}
    for line in stdout.splitlines():
        parts = line.split()
        if parts and parts[0] == "result":
            case, who, n, p50, p99, mean = parts[1:]
            results[(case, who)] = {"calls": int(n), "p50": float(p50), "p99": float(p99), "mean": float(mean)}
        elif parts and parts[0] == "items_per_call":
            items[parts[1]] = int(parts[2])
    return results, items


def rows_of(results: dict, items: dict[str, int]) -> list[Row]:
    rows = []
    for case, label in LABELS.items():
        if (case, "ours") not in results:
            continue
        ours, floor = results[(case, "ours")], results[(case, "floor")]
        per = items.get(case, 1)
        ratio = ours["p50"] / floor["p50"]
        target, met = "", None
        if case.startswith("batch"):
            per_s = per / (ours["mean"] / 1e6)
            if case == "batch_rects":
                target, met = f">= {BATCH_TARGET_PER_S:,}/s", per_s >= BATCH_TARGET_PER_S
        else:
            per_s = 1e6 / ours["mean"]
            if case == "stream_score":
                target, met = f"p50 <= {RATIO_TARGET:.2f}x", ratio <= RATIO_TARGET
        rows.append(Row(label, int(ours["calls"]), ours["p50"], ours["p99"], floor["p50"], floor["p99"], ratio,
                        target, per_s, per / (floor["mean"] / 1e6), met))
    return rows


def print_table(rows: list[Row], header: str) -> None:
    head = (f"{'method':<18} {'p50 us':>9} {'p99 us':>9} {'floor p50':>10} {'floor p99':>10} "
            f"{'ratio':>6}  {'throughput (floor)':<34} {'target':<22}")
    print(header)
    print(head)
    print("-" * len(head))
    for r in rows:
        unit = "cand/s" if r.method.startswith("batch") else "calls/s"
        throughput = f"{r.throughput_per_s:,.0f} {unit} ({r.floor_throughput_per_s:,.0f})"
        met = "" if r.met is None else (" met" if r.met else " NOT met")
        print(f"{r.method:<18} {r.p50_us:>9.0f} {r.p99_us:>9.0f} {r.floor_p50_us:>10.0f} {r.floor_p99_us:>10.0f} "
              f"{r.ratio:>6.2f}  {throughput:<34} {r.target + met:<22}")


def main(argv: list[str] | None = None) -> int:
    args = round_arguments("python -m bench.cpp_bench", __doc__, 6, OUT_DIR / "cpp_bench.json", argv)
    missing = missing_prerequisites()
    if missing:
        print(f"cpp_bench: cannot build the C++ client: missing {', '.join(missing)}; "
              "run `bash .ci/install-cpp-deps.sh` as root", file=sys.stderr)
        return 1
    build_s = cmake_build(SOURCE, BUILD)
    started, load_start = time.monotonic(), os.getloadavg()[0]

    deck = bench_deck()
    names = [layer.name for layer in deck.layers]
    net = generate_net(deck, args.shapes, seed=1, name=NET)
    rng = random.Random(3)
    singles = extension_candidates(deck, net, 64, seed=1) + via_run_candidates(deck, net, 64, seed=1)
    rng.shuffle(singles)
    batch = (extension_candidates(deck, net, BATCH_SIZE // 2, seed=2)
             + via_run_candidates(deck, net, BATCH_SIZE // 2, seed=2))
    rng.shuffle(batch)
    scores = [pb.ScoreRequest(net=NET, candidate=_pb_shapes(names, c)) for c in singles]
    # One-rectangle candidates (run extensions) take the server's columnar path.
    rects_only = extension_candidates(deck, net, BATCH_SIZE, seed=4)
    batch_requests = [pb.ScoreBatchRequest(net=NET, candidates=candidate_columns(
        [s.rect for c in cands for s in c], [names[s.layer] for c in cands for s in c], [len(c) for c in cands]))
        for cands in (batch, rects_only)]

    ours = echo = None
    with tempfile.TemporaryDirectory(prefix="cpp_bench") as tmp:
        requests_file, replies_file = Path(tmp, "requests.bin"), Path(tmp, "replies.json")
        write_delimited(requests_file, [pb.SessionRequest(seq=i + 1, score=r) for i, r in enumerate(scores)]
                        + [pb.SessionRequest(seq=len(scores) + 1 + i, score_batch=b)
                           for i, b in enumerate(batch_requests)])
        try:
            ours, ready = start_ours(["--rules", str(BENCH_DECK), "--listen", "127.0.0.1:0",
                                      "--metrics-port", "0"])
            ours_address = ready["addresses"][0]
            with Client(ours_address, timeout=60) as setup:
                setup.open_net(NET, _pb_pins(names, net.pins), _pb_shapes(names, net.shapes))
                replies_file.write_text(json.dumps(capture(setup, scores, batch_requests)))
            echo, echo_address = start_process([sys.executable, "-m", "bench.echo_server", "--replies", str(replies_file),
                                         "--listen", "127.0.0.1:0"], echo_ready, on_stderr=False)
            cmd = [str(BINARY), "--ours", ours_address, "--floor", echo_address, "--requests", str(requests_file),
                   "--rounds", str(args.rounds), "--calls", str(args.calls), "--batches", str(args.batches),
                   "--warmup", str(max(10, args.calls // 8)), "--budget-s", str(MEASURE_BUDGET_S)]
            done = subprocess.run(cmd, capture_output=True, text=True, timeout=MEASURE_BUDGET_S + 45)
        finally:
            stop_process(echo)
            stop_process(ours)
    if done.returncode != 0:
        print(f"cpp_bench: the C++ client failed ({done.returncode}):\n{done.stderr}", file=sys.stderr)
        return 1
    if done.stderr.strip():
        print(done.stderr.strip(), flush=True)
    results, items = parse_results(done.stdout)
    rows = rows_of(results, items)
    elapsed = time.monotonic() - started
    print_table(rows, f"C++ client bench: {args.shapes}-shape net, {args.rounds} rounds x {args.calls} calls "
                      f"({args.batches} batches) per server, floor = bare Python echo server in the same run; "
                      f"{elapsed:.0f} s (+ build {build_s:.0f} s); load {load_start:.2f} at start, "
                      f"{os.getloadavg()[0]:.2f} at end")
    args.json.parent.mkdir(parents=True, exist_ok=True)
    args.json.write_text(json.dumps({
        "machine": {"cpus": os.cpu_count(), "python": platform.python_version(), "grpc_python": grpc.__version__},
        "net_shapes": args.shapes, "rounds": args.rounds, "calls": args.calls, "batches": args.batches,
        "elapsed_s": elapsed, "build_s": build_s, "rows": [asdict(r) for r in rows]}, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
