"""A farm of shards on loopback answers as one server does; it refuses what it must.

Real processes: ``etchguard serve --shards 3`` (a supervisor and three shards) and a
plain ``etchguard serve``, both on the demo deck, given the same crowded nets (whose
metal interleaves, so advice for one net meets other nets' metal on other shards).
The reference for every figure is the single server: checks, scores, batch scores,
headroom and advice replies must be equal as protobuf messages, exactly.
"""

from __future__ import annotations

import urllib.request

import grpc
import numpy as np
import pytest

from etchguard._shards import Topology, shard_of
from etchguard.client import Client, ServiceError, pin, rect, run
from etchguard.v1 import shards_pb2 as spb
from etchguard.v1 import shards_pb2_grpc as spb_grpc
from etchguard.sharded_client import ShardedClient
from grpc_fixtures import start_server
from shard_fixtures import crowded_nets, start_farm

SHARDS = 3
NETS = crowded_nets(24, seed=3)


@pytest.fixture(scope="module")
def farm():
    f = start_farm(SHARDS)
    yield f
    assert f.stop() == 0


@pytest.fixture(scope="module")
def single():
    s = start_server(metrics=False)
    yield s
    s.stop()


@pytest.fixture(scope="module")
def loaded(farm, single):
    """The same nets opened on the farm and on the single server."""
    with farm.client() as fc, single.client() as sc:
        for net in NETS:
            assert fc.open_net(net.name, net.pins, net.shapes) == sc.open_net(net.name, net.pins, net.shapes)
    return NETS


def test_every_shard_holds_some_nets_and_only_its_own(farm, loaded):
    owners = {shard_of(n.name, SHARDS) for n in loaded}
    assert owners == set(range(SHARDS)), "the test nets should spread over every shard"
    for k in range(SHARDS):
        with farm.shard_client(k) as c:
            held = {r.net for r in c.check_all()}
        assert held == {n.name for n in loaded if shard_of(n.name, SHARDS) == k}


def test_checks_scores_batches_and_headroom_equal_a_single_server(farm, single, loaded):
    with farm.client() as fc, single.client() as sc, fc.session() as fs:
        assert {r.net: r for r in fc.check_all()} == {r.net: r for r in sc.check_all()}
        assert {r.net for r in fc.check_all(violations_only=True)} == \
            {r.net for r in sc.check_all(violations_only=True)}
        for net in loaded:
            ox, oy = net.origin
            candidate = [run("M2", ox + 4100, oy + 100, ox + 4100, oy + 30_000)]
            assert fc.score(net.name, candidate) == sc.score(net.name, candidate)
            assert fs.score(net.name, candidate) == sc.score(net.name, candidate)
            assert fc.headroom(net.name, "M1", ox + 100, oy + 100) == sc.headroom(net.name, "M1", ox + 100, oy + 100)
            rects = np.array([[ox + 4000, oy, ox + 4200, oy + L] for L in (2000, 20_000, 90_000)])
            a, b = fs.score_batch(net.name, rects, "M2"), sc.score_batch(net.name, rects, "M2")
            for name in ("cost", "worst_change_utilization", "worst_utilization", "legal", "breaks_limit",
                         "added_area_um2"):
                assert np.array_equal(getattr(a, name), getattr(b, name)), name
        farm_stats, single_stats = fc.stats(), sc.stats()
        assert (farm_stats.nets, farm_stats.shapes) == (single_stats.nets, single_stats.shapes)


def _advice_runs(net):
    ox, oy = net.origin
    yield ("M2", ox + 4100, oy + 100, ox + 4100, oy + 60_000, 400)  # long and wide: breaks a limit
    yield ("M1", ox + 100, oy + 100, ox + 30_000, oy + 100, 300)


def test_advice_equals_a_single_server_and_sees_metal_on_other_shards(farm, single, loaded):
    crossed = 0
    with farm.client() as fc, single.client() as sc, fc.session() as fs:
        for net in loaded:
            me = shard_of(net.name, SHARDS)
            for layer, x1, y1, x2, y2, width in _advice_runs(net):
                want = sc.advise(net.name, layer, x1, y1, x2, y2, width=width, allow_non_preferred=True)
                got = fc.advise(net.name, layer, x1, y1, x2, y2, width=width, allow_non_preferred=True)
                assert got == want, (net.name, layer)
                assert fs.advise(net.name, layer, x1, y1, x2, y2, width=width, allow_non_preferred=True) == want
                others = [c.other_net for o in want.options for c in o.conflicts if c.other_net]
                others += [c.other_net for c in want.jumper.conflicts if c.other_net]
                crossed += sum(shard_of(o, SHARDS) != me for o in others)
    assert crossed > 0, "no advice met metal of another shard: the test would prove nothing"


