"""In-process engine benchmark: what-if score, commit, rip-up, from-scratch ratio, memory.

Every figure is measured in this run on this machine; nothing is a stored number.
Timings are per call, ``time.perf_counter_ns`` around one public ``Engine`` call,
after a warm-up, with the garbage collector disabled inside the timing loops (it is
re-enabled between them); p50 and p99 are over all repetitions. The machine has 2
cores shared with other workers, so the numbers are noisy: compare ratios and
medians of one run, not absolute times across runs.

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
import inspect
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

# The speed targets, on this 2-core machine with the 9-step deck.
SCORE_TARGET_US = {10: 10.0, 50: 10.0, 10_000: 30.0}
COMMIT_TARGET_US = 20.0
SPEEDUP_TARGET = 1000.0
BYTES_PER_SHAPE_TARGET = 800.0


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
        dirty = subprocess.run(["git", "status", "--porcelain", "--", "service/etchguard"], cwd=REPO,
                               capture_output=True, text=True, timeout=10).stdout.strip()
    except (OSError, subprocess.SubprocessError):
        return "unknown"
    return f"{head}{' + local engine changes' if dirty else ''}" if head else "unknown"


def machine() -> dict[str, object]:
    model = "unknown"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                model = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    try:
        load = os.getloadavg()
    except OSError:
        load = (float("nan"),) * 3
    return {"cpu": model, "cores": os.cpu_count(), "python": platform.python_version(),
            "implementation": platform.python_implementation(), "platform": platform.platform(),
            "load_average_1m": round(load[0], 2)}


# -- workloads ------------------------------------------------------------------------


def open_nets(engine: Engine, deck: Deck, size: int, count: int, seed: int | str) -> list[GeneratedNet]:
    nets = [generate_net(deck, size, seed=seed, name=f"s{size}_{i}") for i in range(count)]
    for net in nets:
        engine.open_net(net.name, net.pins, shapes=net.shapes)
    return nets


def score_bench(deck: Deck, size: int, nets: int, candidates: int, reps: int, warmup: int,
                sanity_checks: int, sanity: Sanity, seed: int | str = 1,
                make_candidates: Callable[..., list[list[Shape]]] = extension_candidates,
                detail: bool | None = None) -> Timing:
    """p50/p99 of ``Engine.score`` for one candidate on nets of ``size`` shapes
    (``detail`` is passed on when given: False asks for the verdict without the
    per-ratio change records)."""
    engine = Engine(deck)
    opened = open_nets(engine, deck, size, nets, seed)
    work = [(net, c) for net in opened for c in make_candidates(deck, net, candidates, seed=seed)]
    random.Random(f"{seed}/order").shuffle(work)
    score = engine.score if detail is None else functools.partial(engine.score, detail=detail)
    for net in opened:  # the first question after opening builds the assessment
        score(net.name, work[0][1])
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
        got = score(net.name, cand)
        after = recompute(deck, net.pins, list(net.shapes) + cand)
        problems = []
        if abs(got.worst_utilization - after.worst_utilization) > 1e-9 * max(1.0, after.worst_utilization):
            problems.append(f"worst utilization {got.worst_utilization!r} vs {after.worst_utilization!r}")
        if got.legal != after.legal:
            problems.append(f"legal {got.legal} vs {after.legal}")
        for layer, area in added_area_um2(deck, net.shapes, cand).items():
            if abs(got.added_area_um2.get(layer, 0.0) - area) > 1e-9 * max(1.0, area):
                problems.append(f"added area on {layer} {got.added_area_um2.get(layer)!r} vs {area!r}")
        sanity.add(f"score {net.name}", problems)
    for net in opened[:sanity_checks]:
        sanity.add(f"check {net.name}", disagreements(engine.check(net.name), recompute(deck, net.pins, net.shapes)))
    return timing(samples)


def commit_bench(deck: Deck, size: int, nets: int, reps: int, warmup: int, sanity_checks: int,
                 sanity: Sanity, seed: int | str = 2) -> tuple[Timing, Timing, Timing]:
    """Per shape: commit one run, then rip it up; and the first score after a commit."""
    engine = Engine(deck)
    opened = open_nets(engine, deck, size, nets, seed)
    for net in opened:  # a router asks before it commits: time commits on built state
        engine.check(net.name)
    work = [(net, c) for net in opened for c in extension_candidates(deck, net, 20, seed=seed)]
    random.Random(f"{seed}/order").shuffle(work)
    commit, remove, score = engine.commit, engine.remove, engine.score
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


def _rss_bytes() -> int:
    with open("/proc/self/statm") as fh:
        return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


@dataclass(frozen=True)
class Memory:
    wanted_nets: int
    nets: int  # held when the build stopped (fewer than wanted if the time budget ran out)
    shapes: int
    hot_nets: int
    rss_bytes_per_shape: float
    build_seconds: float
    cold_bytes_per_shape: float  # tracemalloc, sample: spec only (state not built)
    hot_bytes_per_shape: float  # tracemalloc, sample: spec + built incremental state
    sample_nets: int
    held_commit: Timing  # commit of one run, per shape, with all the nets held
    held_ripup: Timing


def _random_net(deck: Deck, rng: random.Random, i: int, low: int, high: int) -> GeneratedNet:
    # Nets spread over a block, as in a design; each built fresh (no shared objects).
    return generate_net(deck, rng.randint(low, high), seed=7, name=f"m{i}",
                        origin=(rng.randrange(0, 2_000_000, 10), rng.randrange(0, 2_000_000, 10)))


def memory_bench(deck: Deck, nets: int, sample_nets: int, low: int = 20, high: int = 50,
                 budget_s: float = float("inf")) -> Memory:
    """Bytes per held shape with ``nets`` nets in one Engine (default Limits).

    Main figure: growth of the resident set (VmRSS, /proc/self/statm) while the nets
    are opened, per routed shape held; it includes allocator overhead. Breakdown:
    tracemalloc on a smaller sample, first with every net's state built (hot), then
    after dropping the states (reloading the same deck drops them), giving the bytes
    per shape of a cold net (its spec) and of a hot one (spec + incremental state).
    The build stops early when it has taken ``budget_s`` seconds (reported as such).
    """
    rng = random.Random(11)
    engine = Engine(deck)
    gc.collect()
    rss0 = _rss_bytes()
    shapes = 0
    t0 = time.perf_counter()
    held = 0
    for i in range(nets):
        net = _random_net(deck, rng, i, low, high)
        engine.open_net(net.name, net.pins, shapes=net.shapes)
        shapes += len(net.shapes)
        held += 1
        if i % 256 == 255 and time.perf_counter() - t0 > budget_s:
            break
    build = time.perf_counter() - t0
    del net
    gc.collect()
    rss_per_shape = (_rss_bytes() - rss0) / shapes
    hot = engine.stats()["hot_nets"]
    held_commit, held_ripup = _held_commit(deck, engine, rng)
    del engine
    gc.collect()

    rng = random.Random(12)
    sample = Engine(deck)
    sample_shapes = 0
    tracemalloc.start()
    try:
        base = tracemalloc.get_traced_memory()[0]
        for i in range(sample_nets):
            net = _random_net(deck, rng, i, low, high)
            sample.open_net(net.name, net.pins, shapes=net.shapes)
            sample_shapes += len(net.shapes)
        del net
        gc.collect()
        hot_bytes = tracemalloc.get_traced_memory()[0] - base
        sample.load_deck(deck)  # drops every built state; specs stay
        gc.collect()
        cold_bytes = tracemalloc.get_traced_memory()[0] - base
    finally:
        tracemalloc.stop()
    return Memory(nets, held, shapes, hot, rss_per_shape, build, cold_bytes / sample_shapes,
                  hot_bytes / sample_shapes, sample_nets, held_commit, held_ripup)


def _held_commit(deck: Deck, engine: Engine, rng: random.Random, nets: int = 20,
                 reps: int = 2_000) -> tuple[Timing, Timing]:
    """Commit then rip up one run on 50-shape nets of an engine that holds a whole
    design: shows whether a commit's cost depends on what the other nets hold."""
    opened = open_nets(engine, deck, 50, nets, seed="held")
    for net in opened:  # built state, as in commit_bench
        engine.check(net.name)
    work = [(net.name, c) for net in opened for c in extension_candidates(deck, net, 10, seed="held")]
    rng.shuffle(work)
    ns = time.perf_counter_ns
    commits, rips = [0] * reps, [0] * reps
    with _NoGc():
        for i in range(reps):
            name, cand = work[i % len(work)]
            t0 = ns()
            ids = engine.commit(name, cand)
            t1 = ns()
            engine.remove(name, ids)
            commits[i], rips[i] = t1 - t0, ns() - t1
    return timing(commits), timing(rips)


