"""Every call of etchguard.v1 against a real server on loopback, answers checked
against the in-process engine on the same net (the service adds no numbers)."""

from __future__ import annotations

import math
import urllib.request

import grpc
import numpy as np
import pytest
from google.protobuf import descriptor_pool
from grpc_reflection.v1alpha.proto_reflection_descriptor_database import \
    ProtoReflectionDescriptorDatabase

import etchguard as eg
from etchguard.client import BatchScores, LocalBudget, ServiceError, budget_request, pb, pin, rect, run, runs_to_rects
from etchguard.server import convert
from grpc_fixtures import DEMO_DECK, DRIVER, GATE, candidate, net_name, open_small_net, trunk


@pytest.fixture(scope="module")
def engine_twin():
    """An in-process engine holding the same small net, to hold the server to."""
    deck = eg.load_deck(DEMO_DECK)
    engine = eg.Engine(deck)
    engine.open_net("twin", convert.pins(deck, [GATE, DRIVER]))
    return deck, engine


def _twin_shapes(deck, shapes):
    return convert.shapes(deck, shapes, "shapes")


def test_deck_calls(client):
    info = client.deck
    assert info.name == "lumen-6m" and info.dbu_per_micron == 1000
    assert [l.name for l in info.layers][:3] == ["M1", "V1", "M2"]
    assert info.layers[0].kind == pb.LAYER_KIND_ROUTING and info.layers[1].kind == pb.LAYER_KIND_CUT
    assert info.layers[0].direction == pb.DIRECTION_HORIZONTAL and info.layers[0].wire_width == 140
    assert "thin" in info.oxides and info.rule_count > 0
    again = client.load_deck(DEMO_DECK)  # replace with the same deck: nets carried over
    assert again == info


def test_open_commit_remove_close(client):
    name = net_name()
    assert client.open_net(name, [GATE, DRIVER], shapes=[rect("M1", 0, 30, 1000, 170)],
                           layer_range=("M1", "M4")) == [1]
    ids = client.commit(name, trunk(client.deck))
    assert ids == [2, 3, 4, 5]
    assert client.remove(name, [1, 3]) == 2
    report = client.check(name)
    assert report.net == name and report.checks
    client.close_net(name)
    with pytest.raises(ServiceError) as err:
        client.check(name)
    assert err.value.code == grpc.StatusCode.NOT_FOUND


def test_commit_if_legal(client):
    """Commit with only_if_legal: the verdict is the Score of the same shapes on the net
    as it was; a legal one is committed (the net then holds it), an illegal one leaves
    the net as it was. Bad input is refused naming the field and changes nothing."""
    name, held = open_small_net(client)
    short, long = candidate(9000), candidate(200_000)
    want_long = client.score(name, long)
    assert not want_long.legal  # the long M2 riser breaks M2's side-wall rule (see test_score...)
    before = client.check(name)
    verdict, ids = client.commit_if_legal(name, long)
    assert verdict == want_long and ids == []
    assert client.check(name) == before and [s.id for s in client.get_net(name).shapes] == held
    want_short = client.score(name, short)
    assert want_short.legal
    with client.session() as s:
        verdict, ids = s.commit_if_legal(name, short)
    assert verdict == want_short and ids == [held[-1] + 1]
    assert client.check(name) != before and [s.id for s in client.get_net(name).shapes] == held + ids
    for bad, field in (([], "shapes"), ([run("M9", 0, 0, 1000, 0)], "shapes[0].layer")):
        with pytest.raises(ServiceError) as err:
            client.commit_if_legal(name, bad)
        assert err.value.code == grpc.StatusCode.INVALID_ARGUMENT and err.value.field == field
    assert [s.id for s in client.get_net(name).shapes] == held + ids


def test_score_equals_engine(client, engine_twin):
    deck, engine = engine_twin
    name, _ = open_small_net(client)
    twin_ids = engine.commit("twin", _twin_shapes(deck, trunk(client.deck)))
    try:
        for length in (1000, 9000, 150_000):
            cand = candidate(length)
            reply = client.score(name, cand)
            expected = pb.ScoreReply()
            convert.score_into(expected, engine.score("twin", _twin_shapes(deck, cand)))
            assert reply == expected
            assert reply.changes and reply.added_area[0].layer == "M2"
            lean = client.score(name, cand, without_changes=True)
            assert not lean.changes
            assert (lean.cost, lean.legal, lean.worst_utilization) == (reply.cost, reply.legal,
                                                                       reply.worst_utilization)
        assert client.score(name, candidate(150_000)).breaks_limit  # a long M2 run on a small gate
    finally:
        engine.remove("twin", twin_ids)


