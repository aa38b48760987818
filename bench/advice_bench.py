"""Advice latency: one ``Engine.advise`` answer for a 50-shape net, in process.

Nets come from bench/netgen.py (seeded, on the lumen-6m demo deck so that M1 has
same-direction layers above it: M3 and M5). The candidate is an M1 run leaving a gate
pin, long enough to break a limit, so the whole advice is computed: layer hops with
their via stacks and scores, obstacle queries, the jumper search and the diode search.
Other nets of the design fill the obstacle index. Reported: p50 / p99 of advise, the
median of a single what-if score of the same run, and their ratio (advice cost in
scores); the target of the issue is p50 <= 1 ms. Bounded: a fixed count of calls.

    python -m bench.advice_bench
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

from etchguard import Engine, Shape, load_deck, run_rect

from .netgen import generate_net

DECK = Path(__file__).resolve().parents[1] / "service" / "etchguard" / "data" / "lumen-6m.toml"
NETS = 20
REPEATS = 15
SHAPES = 50
RUN_UM = 160  # M1 from a gate: over the thin-oxide limits of the demo deck for these gates


def _candidate(engine: Engine, name: str) -> tuple[int, int, int, int]:
    spec = engine.spec(name)
    gate = next(p for p in spec.pins if p.gate_area)
    r = gate.rects[0]
    x, y = (r[0] + r[2]) // 2, (r[1] + r[3]) // 2
    return x, y, x - RUN_UM * engine.deck.dbu_per_micron, y


def main() -> int:
    started = time.perf_counter()
    deck = load_deck(DECK)
    engine = Engine(deck)
    m1 = deck.layer_index["M1"]
    names = []
    for i in range(NETS):
        net = generate_net(deck, SHAPES, seed=7, name=f"b{i}", origin=(i * 400_000, 0))
        engine.open_net(net.name, net.pins, None, net.shapes)
        names.append(net.name)
    advise_times: list[float] = []
    score_times: list[float] = []
    outcomes = {"legal as is": 0, "hop": 0, "jumper": 0, "diode": 0, "none": 0}
    for name in names:
        x1, y1, x2, y2 = _candidate(engine, name)
        rect = run_rect(x1, y1, x2, y2, deck.layers[m1].wire_width)
        adv = engine.advise(name, m1, x1, y1, x2, y2)  # warm: the net's state is built
        key = ("legal as is" if adv.legal_as_is else "hop" if adv.best else
               "jumper" if adv.jumper and adv.jumper.legal and adv.jumper.hop_layer else
               "diode" if adv.diode and adv.diode.found else "none")
        outcomes[key] += 1
        for _ in range(REPEATS):
            t = time.perf_counter()
            engine.advise(name, m1, x1, y1, x2, y2)
            advise_times.append(time.perf_counter() - t)
            t = time.perf_counter()
            engine.score(name, [Shape(m1, rect)])
            score_times.append(time.perf_counter() - t)
    advise_times.sort()
    p50 = statistics.median(advise_times)
    p99 = advise_times[min(len(advise_times) - 1, int(0.99 * len(advise_times)))]
    s50 = statistics.median(score_times)
    print(f"advice bench: {NETS} nets of {SHAPES} shapes, {len(advise_times)} advise calls "
          f"({', '.join(f'{k}: {v}' for k, v in outcomes.items())})")
    print(f"  advise p50 {p50 * 1e3:.3f} ms, p99 {p99 * 1e3:.3f} ms (issue target p50 <= 1 ms)")
    print(f"  one what-if score p50 {s50 * 1e3:.3f} ms; advise / score = {p50 / s50:.1f}")
    print(f"  wall {time.perf_counter() - started:.1f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
