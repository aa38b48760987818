"""The what-if called directly from C++: the core linked into a program, no Python.

The in-process example (client_examples/inprocess, built here with CMake into
build/inprocess-bench and reused between runs) reads a net and its candidates in its
line format and, with ``--repeat N``, times every ``Net::score`` call (verdict only,
as a router asks while it searches) and ``Net::score_batch`` over the same candidates.
This bench writes the benchmark's nets (bench/netgen.py: 10, 50 and 100 shapes, a few
seeds, one-run extension candidates as in bench/engine_bench.py) in that format, runs
the example on each, and in the same run times the same what-ifs through the Python
``Engine.score(..., detail=False)``, so the ratio says what the Python face adds.
The example's printed verdicts are compared with the Python engine's, exactly.

Target (the compiled core's): called directly from C++, p50 <= 1 us.

    python -m bench.inprocess_bench [--quick]

Prints one table and writes bench/out/inprocess.json.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from etchguard import Engine

from .native import cmake_build
from .netgen import bench_deck, extension_candidates, generate_net

REPO = Path(__file__).resolve().parents[1]
SOURCE = REPO / "client_examples" / "inprocess"
TREE = REPO / "build" / "inprocess-bench"
BINARY = TREE / "etchguard_inprocess"
OUT = REPO / "bench" / "out" / "inprocess.json"
TARGET_P50_US = 1.0
SIZES = (10, 50, 100)
CANDIDATES = 25
TIMING = re.compile(r"score: ([\d.]+) us per candidate \(p50 ([\d.]+), p99 ([\d.]+)\); "
                    r"score_batch: ([\d.]+) us per candidate")


def _input_text(deck, net, candidates, costs) -> str:
    # The example's input format has one writer, beside the test that holds the
    # example's figures to the engine's; the bench uses it rather than a second copy.
    sys.path.insert(0, str(REPO / "tests"))
    try:
        from test_inprocess_example import input_text  # type: ignore[import-not-found]
    finally:
        sys.path.pop(0)
    return input_text(deck, net.pins, net.shapes, candidates, costs)


def python_p50_us(engine: Engine, name: str, candidates, repeat: int) -> float:
    ns = time.perf_counter_ns
    samples = []
    score = engine.score
    for _ in range(repeat):
        for cand in candidates:
            t0 = ns()
            score(name, cand, detail=False)
            samples.append(ns() - t0)
    samples.sort()
    return samples[len(samples) // 2] / 1e3


def measure(deck, size: int, seed: int, repeat: int, folder: Path) -> dict[str, float]:
    """One net: the example's timing of its candidates, and the Python engine's."""
    net = generate_net(deck, size, seed=seed, name=f"c{size}_{seed}")
    candidates = extension_candidates(deck, net, CANDIDATES, seed=seed)
    engine = Engine(deck)
    engine.open_net(net.name, net.pins, shapes=net.shapes)
    path = folder / f"{net.name}.txt"
    path.write_text(_input_text(deck, net, candidates, engine.costs))
    done = subprocess.run([str(BINARY), str(path), "--repeat", str(repeat)], capture_output=True, text=True,
                          timeout=300)
    if done.returncode != 0:
        raise RuntimeError(f"{BINARY.name} failed ({done.returncode}): {done.stderr[-2000:]}")
    found = TIMING.search(done.stderr)
    if found is None:
        raise RuntimeError(f"no timing line in: {done.stderr[-500:]}")
    mean, p50, p99, batch = (float(v) for v in found.groups())
    printed = [dict(w.split("=", 1) for w in line.split()[2:] if "=" in w)
               for line in done.stdout.splitlines() if line.startswith("candidate ")]
    agree = sum(1 for words, cand in zip(printed, candidates)
                if float(words["worst"]) == engine.score(net.name, cand, detail=False).worst_utilization)
    python = python_p50_us(engine, net.name, candidates, max(1, repeat // 10))
    return {"size": size, "seed": seed, "cpp_mean_us": mean, "cpp_p50_us": p50, "cpp_p99_us": p99,
            "cpp_batch_us": batch, "python_p50_us": python, "agree": agree / len(candidates)}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.inprocess_bench", description=__doc__.split("\n")[0])
    parser.add_argument("--quick", action="store_true", help="one net per size, few calls (smoke test)")
    args = parser.parse_args([] if argv is None else argv)
    seeds, repeat = (1, 200) if args.quick else (3, 4_000)
    build_s = cmake_build(SOURCE, TREE)
    load = os.getloadavg()[0]
    deck = bench_deck()
    with tempfile.TemporaryDirectory(prefix="inprocess_bench") as tmp:
        rows = [measure(deck, size, seed, repeat, Path(tmp)) for size in SIZES for seed in range(seeds)]
    print(f"in-process C++ what-if (client_examples/inprocess linked against core/; load {load:.2f}; "
          f"build {build_s:.0f} s): {CANDIDATES} one-run candidates per net, {repeat} rounds")
    print(f"{'shapes':>6} {'seed':>4} {'C++ p50 us':>11} {'p99 us':>8} {'mean us':>8} {'batch us/cand':>14} "
          f"{'Python p50 us':>14} {'Python / C++':>13} {'agree':>6}")
    for r in rows:
        print(f"{r['size']:>6} {r['seed']:>4} {r['cpp_p50_us']:>11.3f} {r['cpp_p99_us']:>8.3f} "
              f"{r['cpp_mean_us']:>8.3f} {r['cpp_batch_us']:>14.3f} {r['python_p50_us']:>14.2f} "
              f"{r['python_p50_us'] / r['cpp_p50_us']:>13.1f} {r['agree']:>6.3f}")
    p50 = statistics.median(r["cpp_p50_us"] for r in rows)
    batch = statistics.median(r["cpp_batch_us"] for r in rows)
    ratio = statistics.median(r["python_p50_us"] / r["cpp_p50_us"] for r in rows)
    print(f"C++ what-if p50, median over nets: {p50:.3f} us (target <= {TARGET_P50_US:g} us: "
          f"{'met' if p50 <= TARGET_P50_US else 'NOT met'}); through the Python Engine {ratio:.1f}x that; "
          f"C++ batch {1e6 / batch:,.0f} candidates/s")
    OUT.parent.mkdir(parents=True, exist_ok=True)
    OUT.write_text(json.dumps({"load_average_1m": load, "repeat": repeat, "rows": rows,
                               "summary": {"cpp_p50_us": p50, "cpp_batch_per_s": 1e6 / batch,
                                           "python_over_cpp": ratio}}, indent=2) + "\n")
    return 0 if all(r["agree"] == 1.0 for r in rows) else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
