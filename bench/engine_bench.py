"""In-process engine benchmark: what-if, commit, rip-up, from-scratch ratio, memory.

Every figure is measured in this run on this machine; nothing is a stored number.
Timings are per call, ``time.perf_counter_ns`` around one public ``Engine`` call,
after a warm-up, with the garbage collector disabled inside the timing loops (it is
re-enabled between them); p50 and p99 are over all repetitions. The machine has 2
cores shared with other workers, so the numbers are noisy: compare ratios and
medians of one run, not absolute times across runs. The load average is printed at
the start and the end of the run.

What is measured (the compiled core's targets, on this 2-core machine, bench deck lumen-5m):

* what-if of one run, verdict only (``detail=False``): nets of 10, 50, 100 shapes
  (p50 <= 3 us) and 10,000 shapes (p50 <= 10 us); with every changed ratio
  (``detail=True``, p50 <= 10 us at <= 100 shapes); a via stack and a run (4 shapes,
  verdict only, p50 <= 5 us);
* commit and rip-up per shape at 50 shapes (p50 <= 5 us); rip-up p99 at 10,000 shapes
  (<= 1 ms); the first what-if after a commit at 50 shapes (p50 <= 10 us);
* the speed-up over the shapely + networkx recompute (bench/recompute_reference.py)
  at 100 shapes (>= 10,000x);
* memory per held shape, RSS growth over the shapes of nets of 20 shapes (<= 150 B at
  1,000,000 nets; ``--memory-nets``), with a spot check that a what-if on the first
  net opened costs what it costs on the last one, and the first what-if on held nets
  not asked since they were opened.

Run: ``python -m bench.engine_bench [--quick] [--memory-nets N] [--profile]``
(``make bench`` runs it with the defaults through ``python -m bench``).
"""

from __future__ import annotations

import argparse
import cProfile
import functools
import gc
import io
import json
import os
import platform
import pstats
import random
import sys
import time
import tracemalloc
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path

from etchguard import Deck, Engine, Shape

from .netgen import BENCH_DECK, GeneratedNet, bench_deck, extension_candidates, generate_net, via_run_candidates
from .recompute_reference import added_area_um2, disagreements, recompute

OUT_DIR = Path(__file__).resolve().parent / "out"
REPO = Path(__file__).resolve().parents[1]

# The compiled core's speed targets, on this 2-core machine with the 9-step bench deck.
VERDICT_TARGET_US = {10: 3.0, 50: 3.0, 100: 3.0, 10_000: 10.0}
DETAIL_TARGET_US = 10.0  # every changed ratio, nets of <= 100 shapes
VIA_RUN_TARGET_US = 5.0
COMMIT_TARGET_US = 5.0  # commit and rip-up, per shape, 50 shapes
BIG_RIPUP_P99_TARGET_US = 1_000.0  # 10,000 shapes
FIRST_SCORE_TARGET_US = 10.0  # 50 shapes
SPEEDUP_TARGET = 10_000.0
BYTES_PER_SHAPE_TARGET = 150.0
MEMORY_TARGET_NETS = 1_000_000
MEMORY_VERDICT_MIN_NETS = 10_000
MEMORY_CHECK_EVERY = 256  # nets opened between looks at the clock and the free memory
SAME_COST_TOLERANCE = 1.25  # first / last net p50: within the noise of this machine


@dataclass(frozen=True)
class Timing:
    p50_us: float
    p99_us: float
    count: int


@dataclass
class Row:
    metric: str
    value: float
    unit: str
    p99: float | None = None
    target: str = ""
    met: bool | None = None
    note: str = ""
    calls: int | None = None


@dataclass
class Sanity:
    """Engine answers checked against the shapely + networkx recomputation."""

    compared: int = 0
    problems: list[str] = field(default_factory=list)

    def add(self, where: str, problems: list[str]) -> None:
        self.compared += 1
        self.problems += [f"{where}: {p}" for p in problems]


def percentile(sorted_values: Sequence[int], q: float) -> float:
    """Nearest-rank percentile of already sorted values."""
    k = max(0, min(len(sorted_values) - 1, int(round(q / 100.0 * len(sorted_values) + 0.5)) - 1))
    return float(sorted_values[k])


