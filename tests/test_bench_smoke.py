"""Keeps the engine bench working: a tiny run of every engine measurement (seconds).

Nothing here is about time. It checks the bench's own sanity: the generated nets are
what the generator promises (exact shape count, one connected tree, checked with
shapely + networkx), the engine's answers on the benchmarked nets equal the
shapely + networkx recomputation, and the table comes out whole.
"""

from __future__ import annotations

import json
import sys
from dataclasses import replace
from pathlib import Path

import networkx as nx
import pytest
import shapely

REPO = Path(__file__).resolve().parents[1]
if str(REPO) not in sys.path:
    sys.path.insert(0, str(REPO))

from bench import batch_bench, budget_bench, engine_bench, inprocess_bench  # noqa: E402
from bench.__main__ import discover  # noqa: E402
from bench.netgen import (bench_deck, default_gate_count, extension_candidates, generate_net,  # noqa: E402
                          via_run_candidates)
from bench.recompute_reference import disagreements, recompute  # noqa: E402
from etchguard import Engine  # noqa: E402

TINY = replace(engine_bench.QUICK, score_sizes=(10, 50, 300), reps=60, big_reps=30, warmup=10,
               commit_reps=40, big_commit_size=300, big_commit_reps=20, speedup_size=20, recompute_reps=2,
               brute_reps=1, memory_nets=60, memory_sample=20, spot_reps=50, unasked_nets=20, sanity_checks=2)


@pytest.fixture(scope="module")
def deck():
    return bench_deck()


@pytest.mark.parametrize("size", [1, 4, 5, 9, 10, 50, 100])
def test_generated_net_has_exact_size_and_is_one_tree(deck, size):
    net = generate_net(deck, size, seed=3, name=f"t{size}")
    assert len(net.shapes) == size
    gates = [p for p in net.pins if p.gate_area]
    assert len(gates) == default_gate_count(size)
    assert sum(1 for p in net.pins if p.diff_area > 0) == 1  # the driver
    # Independent connectivity (shapely contacts, networkx components) at the top
    # step: every shape and pin of a generated net hangs together.
    elements = [(s.layer, s.rect) for s in net.shapes] + [(p.layer, r) for p in net.pins for r in p.rects]
    graph = nx.Graph()
    graph.add_nodes_from(range(len(elements)))
    boxes = [shapely.box(*r) for _, r in elements]
    for i, (la, _) in enumerate(elements):
        for j in range(i + 1, len(elements)):
            lb = elements[j][0]
            inter = boxes[i].intersection(boxes[j])
            if la == lb and (inter.area > 0 or inter.length > 0):
                graph.add_edge(i, j)
            elif abs(la - lb) == 1 and inter.area > 0:  # M/V alternate on the bench deck
                graph.add_edge(i, j)
    pin_start = len(net.shapes)
    for p in net.pins:  # rectangles of one pin are one conductor
        for k in range(1, len(p.rects)):
            graph.add_edge(pin_start, pin_start + k)
        pin_start += len(p.rects)
    assert nx.number_connected_components(graph) == 1


def test_candidates_touch_the_net(deck):
    """An extension overlaps the run it continues (so it adds less than its own area)
    and reaches past it (so it adds some)."""
    net = generate_net(deck, 50, seed=4, name="c")
    engine = Engine(deck)
    engine.open_net(net.name, net.pins, shapes=net.shapes)
    for cand in extension_candidates(deck, net, 20):
        (shape,) = cand
        own = (shape.rect[2] - shape.rect[0]) * (shape.rect[3] - shape.rect[1]) / 1e6
        added = engine.score(net.name, cand).added_area_um2[deck.layers[shape.layer].name]
        assert 0 < added < own
    for cand in via_run_candidates(deck, net, 10):
        assert len(cand) == 4
        assert engine.score(net.name, cand).added_area_um2


def test_engine_check_equals_recompute_on_bench_nets(deck):
    engine = Engine(deck)
    for size in (10, 50, 100):
        for seed in range(3):
            net = generate_net(deck, size, seed=seed, name=f"e{size}_{seed}")
            engine.open_net(net.name, net.pins, shapes=net.shapes)
            assert disagreements(engine.check(net.name), recompute(deck, net.pins, net.shapes)) == []


def test_recompute_agrees_with_the_test_reference(deck):
    """The bench baseline and the tests' brute-force reference read the contract alike."""
    if not (REPO / "tests" / "reference.py").exists():
        pytest.skip("tests/reference.py is not in this tree")
    sys.path.insert(0, str(REPO / "tests"))
    try:
        import reference
    finally:
        sys.path.pop(0)
    ref_deck = reference.load_ref_deck(engine_bench.BENCH_DECK)
    for seed in range(3):
        net = generate_net(deck, 30, seed=seed, name=f"r{seed}")
        ours = recompute(deck, net.pins, net.shapes)
        theirs = reference.analyze(ref_deck, net.as_json(deck)).report
        assert {(c["layer"], c["measure"], c["kind"], c["oxide"]) for c in theirs["checks"]} == set(ours.checks)
        assert theirs["worst_utilization"] == pytest.approx(ours.worst_utilization, rel=1e-9)