# -- profile --------------------------------------------------------------------------


def profile_score(deck: Deck, size: int = 50, calls: int = 20_000, top: int = 25) -> str:
    """cProfile of Engine.score on nets of ``size`` shapes, sorted by own time."""
    engine = Engine(deck)
    opened = open_nets(engine, deck, size, 20, seed=5)
    work = [(net.name, c) for net in opened for c in extension_candidates(deck, net, 20, seed=5)]
    for name, cand in work:
        engine.score(name, cand)
    profiler = cProfile.Profile()
    profiler.enable()
    for i in range(calls):
        name, cand = work[i % len(work)]
        engine.score(name, cand)
    profiler.disable()
    out = io.StringIO()
    stats = pstats.Stats(profiler, stream=out)
    stats.sort_stats("tottime").print_stats(top)
    stats.sort_stats("cumulative").print_stats(top)
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
    speedup_size: int = 100
    recompute_reps: int = 60
    brute_reps: int = 5
    memory_nets: int = 100_000
    memory_sample: int = 1_000
    memory_budget_s: float = 300.0
    sanity_checks: int = 3


QUICK = Settings(score_sizes=(10, 50, 100, 2_000), score_nets=3, big_nets=1, candidates=5, reps=300,
                 big_reps=100, warmup=50, commit_size=50, commit_reps=200, speedup_size=100,
                 recompute_reps=4, brute_reps=1, memory_nets=300, memory_sample=50, sanity_checks=2)


