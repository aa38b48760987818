"""Batch scores in process: columnar batches, the scalar path, and two threads.

For nets of 10, 50 and 100 shapes (bench/netgen.py), in one run:

* one-rectangle batches of 1,024 candidates such as a maze router's expansion front
  produces (``frontier_candidates``: runs from the net's wire ends in the four
  directions, mostly on the wire's layer, some on the layer above, some cuts at the
  ends): candidates per second of ``Engine.score_columns`` (one call per batch;
  target >= 3,000,000/s) and of ``Engine.score_many`` (one score per candidate), and
  that both give the same answers (a sanity count; the tests hold this properly);
* mixed batches of 1,024 candidates of 1 to 4 shapes in equal parts
  (``netgen.mixed_candidates``: a run, the run as two segments, a via, a via and a
  run) through ``score_columns`` with ``shape_count`` (target >= 1,000,000/s),
  against ``score_many``;
* two threads on two different nets against one thread: the candidates per second of
  both together over those of one alone (target >= 1.7x), for one-rectangle batches
  (``score_columns``) and, for comparison, for single what-ifs (``score``, verdict
  only). The core releases the GIL inside its calls; what is left of each call in
  Python holds it.

Throughputs are the median of a few repeats (the machine is shared; the load average
is printed); only ratios measured in the same run are meaningful.
``python -m bench.batch_bench [--quick]`` prints a table and writes bench/out/batch.json.
Bounded to well under a minute.
"""

from __future__ import annotations

import argparse
import json
import os
import random
import statistics
import sys
import threading
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

from etchguard import Deck, Engine, Shape, run_shapes  # noqa: E402
from etchguard._geometry import square  # noqa: E402

from bench.netgen import RUN_LENGTH, GeneratedNet, bench_deck, extension_candidates, generate_net, mixed_candidates  # noqa: E402

SIZES = (10, 50, 100)
BATCH = 1024
NETS_PER_SIZE = 3
REPEATS = 7  # throughput: median of these
SCALAR_SAMPLE = 256  # scalar timing: this many candidates of the batch
ONE_RECT_TARGET = 3_000_000
MIXED_TARGET = 1_000_000
THREADS_TARGET = 1.7
THREAD_NET_SHAPES = 50


def frontier_candidates(deck: Deck, net: GeneratedNet, count: int, seed: int | str = 0,
                        mix: tuple[float, float] = (0.8, 0.1)) -> list[Shape]:
    """One-rectangle candidates a maze router's front might try from the net's wire
    ends: with probability ``mix[0]`` a run on the wire's layer from one end, in any of
    the four directions (so along, backwards over, or across the wire); with
    ``mix[1]`` the default cut at that end on the cut layer above; otherwise a run on
    the routing layer two steps up from the end (joined only if a via is there).
    Lengths are drawn as the generator draws them per layer, or a few tracks."""
    rng = random.Random(f"{seed}/{net.name}/frontier")
    layers = deck.layers
    out: list[Shape] = []
    while len(out) < count:
        run = rng.choice(net.runs)
        x, y = (run.x1, run.y1) if rng.random() < 0.5 else (run.x2, run.y2)
        roll = rng.random()
        layer = run.layer
        if roll >= mix[0] and layer + 1 < len(layers):
            if roll < mix[0] + mix[1]:
                cut = layers[layer + 1]
                out.append(Shape(layer + 1, square(x, y, cut.cut_size or 100)))
                continue
            if layer + 2 < len(layers):
                layer += 2
        name = layers[layer].name
        lo, hi = RUN_LENGTH.get(name, (1_000, 10_000))
        pitch = 2 * (layers[layer].wire_width or 100)
        length = rng.randint(lo, hi) if rng.random() < 0.5 else pitch * rng.randint(1, 8)
        dx, dy = rng.choice(((1, 0), (-1, 0), (0, 1), (0, -1)))
        out += run_shapes(deck, layer, x, y, x + dx * length, y + dy * length)
    return out[:count]


def _columns(cands: list[Shape]) -> tuple[np.ndarray, np.ndarray]:
    return (np.array([c.layer for c in cands], dtype=np.int64),
            np.array([c.rect for c in cands], dtype=np.int64).reshape(-1, 4))


