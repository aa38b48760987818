"""Advice latency: one ``Engine.advise`` answer for a 50-shape net, in process.

Nets come from bench/netgen.py (seeded, on the lumen-6m demo deck so that M1 has
same-direction layers above it: M3 and M5). The candidate is an M1 run leaving a gate
pin, long enough to break a limit, so the whole advice is computed: layer hops with
their via stacks and scores, obstacle queries, the jumper search and the diode search
(exact scores with a trial diode pin, through the net's view). Other nets of the design
fill the obstacle index. Reported, all in one run and paired per call: p50 / p99 of
advise; the same with the jumper's bisection search alone (no secant steps: the
baseline they replace); advise asking only for the hop (``want=("hop",)``);
the median of a single what-if score of the same run; the ratios advise / score; and
the exact what-if scores per answer (load-independent). The target (the compiled core's) is
p50 <= 300 us. Bounded: a fixed count of calls.

    python -m bench.advice_bench
"""

from __future__ import annotations

import os
import statistics
import sys
import time
from pathlib import Path

from etchguard import Engine, Shape, load_deck, run_rect
from etchguard._advice import _Advisor

from .netgen import generate_net

TARGET_P50_S = 300e-6
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
    search_times: list[float] = []
    hop_times: list[float] = []
    score_times: list[float] = []
    scores_fast: list[int] = []
    scores_search: list[int] = []
    scores_hop: list[int] = []
    outcomes = {"legal as is": 0, "hop": 0, "jumper": 0, "diode": 0, "none": 0}
    for name in names:
        x1, y1, x2, y2 = _candidate(engine, name)
        rect = run_rect(x1, y1, x2, y2, deck.layers[m1].wire_width)
        adv = engine.advise(name, m1, x1, y1, x2, y2)  # warm: the net's state is built
        key = ("legal as is" if adv.legal_as_is else "hop" if adv.best else
               "jumper" if adv.jumper and adv.jumper.legal and adv.jumper.hop_layer else
               "diode" if adv.diode and adv.diode.found else "none")
        outcomes[key] += 1
        scores_fast.append(adv.exact_scores)
        for _ in range(REPEATS):
            t = time.perf_counter()
            engine.advise(name, m1, x1, y1, x2, y2)
            advise_times.append(time.perf_counter() - t)
            _Advisor.tangent_search = False
            try:
                t = time.perf_counter()
                slow = engine.advise(name, m1, x1, y1, x2, y2)
                search_times.append(time.perf_counter() - t)
            finally:
                _Advisor.tangent_search = True
            t = time.perf_counter()
            hop = engine.advise(name, m1, x1, y1, x2, y2, want=("hop",))
            hop_times.append(time.perf_counter() - t)
            t = time.perf_counter()
            engine.score(name, [Shape(m1, rect)])
            score_times.append(time.perf_counter() - t)
        scores_search.append(slow.exact_scores)
        scores_hop.append(hop.exact_scores)

    def p(times: list[float], q: float) -> float:
        times = sorted(times)
        return times[min(len(times) - 1, int(q * len(times)))]

    p50, s50 = statistics.median(advise_times), statistics.median(score_times)
    b50, h50 = statistics.median(search_times), statistics.median(hop_times)
    print(f"advice bench (load {os.getloadavg()[0]:.2f}): {NETS} nets of {SHAPES} shapes, "
          f"{len(advise_times)} calls of each kind ({', '.join(f'{k}: {v}' for k, v in outcomes.items())})")
    print(f"  advise p50 {p50 * 1e3:.3f} ms, p99 {p(advise_times, 0.99) * 1e3:.3f} ms "
          f"(target p50 <= {TARGET_P50_S * 1e6:.0f} us: {'met' if p50 <= TARGET_P50_S else 'NOT met'}); "
          f"advise / score = {p50 / s50:.1f}")
    print(f"  bisection alone p50 {b50 * 1e3:.3f} ms, p99 {p(search_times, 0.99) * 1e3:.3f} ms; "
          f"/ score = {b50 / s50:.1f}; secant steps speed-up {b50 / p50:.2f}x")
    print(f"  hop only p50 {h50 * 1e3:.3f} ms; / score = {h50 / s50:.1f}")
    print(f"  one what-if score (the run as is) p50 {s50 * 1e3:.3f} ms")
    print(f"  exact scores per answer, median (min-max): full {statistics.median(scores_fast)} "
          f"({min(scores_fast)}-{max(scores_fast)}), bisection alone {statistics.median(scores_search)} "
          f"({min(scores_search)}-{max(scores_search)}), hop only {statistics.median(scores_hop)}")
    print(f"  wall {time.perf_counter() - started:.1f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