def _met(value: float, limit: float, higher_is_better: bool = False) -> bool:
    return value >= limit if higher_is_better else value <= limit


def run(settings: Settings, log: Callable[[str], None] = print) -> dict[str, object]:
    """Every engine measurement; returns the table as plain data."""
    deck = bench_deck()
    sanity = Sanity()
    rows: list[Row] = []
    overhead = timer_overhead_ns()
    score_p50: dict[int, float] = {}
    lean_p50: dict[int, float] = {}
    lean = "detail" in inspect.signature(Engine.score).parameters
    for size in settings.score_sizes:
        big = size >= 1_000
        target = SCORE_TARGET_US.get(size)
        for detail in ((None, False) if lean else (None,)):
            kind = "lean (detail=False)" if detail is False else "full"
            log(f"score ({kind}) on nets of {size} shapes ...")
            t = score_bench(deck, size, settings.big_nets if big else settings.score_nets,
                            settings.candidates * (4 if big else 1),
                            settings.big_reps if big else settings.reps,
                            settings.warmup // (10 if big else 1), 1 if big else settings.sanity_checks,
                            sanity, detail=detail)
            (score_p50 if detail is None else lean_p50)[size] = t.p50_us
            label = "" if detail is None else ", lean"
            rows.append(Row(f"score, 1 run{label}, net of {size} shapes", t.p50_us, "us", t.p99_us,
                            f"p50 <= {target:g} us" if target else "",
                            _met(t.p50_us, target) if target else None,
                            "" if detail is None else "Engine.score(..., detail=False): verdict, no change records",
                            calls=t.count))
    log(f"score of via + run (4 shapes) on nets of {settings.commit_size} shapes ...")
    t = score_bench(deck, settings.commit_size, settings.score_nets, settings.candidates, settings.reps // 2,
                    settings.warmup, settings.sanity_checks, sanity, make_candidates=via_run_candidates)
    rows.append(Row(f"score, via + run (4 shapes), net of {settings.commit_size}", t.p50_us, "us", t.p99_us,
                    note="no target", calls=t.count))
    log(f"commit and rip-up on nets of {settings.commit_size} shapes ...")
    c, r, s = commit_bench(deck, settings.commit_size, settings.score_nets, settings.commit_reps,
                           settings.warmup, settings.sanity_checks, sanity)
    rows.append(Row(f"commit, per shape, net of {settings.commit_size}", c.p50_us, "us", c.p99_us,
                    f"p50 <= {COMMIT_TARGET_US:g} us", _met(c.p50_us, COMMIT_TARGET_US), calls=c.count))
    rows.append(Row(f"rip-up, per shape, net of {settings.commit_size}", r.p50_us, "us", r.p99_us,
                    f"p50 <= {COMMIT_TARGET_US:g} us", _met(r.p50_us, COMMIT_TARGET_US), calls=r.count))
    rows.append(Row(f"first score after a commit, net of {settings.commit_size}", s.p50_us, "us", s.p99_us,
                    note="includes rebuilding the net's assessment; no target", calls=s.count))
    size = settings.speedup_size
    log(f"from-scratch recompute (shapely + networkx) on nets of {size} shapes ...")
    base = recompute_bench(deck, size, 10, settings.recompute_reps)
    engine_p50 = score_p50.get(size) or score_bench(deck, size, settings.score_nets, settings.candidates,
                                                    settings.reps, settings.warmup, 0, sanity).p50_us
    rows.append(Row(f"recompute from scratch, net of {size} + 1 run", base.p50_us / 1e3, "ms", base.p99_us / 1e3,
                    note="bench/recompute_reference.py (STRtree + vectorised shapely, networkx)", calls=base.count))
    ratio = base.p50_us / engine_p50
    rows.append(Row(f"speed-up of score over recompute, {size} shapes", ratio, "x", None,
                    f">= {SPEEDUP_TARGET:g}x", _met(ratio, SPEEDUP_TARGET, True),
                    "ratio of p50s, same run, full score" + (
                        f"; lean score: {base.p50_us / lean_p50[size]:.0f}x" if size in lean_p50 else "")))
    if (REPO / "tests" / "reference.py").exists() and settings.brute_reps:
        log("brute-force test reference (tests/reference.py) for comparison ...")
        brute = recompute_bench(deck, size, 2, settings.brute_reps, brute=True)
        rows.append(Row(f"speed-up over tests/reference.py, {size} shapes", brute.p50_us / engine_p50, "x", None,
                        note=f"brute-force pairwise reference of the tests; p50 {brute.p50_us / 1e3:.0f} ms; "
                             "for comparison only", calls=brute.count))
    log(f"memory: {settings.memory_nets} nets of 20-50 shapes in one engine ...")
    m = memory_bench(deck, settings.memory_nets, settings.memory_sample, budget_s=settings.memory_budget_s)
    complete = m.nets >= m.wanted_nets
    rows.append(Row(f"memory per held shape, {m.nets} nets held", m.rss_bytes_per_shape, "B", None,
                    f"<= {BYTES_PER_SHAPE_TARGET:g} B at {m.wanted_nets} nets",
                    _met(m.rss_bytes_per_shape, BYTES_PER_SHAPE_TARGET) if complete else None,
                    f"RSS growth / {m.shapes} shapes; {m.hot_nets} nets hot (default Limits)" + (
                        "" if complete else f"; build stopped at the {settings.memory_budget_s:g} s budget "
                        f"before {m.wanted_nets} nets: not a verdict")))
    rows.append(Row("  of which cold net (spec only)", m.cold_bytes_per_shape, "B", None,
                    note=f"tracemalloc, sample of {m.sample_nets} nets"))
    rows.append(Row("  hot net (spec + built state)", m.hot_bytes_per_shape, "B", None,
                    note=f"tracemalloc, sample of {m.sample_nets} nets"))
    rows.append(Row(f"commit, per shape, net of 50, {m.nets} nets held", m.held_commit.p50_us, "us",
                    m.held_commit.p99_us, note="same as the commit row, in the engine of the memory figure",
                    calls=m.held_commit.count))
    rows.append(Row(f"rip-up, per shape, net of 50, {m.nets} nets held", m.held_ripup.p50_us, "us",
                    m.held_ripup.p99_us, calls=m.held_ripup.count))
    rows.append(Row("open_net throughput (bulk load)", m.shapes / m.build_seconds, "shapes/s", None,
                    note=f"{m.build_seconds:.1f} s for {m.nets} nets, state built on open"))
    return {"machine": machine(), "engine_revision": engine_revision(), "timer_overhead_ns": overhead, "gc": "disabled inside timing loops",
            "deck": str(BENCH_DECK.relative_to(REPO)), "settings": asdict(settings),
            "sanity": {"compared": sanity.compared, "problems": sanity.problems},
            "rows": [asdict(r) for r in rows]}


