"""Columnar batch scores against the scalar path, on bench-like nets.

For nets of 10, 50 and 100 shapes (bench/netgen.py) and batches of 1,024 candidates
such as a maze router's expansion front produces (``frontier_candidates``: runs from
the net's wire ends in the four directions, mostly on the wire's layer, some on the
layer above, some cuts at the ends), it measures in one run:

* candidates per second of ``Engine.score_columns`` (one call per batch) and of
  ``Engine.score_many`` (the scalar path, one score per candidate), and their ratio;
* that both give the same answers (a sanity count; the tests hold this properly);
* a mixed row per net: half one-run extensions, half run + via stack candidates of 4
  shapes (bench/netgen.py), through ``score_columns`` with ``shape_count`` against
  ``score_many`` (one score call per candidate), and the scalar cost
  of a 4-shape candidate relative to a 1-shape one.

Times are the best of a few repeats (the machine is shared); only ratios measured
in the same run are meaningful. ``python -m bench.batch_bench`` prints a table and
writes bench/out/batch.json. Bounded to well under a minute.
"""

from __future__ import annotations

import json
import random
import sys
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

from bench.netgen import (RUN_LENGTH, GeneratedNet, bench_deck, extension_candidates,  # noqa: E402
                          generate_net, via_run_candidates)
from etchguard import Deck, Engine, Shape, run_shapes  # noqa: E402
from etchguard._geometry import square  # noqa: E402

SIZES = (10, 50, 100)
BATCH = 1024
NETS_PER_SIZE = 3
REPEATS = 5  # column timing: best of these
SCALAR_SAMPLE = 256  # scalar timing: this many candidates of the batch, best of 2


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


def _best(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def measure(size: int, seed: int) -> dict[str, float]:
    deck = bench_deck()
    net = generate_net(deck, size, seed=seed, name=f"b{size}_{seed}")
    engine = Engine(deck)
    engine.open_net(net.name, net.pins, None, net.shapes)
    cands = frontier_candidates(deck, net, BATCH, seed=seed)
    layers, rects = _columns(cands)
    first = engine.score_columns(net.name, layers, rects)  # builds the per-state tables
    t_first = _best(lambda: engine.score_columns(net.name, layers, rects), 1)
    t_cols = _best(lambda: engine.score_columns(net.name, layers, rects), REPEATS)
    sample = [[c] for c in cands[:SCALAR_SAMPLE]]
    t_scalar = _best(lambda: engine.score_many(net.name, sample), 2) / len(sample)
    scalar = engine.score_many(net.name, sample)
    agree = sum(1 for i, s in enumerate(scalar)
                if s.worst_utilization == first.worst_utilization[i]
                and s.worst_change_utilization == first.worst_change_utilization[i]
                and s.legal == first.legal[i] and s.breaks_limit == first.breaks_limit[i])
    mixed = extension_candidates(deck, net, BATCH // 2, seed=seed) + via_run_candidates(deck, net, BATCH // 2, seed=seed)
    random.Random(seed).shuffle(mixed)
    flat = [s for c in mixed for s in c]
    m_layers, m_rects = _columns(flat)
    m_counts = np.array([len(c) for c in mixed], dtype=np.int64)
    engine.score_columns(net.name, m_layers, m_rects, m_counts)  # warm
    t_mixed = _best(lambda: engine.score_columns(net.name, m_layers, m_rects, m_counts), 2)
    t_many = _best(lambda: engine.score_many(net.name, mixed), 1)
    ones = [c for c in mixed if len(c) == 1][:SCALAR_SAMPLE // 2]
    fours = [c for c in mixed if len(c) == 4][:SCALAR_SAMPLE // 2]
    t_one = _best(lambda: engine.score_many(net.name, ones), 2) / max(len(ones), 1)
    t_four = _best(lambda: engine.score_many(net.name, fours), 2) / max(len(fours), 1)
    return {"size": size, "seed": seed,
            "columns_per_s": BATCH / t_cols, "scalar_per_s": 1.0 / t_scalar,
            "speedup": (BATCH / t_cols) * t_scalar, "warm_call_ms": t_first * 1e3,
            "agree": agree / len(sample),
            "mixed_columns_per_s": BATCH / t_mixed,
            "mixed_many_per_s": BATCH / t_many, "mixed_gain": t_many / t_mixed,
            "scalar_four_vs_one": t_four / t_one}


def main(argv: list[str] | None = None) -> int:
    start = time.perf_counter()
    rows = [measure(size, seed) for size in SIZES for seed in range(NETS_PER_SIZE)]
    print("one-rectangle frontier batches: score_columns vs one score call per candidate")
    print(f"{'shapes':>6} {'seed':>4} {'columns/s':>11} {'scalar/s':>9} {'ratio':>6} {'agree':>6}")
    for r in rows:
        print(f"{r['size']:>6} {r['seed']:>4} {r['columns_per_s']:>11,.0f} "
              f"{r['scalar_per_s']:>9,.0f} {r['speedup']:>6.1f} {r['agree']:>6.3f}")
    print("mixed batches: 1-shape runs and 4-shape run + via stacks (shape_count) vs score_many")
    print(f"{'shapes':>6} {'seed':>4} {'columns/s':>11} {'many/s':>9} {'gain':>5} "
          f"{'4-shape/1-shape scalar':>23}")
    for r in rows:
        print(f"{r['size']:>6} {r['seed']:>4} {r['mixed_columns_per_s']:>11,.0f} "
              f"{r['mixed_many_per_s']:>9,.0f} {r['mixed_gain']:>5.2f} {r['scalar_four_vs_one']:>23.2f}")
    out = REPO / "bench" / "out" / "batch.json"
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps({"batch": BATCH, "rows": rows}, indent=2) + "\n")
    print(f"({time.perf_counter() - start:.1f} s; written to {out.relative_to(REPO)})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