def _median_time(fn: Callable[[], object], repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def measure(deck: Deck, size: int, seed: int, repeats: int) -> dict[str, float]:
    """One net: one-rectangle and mixed batches, columnar and scalar."""
    net = generate_net(deck, size, seed=seed, name=f"b{size}_{seed}")
    engine = Engine(deck)
    engine.open_net(net.name, net.pins, None, net.shapes)
    cands = frontier_candidates(deck, net, BATCH, seed=seed)
    layers, rects = _columns(cands)
    first = engine.score_columns(net.name, layers, rects)  # the first question builds the assessment
    t_cols = _median_time(lambda: engine.score_columns(net.name, layers, rects), repeats)
    sample = [[c] for c in cands[:SCALAR_SAMPLE]]
    t_scalar = _median_time(lambda: engine.score_many(net.name, sample), 3) / len(sample)
    scalar = engine.score_many(net.name, sample)
    agree = sum(1 for i, s in enumerate(scalar)
                if s.worst_utilization == first.worst_utilization[i]
                and s.worst_change_utilization == first.worst_change_utilization[i]
                and s.legal == first.legal[i] and s.breaks_limit == first.breaks_limit[i])
    mixed = mixed_candidates(deck, net, BATCH, seed=seed)
    random.Random(seed).shuffle(mixed)
    m_layers, m_rects = _columns([s for c in mixed for s in c])
    m_counts = np.array([len(c) for c in mixed], dtype=np.int64)
    engine.score_columns(net.name, m_layers, m_rects, m_counts)  # warm
    t_mixed = _median_time(lambda: engine.score_columns(net.name, m_layers, m_rects, m_counts), repeats)
    t_many = _median_time(lambda: engine.score_many(net.name, mixed), 3)
    return {"size": size, "seed": seed,
            "columns_per_s": BATCH / t_cols, "scalar_per_s": 1.0 / t_scalar,
            "speedup": (BATCH / t_cols) * t_scalar, "agree": agree / len(sample),
            "mixed_columns_per_s": BATCH / t_mixed, "mixed_many_per_s": BATCH / t_many,
            "mixed_gain": t_many / t_mixed}


# -- two threads on two nets ------------------------------------------------------------


def _rate(jobs: list[Callable[[], int]]) -> tuple[float, float]:
    """Candidates per second of ``jobs`` run at once, one thread each (all start
    together), and the cores they used: their threads' CPU time over the wall time
    (below the thread count when the machine's other work or a lock held them back)."""
    start = threading.Barrier(len(jobs) + 1)
    done = [0] * len(jobs)
    cpu = [0.0] * len(jobs)

    def worker(k: int) -> None:
        start.wait()
        c0 = time.thread_time()
        done[k] = jobs[k]()
        cpu[k] = time.thread_time() - c0

    threads = [threading.Thread(target=worker, args=(k,)) for k in range(len(jobs))]
    for t in threads:
        t.start()
    start.wait()
    t0 = time.perf_counter()
    for t in threads:
        t.join()
    wall = time.perf_counter() - t0
    return sum(done) / wall, sum(cpu) / wall


def _calls_for(fn: Callable[[], object], seconds: float) -> int:
    t0 = time.perf_counter()
    fn()
    return max(3, int(seconds / max(time.perf_counter() - t0, 1e-7)))


def threads_vs_one(deck: Deck, repeats: int, seconds: float) -> dict[str, float]:
    """Two threads on two nets of one engine against one thread on one of them, in
    alternating rounds: one-rectangle batches and single what-ifs (verdict only)."""
    engine = Engine(deck)
    nets = [generate_net(deck, THREAD_NET_SHAPES, seed=s, name=f"t{s}") for s in (1, 2)]
    batches, singles = [], []
    for net in nets:
        engine.open_net(net.name, net.pins, None, net.shapes)
        layers, rects = _columns(frontier_candidates(deck, net, BATCH, seed=1))
        batches.append((net.name, layers, rects))
        singles.append((net.name, extension_candidates(deck, net, 64, seed=1)))

    def batch_job(name: str, layers: np.ndarray, rects: np.ndarray, calls: int) -> Callable[[], int]:
        def job() -> int:
            for _ in range(calls):
                engine.score_columns(name, layers, rects)
            return calls * BATCH
        return job

    def single_job(name: str, cands: list[list[Shape]], calls: int) -> Callable[[], int]:
        def job() -> int:
            score = engine.score
            for i in range(calls):
                score(name, cands[i % len(cands)], detail=False)
            return calls
        return job

    batch_calls = _calls_for(lambda: engine.score_columns(*batches[0]), seconds)
    single_calls = _calls_for(lambda: [engine.score(singles[0][0], c, detail=False) for c in singles[0][1]],
                              seconds) * len(singles[0][1])
    out: dict[str, float] = {}
    for kind, make in (("batch", lambda k: batch_job(*batches[k], batch_calls)),
                       ("single", lambda k: single_job(*singles[k], single_calls))):
        rates: dict[int, list[tuple[float, float]]] = {1: [], 2: []}
        for r in range(repeats):
            for n in ((1, 2) if r % 2 == 0 else (2, 1)):
                rates[n].append(_rate([make(k) for k in range(n)]))
        for n, word in ((1, "one"), (2, "two")):
            out[f"{kind}_{word}_per_s"] = statistics.median(rate for rate, _ in rates[n])
            out[f"{kind}_{word}_cores"] = statistics.median(cores for _, cores in rates[n])
        out[f"{kind}_ratio"] = out[f"{kind}_two_per_s"] / out[f"{kind}_one_per_s"]
    return out


# -- the run --------------------------------------------------------------------------


def _load() -> float:
    try:
        return round(os.getloadavg()[0], 2)
    except OSError:
        return float("nan")


def _verdict(value: float, target: float) -> str:
    return "met" if value >= target else "NOT met"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.batch_bench", description=__doc__.split("\n")[0])
    parser.add_argument("--quick", action="store_true", help="one net per size, few repeats (smoke test)")
    args = parser.parse_args([] if argv is None else argv)
    per_size, repeats, seconds = (1, 3, 0.05) if args.quick else (NETS_PER_SIZE, REPEATS, 0.4)
    start, load_start = time.perf_counter(), _load()
    deck = bench_deck()
    rows = [measure(deck, size, seed, repeats) for size in SIZES for seed in range(per_size)]
    threads = threads_vs_one(deck, repeats, seconds)
    print(f"batch bench (in process; load {load_start} at start, {_load()} at end; 2 shared cores)")
    print(f"one-rectangle frontier batches of {BATCH}: score_columns vs one score call per candidate")
    print(f"{'shapes':>6} {'seed':>4} {'columns/s':>11} {'scalar/s':>9} {'ratio':>6} {'agree':>6}")
    for r in rows:
        print(f"{r['size']:>6} {r['seed']:>4} {r['columns_per_s']:>11,.0f} "
              f"{r['scalar_per_s']:>9,.0f} {r['speedup']:>6.1f} {r['agree']:>6.3f}")
    print(f"mixed batches of {BATCH}: 1-4 shape candidates in equal parts (shape_count) vs score_many")
    print(f"{'shapes':>6} {'seed':>4} {'columns/s':>11} {'many/s':>9} {'gain':>5}")
    for r in rows:
        print(f"{r['size']:>6} {r['seed']:>4} {r['mixed_columns_per_s']:>11,.0f} "
              f"{r['mixed_many_per_s']:>9,.0f} {r['mixed_gain']:>5.2f}")
    one_rect = statistics.median(r["columns_per_s"] for r in rows)
    mixed = statistics.median(r["mixed_columns_per_s"] for r in rows)
    summary = {"one_rect_per_s": one_rect, "mixed_per_s": mixed, **threads}
    print(f"one-rectangle batches, median over nets: {one_rect:,.0f} candidates/s "
          f"(target >= {ONE_RECT_TARGET:,}/s: {_verdict(one_rect, ONE_RECT_TARGET)})")
    print(f"mixed 1-4 shape batches, median over nets: {mixed:,.0f} candidates/s "
          f"(target >= {MIXED_TARGET:,}/s: {_verdict(mixed, MIXED_TARGET)})")
    print(f"two threads on two {THREAD_NET_SHAPES}-shape nets vs one thread: batches "
          f"{threads['batch_two_per_s']:,.0f} vs {threads['batch_one_per_s']:,.0f} candidates/s = "
          f"{threads['batch_ratio']:.2f}x (target >= {THREADS_TARGET}x: "
          f"{_verdict(threads['batch_ratio'], THREADS_TARGET)}); cores used (thread CPU / wall) "
          f"{threads['batch_two_cores']:.2f} vs {threads['batch_one_cores']:.2f}")
    print(f"  single what-ifs (verdict only): {threads['single_two_per_s']:,.0f} vs "
          f"{threads['single_one_per_s']:,.0f}/s = {threads['single_ratio']:.2f}x; cores used "
          f"{threads['single_two_cores']:.2f} vs {threads['single_one_cores']:.2f}")
    out = REPO / "bench" / "out" / "batch.json"
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps({"batch": BATCH, "load_average_1m": load_start, "rows": rows,
                               "summary": summary}, indent=2) + "\n")
    print(f"({time.perf_counter() - start:.1f} s; written to {out.relative_to(REPO)})")
    return 0 if all(r["agree"] == 1.0 for r in rows) else 1


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