def test_score_batch_columnar(client):
    name, _ = open_small_net(client)
    lengths = np.arange(1000, 1000 + 64 * 3000, 3000)
    rects = runs_to_rects(4900, 100, 4900, 100 + lengths, 140)
    batch = client.score_batch(name, rects, "M2")
    assert isinstance(batch, BatchScores) and len(batch) == 64 and not batch.details
    for i in (0, 17, 63):
        one = client.score(name, [rect("M2", *map(int, rects[i]))])
        assert batch.cost[i] == one.cost and batch.legal[i] == one.legal
        assert batch.worst_utilization[i] == one.worst_utilization
        assert batch.added_area_um2[i] == pytest.approx(sum(a.area_um2 for a in one.added_area))
    assert batch.breaks_limit[-1] and not batch.breaks_limit[0]
    # two-shape candidates, mixed layers, with details
    pair = np.array([[4830, 30, 4970, 5000], [0, 4860, 5000, 5000],
                     [4830, 30, 4970, 8000], [0, 7860, 5000, 8000]])
    detailed = client.score_batch(name, pair, ["M2", "M3", "M2", "M3"], counts=[2, 2], details=True)
    assert len(detailed) == 2 and len(detailed.details) == 2
    assert detailed.details[1] == client.score(name, [rect("M2", 4830, 30, 4970, 8000),
                                                     rect("M3", 0, 7860, 5000, 8000)])


def test_score_batch_shared_parts(client):
    """Candidates that start with a shared part sent once get the answers of the same
    candidates sent whole, columns and details alike; a bad part is refused by field."""
    name, _ = open_small_net(client)
    path = runs_to_rects(4900, 100, 4900, 6100, 140)  # an M2 riser from the via
    lengths = np.arange(1000, 1000 + 40 * 2500, 2500)
    ends = runs_to_rects(4900, 6100, 4900 + lengths, 6100, 140)  # M3 runs from its end
    stack = np.array([[4830, 6030, 4970, 6170]])  # a cut on V2 at the riser's end
    own = np.vstack([stack, ends])
    layers = ["V2"] + ["M3"] * len(ends)
    counts = [1] * len(own)
    part = [-1] + [0] * 20 + [1] * (len(ends) - 20)
    common = [(path, "M2"), (np.vstack([path, stack]), ["M2", "V2"])]
    shared = client.score_batch(name, own, layers, counts, common=common, common_part=part)
    whole_rows, whole_layers, whole_counts = [], [], []
    for i, k in enumerate(part):
        rows = [] if k < 0 else list(common[k][0])
        names = [] if k < 0 else ([common[k][1]] * len(common[k][0]) if isinstance(common[k][1], str)
                                  else list(common[k][1]))
        whole_rows += rows + [own[i]]
        whole_layers += names + [layers[i]]
        whole_counts.append(len(rows) + 1)
    whole = client.score_batch(name, np.array(whole_rows), whole_layers, whole_counts)
    for column in ("cost", "worst_change_utilization", "worst_utilization", "legal", "breaks_limit",
                   "added_area_um2"):
        assert np.array_equal(getattr(shared, column), getattr(whole, column)), column
    assert shared.breaks_limit.any() and not shared.breaks_limit.all()
    detailed = client.score_batch(name, own[:3], layers[:3], details=True, common=common[:1],
                                  common_part=[-1, 0, 0])
    for i in range(3):
        shapes = ([rect("M2", *map(int, path[0]))] if i else []) + [rect(layers[i], *map(int, own[i]))]
        assert detailed.details[i] == client.score(name, shapes)
    with pytest.raises(ServiceError) as err:
        client.score_batch(name, own[:2], layers[:2], common=common, common_part=[0, 2])
    assert err.value.code == grpc.StatusCode.INVALID_ARGUMENT
    assert err.value.field == "candidates.common_part[1]"
    bad = np.array([[0, 0, 100, 100], [7, 0, 7, 50]])
    with pytest.raises(ServiceError) as err:
        client.score_batch(name, own[:2], layers[:2], common=[(bad, "M2")])
    assert err.value.field == "candidates.common[1].rect"


def test_budget_evaluated_locally_equals_score(client):
    """A Budget over the wire (unary and in a session), evaluated by the client's
    LocalBudget, gives the server's own score of common + extension (1e-9 relative,
    the contract's tolerance); it declines a via and a jump to another layer; a bad
    request is refused naming the field."""
    name, _ = open_small_net(client)
    common = [rect("M2", 4830, 30, 4970, 6100)]  # a riser from the via, not committed
    reply = client.budget(name, "M2", 4900, 3000, common)
    with client.session() as s:
        assert s.budget(name, "M2", 4900, 3000, common) == reply
    assert reply.found and reply.ratios and reply.own
    local = LocalBudget(reply)
    for length in (1000, 20_000, 90_000, 300_000):
        ext = ("M2", (4830, 6100, 4970, 6100 + length))
        got = local.evaluate([ext])
        want = client.score(name, common + [rect(*ext[:1], *ext[1])], without_changes=True)
        for a, b in ((got.worst_change_utilization, want.worst_change_utilization),
                     (got.worst_utilization, want.worst_utilization), (got.cost, want.cost),
                     (got.added_area_um2, sum(a.area_um2 for a in want.added_area))):
            assert math.isclose(a, b, rel_tol=1e-9), (length, a, b)
        assert (got.legal, got.breaks_limit) == (want.legal, want.breaks_limit)
    assert local.evaluate([("M3", (4830, 6000, 9000, 6140))]) is None
    assert local.evaluate([("M2", (4830, 6000, 4970, 6140)), ("V2", (4830, 6030, 4970, 6100))]) is None
    assert not client.budget(name, "M3", 4900, 3000).found  # nothing of the net there
    # several in one message, each as the single call answers it; a refusal names which
    asks = [budget_request(name, "M2", 4900, 3000, common), budget_request(name, "M1", 100, 100)]
    assert client.budgets(asks) == [reply, client.budget(name, "M1", 100, 100)]
    with pytest.raises(ServiceError) as err:
        client.budgets([asks[0], budget_request(name, "M9", 0, 0)])
    assert err.value.field == "requests[1].layer"
    with pytest.raises(ServiceError) as err:
        client.budget(name, "M9", 0, 0)
    assert err.value.field == "layer"
    with pytest.raises(ServiceError) as err:
        client.budget(name, "M2", 0, 0, [rect("M2", 5, 0, 5, 9)])
    assert err.value.field == "common[0].rect"