def test_tiny_engine_bench_runs_and_agrees(deck):
    result = engine_bench.run(TINY, log=lambda _s: None)
    sanity = result["sanity"]
    assert sanity["problems"] == []
    assert sanity["compared"] >= 10
    rows = {r["metric"]: r for r in result["rows"]}
    targeted = ["what-if, 1 run, verdict only, net of 10 shapes", "what-if, 1 run, verdict only, net of 50 shapes",
                "what-if, 1 run, every changed ratio, net of 50 shapes",
                "what-if, via stack + run (4 shapes), verdict only, net of 50",
                "commit, per shape, net of 50", "rip-up, per shape, net of 50",
                "first what-if after a commit, net of 50", "speed-up of the what-if over recompute, 20 shapes",
                "  first / last net, p50"]
    for metric in targeted:
        assert metric in rows, sorted(rows)
        assert rows[metric]["value"] > 0
        assert rows[metric]["met"] in (True, False), metric
    for metric in ("what-if, 1 run, verdict only, net of 300 shapes", "rip-up, per shape, net of 300",
                   "what-if on the first net opened, 60 held", "what-if on the last net opened, 60 held",
                   "first what-if on a held net not asked since opened"):
        assert rows[metric]["value"] > 0, metric
        assert rows[metric]["met"] is None, metric  # no target at these sizes
    assert rows["first what-if on a held net not asked since opened"]["calls"] == TINY.unasked_nets
    # The incremental what-if beats recomputing the whole net, whatever the machine does.
    assert rows["speed-up of the what-if over recompute, 20 shapes"]["value"] > 1
    # Sixty nets fit in memory the process holds already: RSS may stay flat, and the
    # bench gives no verdict on it; the breakdown still sees what the nets hold.
    memory = rows["memory per held shape, 60 nets of 20 held"]
    assert memory["value"] >= 0 and memory["met"] is None
    assert rows["  of which the core's own estimate"]["value"] > 0
    assert rows["  of which Python objects"]["value"] > 0
    for r in result["rows"]:
        if r["p99"] is not None:
            assert r["p99"] >= r["value"]
    table = engine_bench.format_table(result)
    assert "cores" in table and "load" in table and "what-if, 1 run, verdict only, net of 50 shapes" in table
    json.dumps(result)  # the JSON copy is plain data


def test_memory_build_stops_at_the_machines_reserve(deck, monkeypatch):
    """A --memory-nets of 1,000,000 must not take the shared machine's last memory: the
    build stops when the available memory falls to the reserve, and says so."""
    monkeypatch.setattr(engine_bench, "memory_reserve_bytes", lambda: 1 << 62)  # never enough
    m = engine_bench.memory_bench(deck, nets=engine_bench.MEMORY_CHECK_EVERY + 10, shapes_per_net=4,
                                  sample_nets=2, spot_reps=5, unasked_nets=3)
    assert m.stopped_by == "memory"
    assert m.nets == engine_bench.MEMORY_CHECK_EVERY
    assert m.shapes == 4 * m.nets


def test_quick_batch_bench_agrees_and_reports_every_figure(capsys):
    assert batch_bench.main(["--quick"]) == 0  # non-zero when columns and scalar disagree
    out = capsys.readouterr().out
    for line in ("one-rectangle batches, median over nets:", "mixed 1-4 shape batches, median over nets:",
                 "two threads on two 50-shape nets vs one thread:"):
        assert line in out
    summary = json.loads((REPO / "bench" / "out" / "batch.json").read_text())["summary"]
    for key in ("one_rect_per_s", "mixed_per_s", "batch_one_per_s", "batch_two_per_s", "single_ratio"):
        assert summary[key] > 0, key
    # Two threads cannot use more than the two threads' worth of cores.
    assert 0 < summary["batch_two_cores"] <= 2.05 and 0 < summary["batch_one_cores"] <= 1.05


def test_quick_inprocess_bench_builds_runs_and_agrees_with_the_engine(capsys):
    """The C++ example on the bench nets: its verdicts equal the Python engine's (the
    bench exits non-zero otherwise) and its timing line is read for every net."""
    assert inprocess_bench.main(["--quick"]) == 0
    assert "C++ what-if p50, median over nets:" in capsys.readouterr().out
    rows = json.loads((REPO / "bench" / "out" / "inprocess.json").read_text())["rows"]
    assert len(rows) == len(inprocess_bench.SIZES)
    for r in rows:
        assert r["agree"] == 1.0
        assert 0 < r["cpp_p50_us"] <= r["cpp_p99_us"]
        assert r["cpp_batch_us"] > 0 and r["python_p50_us"] > 0


def test_quick_budget_bench_agrees_with_the_what_if(capsys):
    """Every covered candidate's local cost equals the in-process what-if's (the bench
    exits non-zero otherwise), in Python and, timed, in the C++ client."""
    assert budget_bench.main(["--quick"]) == 0
    out = capsys.readouterr().out
    assert "local cost != what-if cost: 0" in out
    for line in ("Python LocalBudget.evaluate", "in-process what-if (verdict)", "C++ LocalBudget::Evaluate"):
        assert line in out


def test_bench_runner_finds_the_engine_bench_first():
    names = discover()
    assert names[0] == "engine_bench"
    assert "netgen" in names  # helpers are listed; the runner skips those without main()