def timing(samples_ns: list[int]) -> Timing:
    samples_ns.sort()
    return Timing(percentile(samples_ns, 50) / 1e3, percentile(samples_ns, 99) / 1e3, len(samples_ns))


def timer_overhead_ns(reps: int = 20_000) -> float:
    """Median cost of the two clock reads around every timed call."""
    ns = time.perf_counter_ns
    samples = []
    for _ in range(reps):
        t0 = ns()
        samples.append(ns() - t0)
    samples.sort()
    return float(samples[len(samples) // 2])


class _NoGc:
    def __enter__(self) -> None:
        gc.collect()
        gc.disable()

    def __exit__(self, *exc: object) -> None:
        gc.enable()


def engine_revision() -> str:
    """The commit the engine was measured at, marked when its files had local changes."""
    import subprocess
    try:
        head = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=REPO, capture_output=True,
                              text=True, timeout=10).stdout.strip()
        dirty = subprocess.run(["git", "status", "--porcelain", "--", "service/etchguard", "core"], cwd=REPO,
                               capture_output=True, text=True, timeout=10).stdout.strip()
    except (OSError, subprocess.SubprocessError):
        return "unknown"
    return f"{head}{' + local engine changes' if dirty else ''}" if head else "unknown"


def load_average() -> float:
    try:
        return round(os.getloadavg()[0], 2)
    except OSError:
        return float("nan")


def machine() -> dict[str, object]:
    model = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    return {"cpu": model, "cores": os.cpu_count(), "python": platform.python_version(),
            "implementation": platform.python_implementation(), "platform": platform.platform(),
            "load_average_1m": load_average()}


# -- workloads ------------------------------------------------------------------------


def open_nets(engine: Engine, deck: Deck, size: int, count: int, seed: int | str) -> list[GeneratedNet]:
    nets = [generate_net(deck, size, seed=seed, name=f"s{size}_{i}") for i in range(count)]
    for net in nets:
        engine.open_net(net.name, net.pins, shapes=net.shapes)
    return nets


def score_bench(deck: Deck, size: int, nets: int, candidates: int, reps: int, warmup: int,
                sanity_checks: int, sanity: Sanity, detail: bool, seed: int | str = 1,
                make_candidates: Callable[..., list[list[Shape]]] = extension_candidates) -> Timing:
    """p50/p99 of ``Engine.score(name, candidate, detail=detail)`` on nets of ``size``
    shapes, the candidates of all nets in a shuffled order."""
    engine = Engine(deck)
    opened = open_nets(engine, deck, size, nets, seed)
    work = [(net, c) for net in opened for c in make_candidates(deck, net, candidates, seed=seed)]
    random.Random(f"{seed}/order").shuffle(work)
    score = functools.partial(engine.score, detail=detail)
    for i in range(warmup):
        net, cand = work[i % len(work)]
        score(net.name, cand)
    ns = time.perf_counter_ns
    samples = [0] * reps
    n = len(work)
    with _NoGc():
        for i in range(reps):
            net, cand = work[i % n]
            name = net.name
            t0 = ns()
            score(name, cand)
            samples[i] = ns() - t0
    for net, cand in work[:sanity_checks]:
        sanity.add(f"score {net.name}", _score_problems(deck, net, cand, score(net.name, cand)))
    for net in opened[:sanity_checks]:
        sanity.add(f"check {net.name}", disagreements(engine.check(net.name), recompute(deck, net.pins, net.shapes)))
    return timing(samples)


def _score_problems(deck: Deck, net: GeneratedNet, cand: list[Shape], got) -> list[str]:
    after = recompute(deck, net.pins, list(net.shapes) + cand)
    problems = []
    if abs(got.worst_utilization - after.worst_utilization) > 1e-9 * max(1.0, after.worst_utilization):
        problems.append(f"worst utilization {got.worst_utilization!r} vs {after.worst_utilization!r}")
    if got.legal != after.legal:
        problems.append(f"legal {got.legal} vs {after.legal}")
    for layer, area in added_area_um2(deck, net.shapes, cand).items():
        if abs(got.added_area_um2.get(layer, 0.0) - area) > 1e-9 * max(1.0, area):
            problems.append(f"added area on {layer} {got.added_area_um2.get(layer)!r} vs {area!r}")
    return problems


def commit_bench(deck: Deck, size: int, nets: int, reps: int, warmup: int, sanity_checks: int,
                 sanity: Sanity, seed: int | str = 2) -> tuple[Timing, Timing, Timing]:
    """Per shape: commit one run, then rip it up; and the first what-if (verdict only)
    after a commit: commit, time one score, rip up."""
    engine = Engine(deck)
    opened = open_nets(engine, deck, size, nets, seed)
    for net in opened:  # a router asks before it commits
        engine.check(net.name)
    work = [(net, c) for net in opened for c in extension_candidates(deck, net, 20, seed=seed)]
    random.Random(f"{seed}/order").shuffle(work)
    commit, remove = engine.commit, engine.remove
    score = functools.partial(engine.score, detail=False)
    for i in range(warmup):
        net, cand = work[i % len(work)]
        remove(net.name, commit(net.name, cand))
    ns = time.perf_counter_ns
    commits, rips, rescores = [0] * reps, [0] * reps, [0] * reps
    n = len(work)
    with _NoGc():
        for i in range(reps):
            net, cand = work[i % n]
            name = net.name
            t0 = ns()
            ids = commit(name, cand)
            t1 = ns()
            remove(name, ids)
            t2 = ns()
            commits[i], rips[i] = t1 - t0, t2 - t1
        for i in range(reps):
            net, cand = work[i % n]
            name = net.name
            ids = commit(name, cand)
            probe = work[(i + 1) % n][1] if work[(i + 1) % n][0] is net else cand
            t0 = ns()
            score(name, probe)
            rescores[i] = ns() - t0
            remove(name, ids)
    # After all that churn the held state must still be the net as generated.
    for net in opened[:sanity_checks]:
        sanity.add(f"after commit/rip-up {net.name}",
                   disagreements(engine.check(net.name), recompute(deck, net.pins, net.shapes)))
    per_shape = len(work[0][1])
    assert all(len(c) == per_shape for _, c in work)
    return (timing([t // per_shape for t in commits]), timing([t // per_shape for t in rips]),
            timing(rescores))


def recompute_bench(deck: Deck, size: int, nets: int, reps: int, seed: int | str = 3,
                    brute: bool = False) -> Timing:
    """From-scratch check of a net of ``size`` shapes plus one candidate run."""
    opened = [generate_net(deck, size, seed=seed, name=f"r{size}_{i}") for i in range(nets)]
    work = [(net, c) for net in opened for c in extension_candidates(deck, net, max(1, reps // nets + 1), seed=seed)]
    ns = time.perf_counter_ns
    samples = []
    if brute:
        sys.path.insert(0, str(REPO / "tests"))
        try:
            import reference  # type: ignore[import-not-found]
        finally:
            sys.path.pop(0)
        ref_deck = reference.load_ref_deck(BENCH_DECK)
        names = [layer.name for layer in deck.layers]
        for net, cand in work[:reps]:
            data = net.as_json(deck)
            data["shapes"] += [{"layer": names[s.layer], "rect": list(s.rect)} for s in cand]
            t0 = ns()
            reference.analyze(ref_deck, data)
            samples.append(ns() - t0)
        return timing(samples)
    recompute(deck, work[0][0].pins, work[0][0].shapes)  # warm-up (imports, caches)
    for net, cand in work[:reps]:
        shapes = list(net.shapes) + cand
        t0 = ns()
        recompute(deck, net.pins, shapes)
        samples.append(ns() - t0)
    return timing(samples)


# -- memory: a design's worth of nets held in one engine ---------------------------------


def _rss_bytes() -> int:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


def _mem_available_bytes() -> int:
    for line in Path("/proc/meminfo").read_text().splitlines():
        if line.startswith("MemAvailable:"):
            return int(line.split()[1]) * 1024
    return 1 << 62


def _physical_bytes() -> int:
    return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")


def memory_reserve_bytes() -> int:
    """Memory the build leaves to the machine's other users: a fifth of it, at least 4 GiB."""
    return max(4 << 30, _physical_bytes() // 5)


@dataclass(frozen=True)
class Memory:
    wanted_nets: int
    nets: int  # held when the build stopped (fewer than wanted when a budget stopped it)
    stopped_by: str  # "" (complete), "time" or "memory"
    shapes: int
    rss_bytes_per_shape: float
    core_bytes_per_shape: float  # the core's own estimate (Net::memory_bytes), all nets
    python_bytes_per_shape: float  # tracemalloc, on a sample
    sample_nets: int
    build_seconds: float
    first_net: Timing  # what-if on the first net opened, alternating with the last
    last_net: Timing
    unasked: Timing  # first what-if on held nets not asked since they were opened


def _held_net(deck: Deck, rng: random.Random, i: int, shapes: int) -> GeneratedNet:
    # Nets spread over a block, as in a design; each built fresh (no shared objects).
    return generate_net(deck, shapes, seed=7, name=f"m{i}",
                        origin=(rng.randrange(0, 2_000_000, 10), rng.randrange(0, 2_000_000, 10)))


def memory_bench(deck: Deck, nets: int, shapes_per_net: int, sample_nets: int, spot_reps: int,
                 unasked_nets: int, budget_s: float = float("inf")) -> Memory:
    """Bytes per held shape with ``nets`` nets of ``shapes_per_net`` shapes in one Engine.

    Main figure: growth of the resident set (VmRSS, /proc/self/statm) while the nets
    are opened, per routed shape held; it includes allocator overhead and everything
    the engine keeps per net (the core's state, the Python registry, the obstacle
    index of advice). Breakdown: the core's own estimate (``Net::memory_bytes``) summed
    over all nets, and the Python objects (tracemalloc) of a smaller sample. The build
    stops early after ``budget_s`` seconds, or when the machine's available memory
    falls to the reserve left to its other users (reported as such).
    """
    rng = random.Random(11)
    engine = Engine(deck)
    every = max(1, nets // max(1, unasked_nets))
    unasked: list[tuple[str, list[Shape]]] = []  # a candidate for every `every`-th net
    reserve = memory_reserve_bytes()
    gc.collect()
    rss0 = _rss_bytes()
    t0 = time.perf_counter()
    held, stopped_by = 0, ""
    first = last = None
    for i in range(nets):
        net = _held_net(deck, rng, i, shapes_per_net)
        engine.open_net(net.name, net.pins, shapes=net.shapes)
        held += 1
        first = first or net
        last = net
        if i % every == every // 2:
            unasked.append((net.name, extension_candidates(deck, net, 1, seed="unasked")[0]))
        if i % MEMORY_CHECK_EVERY == MEMORY_CHECK_EVERY - 1:
            if time.perf_counter() - t0 > budget_s:
                stopped_by = "time"
            elif _mem_available_bytes() < reserve:
                stopped_by = "memory"
            if stopped_by:
                break
    build = time.perf_counter() - t0
    del net
    gc.collect()
    shapes = held * shapes_per_net
    rss_per_shape = (_rss_bytes() - rss0) / shapes
    # The Engine has no public per-net memory figure; the core's estimate is read
    # through its registry.
    core_bytes = sum(n.core.memory_bytes() for n in engine._nets.values())  # noqa: SLF001
    assert first is not None and last is not None
    first_t, last_t = _first_and_last(deck, engine, first, last, spot_reps)
    unasked_t = _unasked(engine, unasked)
    del engine
    gc.collect()
    return Memory(nets, held, stopped_by, shapes, rss_per_shape, core_bytes / shapes,
                  _python_bytes_per_shape(deck, sample_nets, shapes_per_net), sample_nets, build,
                  first_t, last_t, unasked_t)


def _first_and_last(deck: Deck, engine: Engine, first: GeneratedNet, last: GeneratedNet,
                    reps: int) -> tuple[Timing, Timing]:
    """What-ifs (verdict only) on the first and the last net opened, call for call in
    turn, so the machine's drift hits both alike."""
    work = [(net.name, extension_candidates(deck, net, 25, seed="spot")) for net in (first, last)]
    for name, cands in work:  # the first question on a net builds its assessment
        engine.score(name, cands[0], detail=False)
    ns = time.perf_counter_ns
    samples: tuple[list[int], list[int]] = ([], [])
    with _NoGc():
        for i in range(reps):
            for k, (name, cands) in enumerate(work):
                cand = cands[i % len(cands)]
                t0 = ns()
                engine.score(name, cand, detail=False)
                samples[k].append(ns() - t0)
    return timing(samples[0]), timing(samples[1])


def _unasked(engine: Engine, work: list[tuple[str, list[Shape]]]) -> Timing:
    ns = time.perf_counter_ns
    samples = []
    with _NoGc():
        for name, cand in work:
            t0 = ns()
            engine.score(name, cand, detail=False)
            samples.append(ns() - t0)
    return timing(samples)


def _python_bytes_per_shape(deck: Deck, nets: int, shapes_per_net: int) -> float:
    """Python heap (tracemalloc: the registry, net records, pins, obstacle index) per
    shape held, on a sample of nets; the core's C++ heap is not traced."""
    rng = random.Random(12)
    sample = Engine(deck)
    gc.collect()
    tracemalloc.start()
    try:
        base = tracemalloc.get_traced_memory()[0]
        for i in range(nets):
            # Generated under the trace: what the engine keeps of the generator's
            # objects (pins, rectangles) is counted, the rest is freed before the count.
            net = _held_net(deck, rng, i, shapes_per_net)
            sample.open_net(net.name, net.pins, shapes=net.shapes)
        del net
        gc.collect()
        held = tracemalloc.get_traced_memory()[0] - base
    finally:
        tracemalloc.stop()
    return held / (nets * shapes_per_net)


# -- profile --------------------------------------------------------------------------


def profile_score(deck: Deck, size: int = 50, calls: int = 20_000, top: int = 25, detail: bool = False) -> str:
    """cProfile of Engine.score on nets of ``size`` shapes, sorted by own time."""
    engine = Engine(deck)
    opened = open_nets(engine, deck, size, 20, seed=5)
    work = [(net.name, c) for net in opened for c in extension_candidates(deck, net, 20, seed=5)]
    for name, cand in work:
        engine.score(name, cand, detail=detail)
    profiler = cProfile.Profile()
    profiler.enable()
    for i in range(calls):
        name, cand = work[i % len(work)]
        engine.score(name, cand, detail=detail)
    profiler.disable()
    out = io.StringIO()
    stats = pstats.Stats(profiler, stream=out)
    stats.sort_stats("tottime").print_stats(top)
    return out.getvalue()


# -- the run --------------------------------------------------------------------------


@dataclass(frozen=True)
class Settings:
    score_sizes: tuple[int, ...] = (10, 50, 100, 10_000)
    score_nets: int = 20
    big_nets: int = 2  # nets of 10,000 shapes
    candidates: int = 25
    reps: int = 20_000
    big_reps: int = 4_000
    warmup: int = 2_000
    commit_size: int = 50
    commit_reps: int = 10_000
    big_commit_size: int = 10_000
    big_commit_reps: int = 1_000
    speedup_size: int = 100
    recompute_reps: int = 60
    brute_reps: int = 5
    memory_nets: int = 100_000
    memory_shapes: int = 20
    memory_sample: int = 1_000
    memory_budget_s: float = 300.0
    spot_reps: int = 5_000
    unasked_nets: int = 2_000
    sanity_checks: int = 3


QUICK = Settings(score_sizes=(10, 50, 100, 2_000), score_nets=3, big_nets=1, candidates=5, reps=300,
                 big_reps=100, warmup=50, commit_reps=200, big_commit_size=2_000, big_commit_reps=50,
                 recompute_reps=4, brute_reps=1, memory_nets=300, memory_sample=50, spot_reps=200,
                 unasked_nets=50, sanity_checks=2)


def _met(value: float, limit: float, higher_is_better: bool = False) -> bool:
    return value >= limit if higher_is_better else value <= limit


def _what_if_rows(settings: Settings, deck: Deck, sanity: Sanity, log: Callable[[str], None]
                  ) -> tuple[list[Row], dict[tuple[int, bool], Timing]]:
    rows, found = [], {}
    for detail in (False, True):
        for size in settings.score_sizes:
            big = size >= 1_000
            kind = "every changed ratio" if detail else "verdict only"
            log(f"what-if ({kind}) on nets of {size} shapes ...")
            t = score_bench(deck, size, settings.big_nets if big else settings.score_nets,
                            settings.candidates * (4 if big else 1), settings.big_reps if big else settings.reps,
                            settings.warmup // (10 if big else 1), 1 if big else settings.sanity_checks,
                            sanity, detail)
            found[(size, detail)] = t
            limit = (DETAIL_TARGET_US if size <= 100 else None) if detail else VERDICT_TARGET_US.get(size)
            rows.append(Row(f"what-if, 1 run, {kind}, net of {size} shapes", t.p50_us, "us", t.p99_us,
                            f"p50 <= {limit:g} us" if limit else "", _met(t.p50_us, limit) if limit else None,
                            calls=t.count))
    size = settings.commit_size
    for detail in (False, True):
        kind = "every changed ratio" if detail else "verdict only"
        log(f"what-if of a via stack + run ({kind}) on nets of {size} shapes ...")
        t = score_bench(deck, size, settings.score_nets, settings.candidates, settings.reps // 2, settings.warmup,
                        settings.sanity_checks, sanity, detail, make_candidates=via_run_candidates)
        rows.append(Row(f"what-if, via stack + run (4 shapes), {kind}, net of {size}", t.p50_us, "us", t.p99_us,
                        "" if detail else f"p50 <= {VIA_RUN_TARGET_US:g} us",
                        None if detail else _met(t.p50_us, VIA_RUN_TARGET_US), calls=t.count))
    return rows, found


def _commit_rows(settings: Settings, deck: Deck, sanity: Sanity, log: Callable[[str], None]) -> list[Row]:
    size, big = settings.commit_size, settings.big_commit_size
    log(f"commit and rip-up on nets of {size} shapes ...")
    c, r, s = commit_bench(deck, size, settings.score_nets, settings.commit_reps, settings.warmup,
                           settings.sanity_checks, sanity)
    log(f"commit and rip-up on nets of {big} shapes ...")
    bc, br, bs = commit_bench(deck, big, settings.big_nets, settings.big_commit_reps, settings.warmup // 10, 1, sanity)
    rip_met = _met(br.p99_us, BIG_RIPUP_P99_TARGET_US) if big == 10_000 else None
    return [
        Row(f"commit, per shape, net of {size}", c.p50_us, "us", c.p99_us, f"p50 <= {COMMIT_TARGET_US:g} us",
            _met(c.p50_us, COMMIT_TARGET_US), calls=c.count),
        Row(f"rip-up, per shape, net of {size}", r.p50_us, "us", r.p99_us, f"p50 <= {COMMIT_TARGET_US:g} us",
            _met(r.p50_us, COMMIT_TARGET_US), calls=r.count),
        Row(f"first what-if after a commit, net of {size}", s.p50_us, "us", s.p99_us,
            f"p50 <= {FIRST_SCORE_TARGET_US:g} us", _met(s.p50_us, FIRST_SCORE_TARGET_US),
            "verdict only; commit, then one timed score, then rip-up", calls=s.count),
        Row(f"commit, per shape, net of {big}", bc.p50_us, "us", bc.p99_us, calls=bc.count),
        Row(f"rip-up, per shape, net of {big}", br.p50_us, "us", br.p99_us,
            f"p99 <= {BIG_RIPUP_P99_TARGET_US / 1e3:g} ms" if big == 10_000 else "", rip_met,
            "the target is on the p99 column", calls=br.count),
        Row(f"first what-if after a commit, net of {big}", bs.p50_us, "us", bs.p99_us, calls=bs.count),
    ]


def _speedup_rows(settings: Settings, deck: Deck, found: dict[tuple[int, bool], Timing],
                  sanity: Sanity, log: Callable[[str], None]) -> list[Row]:
    size = settings.speedup_size
    log(f"from-scratch recompute (shapely + networkx) on nets of {size} shapes ...")
    base = recompute_bench(deck, size, 10, settings.recompute_reps)

    def engine_p50(detail: bool) -> float:
        if (size, detail) not in found:
            found[(size, detail)] = score_bench(deck, size, settings.score_nets, settings.candidates, settings.reps,
                                                settings.warmup, 0, sanity, detail)
        return found[(size, detail)].p50_us

    full, verdict = base.p50_us / engine_p50(True), base.p50_us / engine_p50(False)
    rows = [Row(f"recompute from scratch, net of {size} + 1 run", base.p50_us / 1e3, "ms", base.p99_us / 1e3,
                note="bench/recompute_reference.py (STRtree + vectorised shapely, networkx)", calls=base.count),
            Row(f"speed-up of the what-if over recompute, {size} shapes", full, "x", None,
                f">= {SPEEDUP_TARGET:,.0f}x", _met(full, SPEEDUP_TARGET, True),
                f"ratio of p50s, same run, every changed ratio (detail=True); verdict only: {verdict:,.0f}x")]
    if (REPO / "tests" / "reference.py").exists() and settings.brute_reps:
        log("brute-force test reference (tests/reference.py) for comparison ...")
        brute = recompute_bench(deck, size, 2, settings.brute_reps, brute=True)
        rows.append(Row(f"speed-up over tests/reference.py, {size} shapes", brute.p50_us / engine_p50(True), "x",
                        None, note=f"brute-force pairwise reference of the tests; p50 {brute.p50_us / 1e3:.0f} ms; "
                                   "for comparison only", calls=brute.count))
    return rows


def _memory_rows(settings: Settings, deck: Deck, log: Callable[[str], None]) -> list[Row]:
    log(f"memory: {settings.memory_nets:,} nets of {settings.memory_shapes} shapes in one engine ...")
    m = memory_bench(deck, settings.memory_nets, settings.memory_shapes, settings.memory_sample,
                     settings.spot_reps, settings.unasked_nets, settings.memory_budget_s)
    stop = {"": "", "time": f"; the {settings.memory_budget_s:g} s time budget stopped the build",
            "memory": "; the machine's memory reserve stopped the build"}[m.stopped_by]
    same = m.first_net.p50_us / m.last_net.p50_us
    # A few thousand nets fit in memory the process has mapped already: RSS growth says
    # nothing there, so no verdict below this many nets.
    judged = m.nets >= MEMORY_VERDICT_MIN_NETS
    projected = m.rss_bytes_per_shape * settings.memory_shapes * MEMORY_TARGET_NETS
    return [
        Row(f"memory per held shape, {m.nets:,} nets of {settings.memory_shapes} held", m.rss_bytes_per_shape, "B",
            None, f"<= {BYTES_PER_SHAPE_TARGET:g} B at {MEMORY_TARGET_NETS:,} nets",
            _met(m.rss_bytes_per_shape, BYTES_PER_SHAPE_TARGET) if judged else None,
            f"RSS growth / {m.shapes:,} shapes, {m.nets:,} of {m.wanted_nets:,} nets wanted{stop}"
            + ("" if judged else f"; under {MEMORY_VERDICT_MIN_NETS:,} nets RSS growth is no verdict")
            + ("" if m.nets >= MEMORY_TARGET_NETS else
               f"; {MEMORY_TARGET_NETS:,} nets at this rate: {projected / 2**30:.0f} GiB, "
               f"the machine has {_physical_bytes() / 2**30:.0f} GiB")),
        Row("  of which the core's own estimate", m.core_bytes_per_shape, "B", None,
            note="Net::memory_bytes summed over every held net"),
        Row("  of which Python objects", m.python_bytes_per_shape, "B", None,
            note=f"tracemalloc, sample of {m.sample_nets:,} nets: registry, net records, pins, obstacle index"),
        Row(f"what-if on the first net opened, {m.nets:,} held", m.first_net.p50_us, "us", m.first_net.p99_us,
            calls=m.first_net.count),
        Row(f"what-if on the last net opened, {m.nets:,} held", m.last_net.p50_us, "us", m.last_net.p99_us,
            calls=m.last_net.count),
        Row("  first / last net, p50", same, "ratio", None, f"<= {SAME_COST_TOLERANCE:g} (same cost)",
            _met(same, SAME_COST_TOLERANCE), "verdict only, calls on the two nets in turn"),
        Row("first what-if on a held net not asked since opened", m.unasked.p50_us, "us", m.unasked.p99_us,
            note="one call each on nets spread over all held; builds the net's assessment", calls=m.unasked.count),
        Row("open_net throughput (bulk load)", m.shapes / m.build_seconds, "shapes/s", None,
            note=f"{m.build_seconds:.1f} s for {m.nets:,} nets, net generation included"),
    ]


def run(settings: Settings, log: Callable[[str], None] = print) -> dict[str, object]:
    """Every engine measurement; returns the table as plain data."""
    deck = bench_deck()
    sanity = Sanity()
    start = machine()
    overhead = timer_overhead_ns()
    rows, found = _what_if_rows(settings, deck, sanity, log)
    rows += _commit_rows(settings, deck, sanity, log)
    rows += _speedup_rows(settings, deck, found, sanity, log)
    rows += _memory_rows(settings, deck, log)
    return {"machine": start, "load_average_1m_end": load_average(), "engine_revision": engine_revision(),
            "timer_overhead_ns": overhead, "gc": "disabled inside timing loops",
            "deck": str(BENCH_DECK.relative_to(REPO)), "settings": asdict(settings),
            "sanity": {"compared": sanity.compared, "problems": sanity.problems},
            "rows": [asdict(r) for r in rows]}


def _fmt(value: float | None, unit: str) -> str:
    if value is None:
        return ""
    if unit in ("us", "ms"):
        return f"{value:.2f} {unit}" if value < 100 else f"{value:,.0f} {unit}"
    if unit == "x":
        return f"{value:,.0f}x"
    if unit == "ratio":
        return f"{value:.2f}"
    return f"{value:,.0f} {unit}"


def format_table(result: dict[str, object]) -> str:
    rows = result["rows"]  # type: ignore[assignment]
    head = ("metric", "p50 / value", "p99", "target", "met", "calls")
    body = [(r["metric"], _fmt(r["value"], r["unit"]), _fmt(r["p99"], r["unit"]), r["target"],
             "" if r["met"] is None else ("yes" if r["met"] else "no"),
             "" if r["calls"] is None else r["calls"]) for r in rows]  # type: ignore[index]
    widths = [max(len(str(x[i])) for x in [head, *body]) for i in range(len(head))]
    line = lambda cells: "  ".join(str(c).ljust(w) for c, w in zip(cells, widths)).rstrip()  # noqa: E731
    m = result["machine"]  # type: ignore[assignment]
    sanity = result["sanity"]  # type: ignore[assignment]
    out = [f"etchguard engine bench -- {m['cpu']}, {m['cores']} cores, {m['implementation']} "  # type: ignore[index]
           f"{m['python']}, load {m['load_average_1m']} at start, {result['load_average_1m_end']} at end "  # type: ignore[index]
           "(shared machine: noisy)",
           f"engine at {result['engine_revision']}; deck {result['deck']}; per-call perf_counter_ns (overhead "
           f"{result['timer_overhead_ns']:.0f} ns included); gc {result['gc']}",
           line(head), line(["-" * w for w in widths]), *(line(b) for b in body),
           f"sanity: {sanity['compared']} engine answers compared with the shapely + networkx "  # type: ignore[index]
           f"recompute, {len(sanity['problems'])} disagreements"]  # type: ignore[index]
    out += [f"  ! {p}" for p in sanity["problems"][:10]]  # type: ignore[index]
    out += [f"notes: {r['metric'].strip()}: {r['note']}" for r in rows if r["note"]]  # type: ignore[index]
    return "\n".join(out)


def main(argv: Sequence[str] = ()) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.engine_bench", description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="tiny sizes (seconds), for a smoke run")
    parser.add_argument("--memory-nets", type=int,
                        help=f"nets held for the memory figure (default {Settings.memory_nets:,}; "
                             f"the target is at {MEMORY_TARGET_NETS:,})")
    parser.add_argument("--memory-budget", type=float, help="seconds the memory build may take (default 300)")
    parser.add_argument("--profile", action="store_true",
                        help="print a cProfile of the verdict-only what-if on 50-shape nets and stop")
    args = parser.parse_args(list(argv))
    if args.profile:
        print(profile_score(bench_deck()))
        return 0
    settings = QUICK if args.quick else Settings()
    if args.memory_nets:
        settings = replace(settings, memory_nets=args.memory_nets)
    if args.memory_budget:
        settings = replace(settings, memory_budget_s=args.memory_budget)
    result = run(settings, log=lambda s: print(s, file=sys.stderr, flush=True))
    table = format_table(result)
    print(table)
    OUT_DIR.mkdir(exist_ok=True)
    (OUT_DIR / "engine.json").write_text(json.dumps({**result, "table": table}, indent=2) + "\n")
    print(f"written: {(OUT_DIR / 'engine.json').relative_to(REPO)}")
    return 1 if result["sanity"]["problems"] else 0  # type: ignore[index]


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
