"""The router demo (client_examples/router) in both modes on the small bundled block,
against a real ``etchguard serve`` on loopback.

What is checked, and against what outside the router's own bookkeeping:
* the aware mode prices only the sinks whose plain path would break a limit;
* every net is connected in both modes: all pins in one component at the top step, by
  the engine's net state built here from the router's final shapes (verify.py);
* the shapes the router believes it committed are the shapes the server holds: the
  server's report of each net equals an in-process engine's report of the router's
  shapes (same figures, so the table's counts are about what the service checked);
* antenna-blind routing leaves violations; antenna-aware routing, and blind routing
  followed by the repair from advice, leave none;
* the service figures the table shows are the router's count of its requests, and the
  server's own counters over the same routing agree with them;
* the comparison figures are measured: wirelength and vias recounted here from the
  shapes, and the two modes' runs differ where the modes differ.
"""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

from etchguard import Engine, load_deck, make_pin, make_shape
from grpc_fixtures import DEMO_DECK, start_server

ROUTER = Path(__file__).resolve().parents[1] / "client_examples" / "router"
sys.path.insert(0, str(ROUTER))

from maze import Costs  # noqa: E402
from route import Router, load_block  # noqa: E402
from verify import connected_nets  # noqa: E402

SMALL = ROUTER / "data" / "blk_r_small.json"


@pytest.fixture(scope="module")
def runs():
    server = start_server(metrics=False)
    out = {}
    try:
        block = load_block(SMALL)
        # "repair": aware, but the search scores nothing: only the advice repairs
        # "tight": aware, every sink's search priced (not screened) with a budget too
        # small for most sinks, so the fallback (searched again without scores, then
        # the advice repair) is at work
        # "fixed": blind routing, then the repair from advice after routing
        tight = Costs(scored_per_node=0.0, scored_floor=3000)
        for mode, aware, scores, costs, after, screen in (
                (False, False, False, Costs(), False, True), (True, True, True, Costs(), False, True),
                ("repair", True, False, Costs(), False, True), ("tight", True, True, tight, False, False),
                ("fixed", False, False, Costs(), True, True)):
            with server.client(timeout=120.0) as client:
                before = client.stats()
                router = Router(client, block, aware, costs=costs, search_scores=scores, repair_after=after,
                                screen=screen)
                router.route_all()
                served = client.stats()  # the server's own counters over this mode's routing
                stats = router.finish(DEMO_DECK)
                reports = {rep.net: rep for rep in client.check_all()}
                out[mode] = (router, stats, reports, (before, served))
                router.close()  # the next mode's advice must not see these nets as obstacles
    finally:
        server.stop()
    return out


def _engine_reports(router: Router) -> dict:
    deck = load_deck(DEMO_DECK)
    engine = Engine(deck)
    out = {}
    for route in router.nets.values():
        name = router.service_name(route.data.name)
        pins = [make_pin(deck, p.name, p.layer, p.rects, p.gate_area, p.diff_area, p.cell_area)
                for p in route.pins]
        engine.open_net(name, pins, shapes=[make_shape(deck, s.layer, s.rect) for s in route.shapes])
        out[name] = engine.check(name)
    return out


@pytest.mark.parametrize("aware", [False, True, "repair", "tight", "fixed"])
def test_every_net_connected(runs, aware):
    router, stats, _, _ = runs[aware]
    names = {n.name for n in router.block.nets}
    assert connected_nets(DEMO_DECK, router.nets.values()) == names
    assert stats.routed == len(names) == stats.nets


@pytest.mark.parametrize("aware", [False, True, "repair", "tight", "fixed"])
def test_server_holds_what_the_router_committed(runs, aware):
    router, _, served, _ = runs[aware]
    local = _engine_reports(router)
    mine = {k: v for k, v in served.items() if k in local}
    assert set(mine) == set(local)
    for name, rep in local.items():
        assert mine[name].legal == rep.legal, name
        assert mine[name].worst_utilization == pytest.approx(rep.worst_utilization, rel=1e-12), name


def test_blind_leaves_violations_aware_and_repaired_none(runs):
    _, blind, blind_reports, _ = runs[False]
    _, aware, aware_reports, _ = runs[True]
    _, fixed, fixed_reports, _ = runs["fixed"]
    blind_bad = [n for n, r in blind_reports.items() if n.startswith("blind:") and not r.legal]
    aware_bad = [n for n, r in aware_reports.items() if n.startswith("aware:") and not r.legal]
    fixed_bad = [n for n, r in fixed_reports.items() if n.startswith("fixed:") and not r.legal]
    assert blind.violations == len(blind_bad) > 0
    assert aware.violations == len(aware_bad) == 0
    assert fixed.violations == len(fixed_bad) == 0
    assert fixed.repairs >= 1 and blind.repairs == 0  # the repair after routing did the work
    # only the aware mode priced candidates while searching
    assert aware.scored > 0 and blind.scored == 0 and fixed.scored == 0
    assert not aware.unrepaired and not fixed.unrepaired  # notes only about nets still illegal


@pytest.mark.parametrize("aware", [False, True, "fixed"])
def test_call_counts_agree_with_the_server(runs, aware):
    """The table's service figures are the router's own count of its requests; the
    server's counters over the same routing agree with them: shapes committed, and
    candidates scored (ScoreBatch candidates, single scores, commits only if legal,
    budgets, advice)."""
    router, stats, _, (before, served) = runs[aware]
    m = stats.meter
    scored = (sum(m.batch_sizes) + m.requests.get("score", 0) + m.requests.get("commit_if_legal", 0)
              + m.budgets + m.requests.get("advise", 0))
    assert served.scores - before.scores == scored
    assert served.commits - before.commits >= sum(len(r.shapes) for r in router.nets.values())
    assert m.calls == sum(m.requests.values()) > 0
    assert m.seconds > 0 and len(m.batch_sizes) == m.requests.get("score_batch", 0)


