"""Budget bench: a candidate priced from a budget where the router is, against a what-if.

A router prices a gate-side run from the budget of the path's component (one Budget
call, then ``LocalBudget.evaluate`` per candidate, no call). This bench measures what
that costs, on generated nets (``bench.netgen``, 10 / 50 / 100 shapes, the bench deck):
budgets at the far end of random wires with a run beyond it as the common part, and
run extensions of 0.2-4 um along it, as tests/test_budget.py draws them.

* **Python**: ``LocalBudget.evaluate`` per covered candidate; beside it the in-process
  what-if of the same common part + candidate (``Engine.score``, verdict only, the
  fastest call the service has) and the budget itself (``Engine.budget`` and its
  BudgetReply, as the server builds it);
* **C++**: the C++ client's ``LocalBudget::Evaluate`` on the same candidates, timed in
  ``etchguard_budget_check`` (client_examples/cpp, built in build/cpp-example and reused)
  against a real ``etchguard serve`` holding the same nets.

Every covered candidate's local cost must equal the what-if's to 1e-9 relative (the
contract's tolerance): the count of disagreements is printed and makes the bench fail.
The issue that asked for local budgets wanted them evaluated in nanoseconds; no target
is checked here, the figures are reported.

    python -m bench.budget_bench [--quick]
"""

from __future__ import annotations

import argparse
import math
import random
import statistics
import subprocess
import time
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import etchguard as eg
from etchguard.client import Client, LocalBudget, pb
from etchguard.server import convert

from .cpp_bench import _pb_pins, _pb_shapes
from .native import cmake_build
from .netgen import BENCH_DECK, bench_deck, generate_net
from .rounds import start_ours, stop_process

REPO = Path(__file__).resolve().parents[1]
CPP_SOURCE = REPO / "client_examples" / "cpp"
CPP_BUILD = REPO / "build" / "cpp-example"
BUDGET_CHECK = CPP_BUILD / "etchguard_budget_check"
SIZES = (10, 50, 100)
STEPS = (200, 600, 1500, 4000)  # DBU of run added beyond the common run
REL = 1e-9


@dataclass
class Case:
    net: str
    layer: int
    point: tuple[int, int]
    common: list[eg.Shape]
    extension: eg.Shape


def cases(deck: eg.Deck, engine: eg.Engine, budgets_per_net: int, seed: int) -> list[Case]:
    """Per net size, budgets at the far end of random wires (a 2 um run beyond it as the
    common part) and run extensions along it."""
    out = []
    for size in SIZES:
        net = generate_net(deck, size, seed=seed + size, name=f"b{size}")
        engine.open_net(net.name, net.pins, None, net.shapes)
        rng = random.Random(seed + size)
        for _ in range(budgets_per_net):
            run = rng.choice(net.runs)
            along_x = run.y1 == run.y2
            sign = rng.choice((-1, 1))
            (shape,) = eg.run_shapes(deck, run.layer, run.x2, run.y2, run.x2 + (sign * 2000 if along_x else 0),
                                     run.y2 + (0 if along_x else sign * 2000))
            r = shape.rect
            for step in STEPS:
                ext = (r[2], r[1], r[2] + step, r[3]) if r[2] - r[0] > r[3] - r[1] else (r[0], r[3], r[2], r[3] + step)
                out.append(Case(net.name, shape.layer, (r[0], r[1]), [shape], eg.Shape(shape.layer, ext)))
    return out


def per_call_ns(fn, reps: int) -> float:
    """Median of 7 samples of ``reps`` calls each, per call."""
    samples = []
    for _ in range(7):
        t0 = time.perf_counter_ns()
        for _ in range(reps):
            fn()
        samples.append((time.perf_counter_ns() - t0) / reps)
    return statistics.median(samples)