def test_a_commit_on_one_shard_is_in_the_next_advice_of_another(farm, single, loaded):
    """The directory is current on commit: metal committed on shard A blocks a hop that
    shard B advises right after, in a place where no metal was before."""
    x0, y0 = 500_000, 500_000  # far from the crowded nets
    nets = {}
    for i in range(200):
        name = f"blk_far/n{i}"
        nets.setdefault(shard_of(name, SHARDS), name)
        if len(nets) == 2:
            break
    (a, blocker), (b, advised) = sorted(nets.items())[:2]
    gate = pin("g.a", "M1", [(x0, y0, x0 + 200, y0 + 200)], gate_area={"thin": 0.02})
    with farm.client() as fc, single.client() as sc:
        for c in (fc, sc):
            c.open_net(advised, [gate], [rect("M1", x0, y0 + 30, x0 + 4000, y0 + 170)])
        args = ("M1", x0 + 100, y0 + 100, x0 + 80_000, y0 + 100)
        before = fc.advise(advised, *args, width=300)
        assert before == sc.advise(advised, *args, width=300)
        wide = [rect("M3", x0 + 1000, y0 - 200, x0 + 80_000, y0 + 400)]
        for c in (fc, sc):
            c.open_net(blocker, [pin("b.y", "M3", [(x0 + 20_000, y0 - 400, x0 + 20_200, y0 + 600)], diff_area=0.1)])
        sc.commit(blocker, wide)
        verdict, ids = fc.commit_if_legal(blocker, wide)  # no gate on the net: legal, committed
        assert verdict.legal and len(ids) == 1
        after = fc.advise(advised, *args, width=300)
        assert after == sc.advise(advised, *args, width=300)
        assert after != before
        assert any(c.other_net == blocker for o in after.options for c in o.conflicts) or \
            any(c.other_net == blocker for c in after.jumper.conflicts)


def test_a_call_for_another_shards_net_is_refused_naming_the_right_shard(farm, loaded):
    net = loaded[0]
    owner = shard_of(net.name, SHARDS)
    wrong = (owner + 1) % SHARDS
    with farm.shard_client(wrong) as c:
        with pytest.raises(ServiceError) as info:
            c.check(net.name)
        assert info.value.code is grpc.StatusCode.FAILED_PRECONDITION
        assert f"belongs to shard {owner} at {farm.addresses[owner]}" in info.value.message
        assert info.value.field == "net"
        new = next(f"blk_c/new{i}" for i in range(100) if shard_of(f"blk_c/new{i}", SHARDS) != wrong)
        with pytest.raises(ServiceError) as info:
            c.open_net(new, [])
        assert info.value.code is grpc.StatusCode.FAILED_PRECONDITION
        assert f"belongs to shard {shard_of(new, SHARDS)}" in info.value.message
        with c.session() as s:
            with pytest.raises(ServiceError) as info:
                s.commit(net.name, [run("M1", 0, 100, 900, 100)])
            assert info.value.code is grpc.StatusCode.FAILED_PRECONDITION
            assert f"shard {owner}" in info.value.message and info.value.field == "commit.net"


def test_a_topology_mismatch_is_refused_at_connect(farm, tmp_path):
    real = Topology(tuple(farm.addresses))
    swapped = Topology((real.addresses[1], real.addresses[0], *real.addresses[2:]))
    other_cell = Topology(real.addresses, directory_cell=real.directory_cell * 2)
    for wrong in (swapped, other_cell):
        with pytest.raises(ServiceError) as info:
            ShardedClient(wrong, timeout=10)
        assert info.value.code is grpc.StatusCode.FAILED_PRECONDITION
        assert "expected_fingerprint" in info.value.message
    # the right file, but a shard listed at the wrong index: refused naming the shard
    with Client(real.addresses[1]) as c:
        stub = spb_grpc.ShardServiceStub(c.channel)
        with pytest.raises(grpc.RpcError) as rpc:
            stub.GetTopology(spb.GetTopologyRequest(expected_fingerprint=real.fingerprint, expected_shard=0))
        assert rpc.value.code() is grpc.StatusCode.FAILED_PRECONDITION
        assert "this server is shard 1, not shard 0" in rpc.value.details()
    with farm.client() as ok:
        infos = ok.connect()
        assert [i.shard for i in infos] == list(range(SHARDS))
        assert all(i.fingerprint == real.fingerprint for i in infos)


def test_health_and_metrics_per_shard_labelled(farm, loaded):
    with farm.client() as fc:
        assert fc.health() == ["SERVING"] * SHARDS
        per_shard = [s.nets for s in fc.stats_by_shard()]
    text = urllib.request.urlopen(f"http://127.0.0.1:{farm.metrics_port}/metrics", timeout=10).read().decode()
    for k in range(SHARDS):
        assert f'etchguard_shard_up{{shard="{k}"}} 1.0' in text
        assert f'etchguard_nets_held{{shard="{k}"}} {float(per_shard[k])}' in text
        assert f'etchguard_shard_restarts_total{{shard="{k}"}}' in text


def test_bad_topology_or_shard_options_exit_2_naming_file_line_and_field(tmp_path):
    import subprocess
    import sys
    bad = tmp_path / "farm.topology"
    bad.write_text("etchguard-topology 1\nshards 2\nshard 0 127.0.0.1:1\nshard 0 127.0.0.1:2\n")
    serve = [sys.executable, "-m", "etchguard.cli", "serve", "--listen", "127.0.0.1:0"]
    for extra, expected in (
            (["--topology", str(bad), "--shard-index", "0"], f"{bad}:4: shard: shard 0 is given twice"),
            (["--shards", "0"], "shards: must be 1 to 1024"),
            (["--shard-index", "1"], "shard_index: --shard-index needs --topology")):
        done = subprocess.run(serve + extra, capture_output=True, text=True, timeout=60)
        assert done.returncode == 2, done.stderr
        assert expected in done.stderr, done.stderr


def test_a_farm_on_port_0_takes_its_shards_ports_below_the_ephemeral_range(farm):
    """A supervised farm must name every shard's port before the shards start (the
    topology file lists them all), so it takes them where neither port-0 binds nor
    outgoing connections draw from (Linux's ip_local_port_range), unless none is free."""
    from etchguard.server.supervisor import _ephemeral_low, free_port

    low = _ephemeral_low()
    assert all(int(a.rsplit(":", 1)[1]) < low for a in farm.addresses), farm.addresses
    assert 1024 <= free_port() < low