def test_table_shows_the_runs(runs):
    """demo.table prints each run's own figures (one row per mode)."""
    import demo

    rows = [runs[mode][1] for mode in (False, True, "fixed")]
    text = demo.table(rows)
    lines = text.splitlines()
    assert len(lines) == 2 + len(rows)
    for s, line in zip(rows, lines[2:]):
        assert line.startswith(s.mode)
        cells = line[len(s.mode):].split()
        assert cells[0] == f"{s.routed}/{s.nets}" and cells[3] == str(s.violations)
        assert cells[4] == str(s.repairs) and cells[8] == str(s.meter.calls)


@pytest.mark.parametrize("aware", [False, True, "repair", "fixed"])
def test_figures_are_recounted_from_shapes(runs, aware):
    router, stats, _, _ = runs[aware]
    cuts = {"V1", "V2", "V3", "V4", "V5"}
    vias = sum(1 for r in router.nets.values() for s in r.shapes if s.layer in cuts)
    assert stats.vias == vias > 0
    # centre-line length of every run: the long side less the short side (a run is
    # extended half its width past each end), in um
    length = sum(max(s.rect[2] - s.rect[0], s.rect[3] - s.rect[1])
                 - min(s.rect[2] - s.rect[0], s.rect[3] - s.rect[1])
                 for r in router.nets.values() for s in r.shapes if s.run_um > 0) / 1000.0
    assert stats.wirelength_um == pytest.approx(length)
    assert stats.seconds > 0 and stats.cpu_seconds > 0


def test_screened_aware_mode_prices_only_paths_that_break_a_limit(runs):
    """The aware mode searches each sink without prices, scores the path whole, and
    searches again with prices only the sinks whose path would break a limit: on this
    block (where blind routing leaves violations) some but not all sinks; every path
    committed was scored: one commit only if legal per screened sink (scored and, when
    legal, committed in one call), then one Score per path found by a priced search."""
    router, aware, _, _ = runs[True]
    sinks = sum(len(n.sinks) for n in router.block.nets)
    assert aware.sinks_screened >= sinks  # rip-ups route some sinks again
    assert 0 < aware.sinks_repriced < aware.sinks_screened
    m = aware.meter
    assert m.requests.get("commit_if_legal", 0) == aware.sinks_screened
    found = sum(1 for r in aware.repriced if r[-1] == "found")
    assert m.requests.get("score", 0) >= found
    # the not-screened run priced every sink's search, so it priced far more candidates
    _, tight, _, _ = runs["tight"]
    assert tight.sinks_screened == 0 and tight.scored > aware.scored


def test_advice_repairs_what_the_search_did_not_avoid(runs):
    """Without scores in the search the paths are the blind ones; every path that would
    break a limit is repaired from the service's advice before it is committed."""
    _, blind, _, _ = runs[False]
    _, repair, reports, _ = runs["repair"]
    used = repair.hops + repair.jumpers + repair.diodes
    assert repair.scored == 0
    assert used >= 1
    assert repair.violations < blind.violations
    assert repair.violations == sum(1 for n, r in reports.items()
                                    if n.startswith("repair:") and not r.legal)


def test_scored_search_out_of_budget_falls_back(runs):
    """A sink whose scored search runs out of its budget is searched again without
    scores and still routed (the net is connected: test_every_net_connected); the
    count is the router's, and the violations left are the service's."""
    _, normal, _, _ = runs[True]
    router, tight, reports, _ = runs["tight"]
    assert tight.plain_searches > normal.plain_searches
    assert tight.scored > 0
    assert tight.violations == sum(1 for n, r in reports.items()
                                   if n.startswith("aware:") and not r.legal)


class _EveryPathBreaksALimit:
    """A pricer whose every candidate is over a limit (the service's cost >= 1e6)."""

    def gate_side(self, asks):
        return [(1.0e6, 2.0) for _ in asks]

    def joins(self, asks):
        return [1.0e6 for _ in asks]

    def prefetch(self, before, k, run):
        pass

    def flush(self):
        pass


def test_priced_search_within_a_detour_drops_paths_over_a_limit(runs):
    """maze.search on an empty grid of the small block, M2 (vertical) from (5, 5) to
    (5, 60): the plain path is found; a detour bound (``within``) below the plain
    path's cost finds none (every node within it expanded, not out of budget), one
    above it finds one; a path that pays the antenna cap (every candidate
    over a limit) is taken without a bound and dropped with one, so the caller keeps
    its plain path for the repair."""
    from grid import Occupancy
    from maze import search

    router = runs[True][0]
    grid = router.grid
    occ = Occupancy(grid)
    source, target = {grid.node(1, 5, 5)}, {grid.node(1, 5, 60)}
    plain = search(grid, occ, "t", source, target, Costs())
    assert plain.found and plain.cost > 0
    below = search(grid, occ, "t", source, target, Costs(), within=plain.cost - 1.0)
    assert not below.found and not below.out_of_budget
    assert search(grid, occ, "t", source, target, Costs(), within=plain.cost + 1.0).found
    costs = Costs(min_scored_um=0.0, antenna_cap=10.0)  # a small cap: the search floods less
    capped = search(grid, occ, "t", source, target, costs, _EveryPathBreaksALimit())
    assert capped.found and capped.cost > costs.antenna_cap  # it pays the cap
    dropped = search(grid, occ, "t", source, target, costs, _EveryPathBreaksALimit(),
                     within=plain.cost + 100.0)
    assert not dropped.found and not dropped.out_of_budget