def _fmt(value: float | None, unit: str) -> str:
    if value is None:
        return ""
    if unit in ("us", "ms"):
        return f"{value:.2f} {unit}" if value < 100 else f"{value:.0f} {unit}"
    if unit == "x":
        return f"{value:.0f}x"
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
           f"{m['python']}, load {m['load_average_1m']} (shared machine: noisy)",  # type: ignore[index]
           f"engine at {result['engine_revision']}; deck {result['deck']}; per-call perf_counter_ns (overhead {result['timer_overhead_ns']:.0f} ns "
           f"included); gc {result['gc']}",
           line(head), line(["-" * w for w in widths]), *(line(b) for b in body),
           f"sanity: {sanity['compared']} engine answers compared with the shapely + networkx "  # type: ignore[index]
           f"recompute, {len(sanity['problems'])} disagreements"]  # type: ignore[index]
    out += [f"  ! {p}" for p in sanity["problems"][:10]]  # type: ignore[index]
    out += [f"notes: {r['metric'].strip()}: {r['note']}" for r in rows if r["note"]]  # type: ignore[index]
    return "\n".join(out)


def main(argv: Sequence[str] = ()) -> int:
    parser = argparse.ArgumentParser(prog="python -m bench.engine_bench", description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="tiny sizes (seconds), for a smoke run")
    parser.add_argument("--memory-nets", type=int, help="nets held for the memory figure (default 100000)")
    parser.add_argument("--memory-budget", type=float, help="seconds the memory build may take (default 300)")
    parser.add_argument("--profile", action="store_true", help="print a cProfile of score on 50-shape nets and stop")
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