def test_headroom(client):
    name, _ = open_small_net(client)
    h = client.headroom(name, "M1", 100, 100)
    assert h.found and h.layer == "M1" and 0 < h.area_um2 < math.inf and h.binding
    nothing = client.headroom(name, "M5", 100, 100)
    assert not nothing.found and nothing.area_um2 == math.inf


def test_check_all_streams_every_net(client):
    bad = net_name("bad")
    client.open_net(bad, [pin("g", "M1", [(0, 0, 100, 100)], gate_area=0.01)])
    client.commit(bad, [run("M1", 0, 50, 200_000, 50)])  # 28 um^2 of M1 on 0.01 um^2 of gate
    good, _ = open_small_net(client)
    reports = {r.net: r for r in client.check_all()}
    assert {bad, good} <= set(reports)
    assert not reports[bad].legal and reports[good].legal
    assert reports[bad] == client.check(bad)
    only = [r.net for r in client.check_all(violations_only=True)]
    assert bad in only and good not in only


def test_stats(client):
    before = client.stats()
    name, ids = open_small_net(client)
    client.score(name, candidate())
    after = client.stats()
    assert after.nets == before.nets + 1
    assert after.shapes == before.shapes + len(ids)
    assert after.scores == before.scores + 1 and after.commits >= before.commits + len(ids)
    assert after.deck == "lumen-6m" and after.version == eg.__version__ and after.uptime_s > 0


def test_health_and_reflection(server, client):
    assert client.health() == "SERVING"
    assert client.health("etchguard.v1.AntennaService") == "SERVING"
    with pytest.raises(ServiceError) as err:
        client.health("no.such.Service")
    assert err.value.code == grpc.StatusCode.NOT_FOUND
    db = ProtoReflectionDescriptorDatabase(client.channel)
    services = set(db.get_services())
    assert {"etchguard.v1.AntennaService", "grpc.health.v1.Health"} <= services
    svc = descriptor_pool.DescriptorPool(db).FindServiceByName("etchguard.v1.AntennaService")
    assert {"Score", "ScoreBatch", "Session", "CheckAll", "OpenNet"} <= {m.name for m in svc.methods}


def _scrape(port: int) -> str:
    with urllib.request.urlopen(f"http://127.0.0.1:{port}/metrics", timeout=10) as response:
        return response.read().decode()


def _sample(text: str, name: str, **labels: str) -> float:
    for line in text.splitlines():
        if not line.startswith(name):
            continue
        head, _, value = line.rpartition(" ")
        if head.split("{")[0] == name and all(f'{k}="{v}"' in head for k, v in labels.items()):
            return float(value)
    raise AssertionError(f"no sample {name} {labels} in the metrics")


def test_metrics_endpoint(server, client):
    name, _ = open_small_net(client)
    before = _scrape(server.metrics_port)
    for _ in range(3):
        client.score(name, candidate())
    with pytest.raises(ServiceError):
        client.score("no-such-net", candidate())
    bad = net_name("bad")
    client.open_net(bad, [pin("g", "M1", [(0, 0, 100, 100)], gate_area=0.01)])
    client.commit(bad, [run("M1", 0, 50, 200_000, 50)])
    client.check(bad)
    with client.session() as s:
        s.score(name, candidate())
    text = _scrape(server.metrics_port)
    assert (_sample(text, "etchguard_calls_total", method="Score", code="OK")
            == _sample(before, "etchguard_calls_total", method="Score", code="OK") + 3)
    assert _sample(text, "etchguard_calls_total", method="Score", code="NOT_FOUND") >= 1
    assert _sample(text, "etchguard_calls_total", method="Session/score", code="OK") >= 1
    assert _sample(text, "etchguard_call_seconds_count", method="Score") >= 4
    assert _sample(text, "etchguard_call_seconds_bucket", method="Score", le="+Inf") >= 4
    stats = client.stats()
    assert _sample(text, "etchguard_nets_held") == stats.nets
    assert _sample(text, "etchguard_shapes_held") == stats.shapes
    assert _sample(text, "etchguard_violations_seen_total") >= 1
    assert _sample(text, "etchguard_scores_total") >= 4


