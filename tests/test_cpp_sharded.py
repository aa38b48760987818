"""The C++ sharding client against a farm, held to one plain server.

``etchguard_sharded_example`` (client_examples/cpp/sharded_example.cpp, built by the
C++ example's fixture) reads the farm's topology file, routes every call by net with
its own shard function (no proxy), streams and calls, fans CheckAll and Stats out,
and tries a topology with two addresses swapped. The same nets and candidates go
through the Python client to a single ``etchguard serve``: every figure must be
equal exactly (%.17g round-trips a double), each net must sit on the shard the
Python shard function names, and the swapped topology must be refused with
FAILED_PRECONDITION (code 9) naming ``expected_fingerprint``.
"""

from __future__ import annotations

import subprocess

import numpy as np
import pytest

from etchguard._shards import shard_of
from etchguard.client import pin, rect, run, runs_to_rects, via
from grpc_fixtures import start_server
from shard_fixtures import start_farm
from native_build import CPP_BUILD as BUILD
from test_cpp_example import parse_figures

SHARDS, NETS, PREFIX = 2, 6, "blk_s"


@pytest.fixture(scope="module")
def farm():
    f = start_farm(SHARDS, metrics=False)
    yield f
    assert f.stop() == 0


def test_cpp_sharding_client_equals_one_server(example_binary, farm):
    done = subprocess.run([str(BUILD / "etchguard_sharded_example"), str(farm.topology), PREFIX],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr[-3000:]
    got = parse_figures(done.stdout)
    single = start_server(metrics=False)
    try:
        with single.client() as c, farm.client() as fc:
            assert got["fingerprint"] == f"{fc.topology.fingerprint:016x}"
            for i in range(NETS):
                net, x0 = f"{PREFIX}/n{i}", 40_000 * i
                assert int(got[f"shard_of.{net}"]) == shard_of(net, SHARDS)
                assert net in {r.net for r in fc.client_for(net).check_all()}  # it is where it was routed
                c.open_net(net, [pin(f"u{i}.a", "M1", [(x0, 0, x0 + 200, 200)], gate_area={"thin": 0.05}),
                                 pin(f"u{i}.y", "M1", [(x0 + 20_000, 0, x0 + 20_200, 200)], diff_area=0.3)])
                ids = c.commit(net, [rect("M1", x0, 30, x0 + 5000, 170)] + via(c.deck, "V1", x0 + 4900, 100))
                assert got[f"ids.{net}"] == f"{len(ids)} {ids[0]}"
                s = c.score(net, [run("M2", x0 + 4900, 100, x0 + 4900, 100 + 9000 * (i + 1))])
                assert float(got[f"score.{net}.worst_utilization"]) == s.worst_utilization
                assert float(got[f"score.{net}.cost"]) == s.cost
                assert got[f"score.{net}.legal"] == ("true" if s.legal else "false")
                assert got[f"score.{net}.same_unary"] == "true"
                lengths = np.array([2000, 20_000, 60_000])
                rects = runs_to_rects(x0 + 4900, 100, x0 + 4900, 100 + lengths, 200)
                batch = c.score_batch(net, rects, "M2")
                for k, cost in enumerate(batch.cost):
                    assert float(got[f"batch.{net}.{k}.cost"]) == cost
                assert float(got[f"check.{net}.worst_utilization"]) == c.check(net).worst_utilization
            assert int(got["check_all.reports"]) == len(list(c.check_all())) == NETS
            assert int(got["stats.nets"]) == c.stats().nets == NETS
    finally:
        single.stop()
    assert got["mismatch.code"] == "9" and got["mismatch.field"] == "expected_fingerprint"
    # the farm-wide blockage: held under its one id by every shard (6 = ALREADY_EXISTS
    # when asked for it again), removed from every one (5 = NOT_FOUND the second time)
    assert int(got["blockage.id"]) >= 1
    for k in range(SHARDS):
        assert got[f"blockage.held.{k}"] == "6"
        assert got[f"blockage.free.{k}"] == "yes"
    assert got["blockage.removed_again"] == "5 blockage_id"