def python_side(deck: eg.Deck, engine: eg.Engine, work: Sequence[Case], reps: int) -> dict[str, object]:
    names = [layer.name for layer in deck.layers]
    local_ns, score_ns, budget_ns = [], [], []
    covered = disagree = 0
    for case in work:
        def ask_budget(case=case):
            reply = pb.BudgetReply()
            convert.budget_into(reply, engine.budget(case.net, case.layer, *case.point, case.common), deck)
            return reply
        budget = LocalBudget(ask_budget())
        shapes = [(names[case.extension.layer], case.extension.rect)]
        local = budget.evaluate(shapes)
        if local is None:
            continue
        covered += 1
        whole = case.common + [case.extension]
        want = engine.score(case.net, whole, detail=False)
        if not (local.cost == want.cost or math.isclose(local.cost, want.cost, rel_tol=REL, abs_tol=1e-12)):
            disagree += 1
        local_ns.append(per_call_ns(lambda: budget.evaluate(shapes), reps))
        score_ns.append(per_call_ns(lambda: engine.score(case.net, whole, detail=False), reps))
        budget_ns.append(per_call_ns(ask_budget, max(1, reps // 20)))
    return {"cases": len(work), "covered": covered, "disagree": disagree,
            "local_us": statistics.median(local_ns) / 1e3, "score_us": statistics.median(score_ns) / 1e3,
            "budget_us": statistics.median(budget_ns) / 1e3}


def cpp_side(deck: eg.Deck, engine: eg.Engine, work: Sequence[Case], reps: int) -> dict[str, object]:
    """The same candidates through etchguard_budget_check against a real server."""
    built_s = cmake_build(CPP_SOURCE, CPP_BUILD)
    names = [layer.name for layer in deck.layers]
    lines = []
    for case in work:
        lines.append(f"budget {case.net} {names[case.layer]} {case.point[0]} {case.point[1]}")
        lines += [f"common {names[s.layer]} {' '.join(map(str, s.rect))}" for s in case.common]
        lines.append(f"cand {names[case.extension.layer]} {' '.join(map(str, case.extension.rect))}")
        lines.append(f"repeat {reps}")
    proc, ready = start_ours(["--rules", str(BENCH_DECK), "--listen", "127.0.0.1:0"])
    try:
        address = ready["addresses"][0]
        with Client(address, timeout=60) as setup:
            for net in engine.net_names():
                held = engine.spec(net)
                setup.open_net(net, _pb_pins(names, held.pins), _pb_shapes(names, held.shapes))
        done = subprocess.run([str(BUDGET_CHECK), address], input="\n".join(lines) + "\n",
                              capture_output=True, text=True, timeout=600)
    finally:
        stop_process(proc)
    if done.returncode != 0:
        raise RuntimeError(f"etchguard_budget_check failed: {done.stderr[-2000:]}")
    out = done.stdout.split("\n")
    timed = [float(line.split()[1]) for prev, line in zip(out, out[1:])
             if prev.startswith("covered") and line.startswith("timed")]
    return {"covered": len(timed), "evaluate_ns": statistics.median(timed) if timed else math.nan,
            "build_s": built_s}


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer budgets and repetitions")
    args = parser.parse_args(argv)
    budgets, reps = (3, 200) if args.quick else (12, 2000)
    deck = bench_deck()
    engine = eg.Engine(deck)
    work = cases(deck, engine, budgets, seed=11)
    py = python_side(deck, engine, work, reps)
    try:
        cpp: dict[str, object] = cpp_side(deck, engine, work, reps * 10)
    except (RuntimeError, OSError, subprocess.SubprocessError) as exc:
        cpp = {"error": str(exc).splitlines()[0]}
    print(f"{py['cases']} candidates on nets of {'/'.join(map(str, SIZES))} shapes, {py['covered']} covered "
          f"by their budget; local cost != what-if cost: {py['disagree']}")
    print(f"  Python LocalBudget.evaluate      p50 {py['local_us']:.2f} us per candidate")
    print(f"  in-process what-if (verdict)     p50 {py['score_us']:.2f} us per candidate "
          f"(common + candidate, Engine.score)")
    print(f"  a budget (Engine.budget + reply) p50 {py['budget_us']:.1f} us")
    if "error" in cpp:
        print(f"  C++ LocalBudget: not measured ({cpp['error']})")
    else:
        print(f"  C++ LocalBudget::Evaluate        p50 {cpp['evaluate_ns']:.0f} ns per candidate "
              f"({cpp['covered']} covered; client built in {cpp['build_s']:.0f} s)")
    return 1 if py["disagree"] else 0


if __name__ == "__main__":
    raise SystemExit(main())
