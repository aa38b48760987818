"""The router cost model is the server's to configure: `etchguard serve --cost-*`
changes the cost a score reply carries, by the documented formula
(etchguard.CostModel), and a bad setting refuses to start naming the option."""

from __future__ import annotations

import subprocess
import sys

import etchguard as eg
from etchguard.client import rect, run
from grpc_fixtures import DEMO_DECK, GATE, REPO, start_server


def test_cost_options_reach_the_reply():
    server = start_server("--cost-knee", "0.0", "--cost-exponent", "2", "--cost-scale", "7",
                          metrics=False)
    try:
        with server.client() as c:
            c.open_net("k", [GATE], shapes=[rect("M1", 0, 30, 400, 170)])
            reply = c.score("k", [run("M1", 300, 100, 40_300, 100)])
    finally:
        server.stop()
    u = reply.worst_change_utilization
    assert 0 < u < 1  # below the limit: the curved part of the cost
    # the documented formula (etchguard.CostModel's docstring), written out here:
    # scale * ((u - knee) / (1 - knee)) ** exponent below the limit
    assert reply.cost == 7.0 * ((u - 0.0) / (1.0 - 0.0)) ** 2.0
    assert reply.cost == eg.CostModel(knee=0.0, exponent=2.0, scale=7.0).cost(u)
    assert reply.cost != 10.0 * ((u - 0.7) / 0.3) ** 3.0 if u > 0.7 else reply.cost != 0.0  # not the default


def test_a_bad_cost_setting_refuses_to_start():
    proc = subprocess.run([sys.executable, "-m", "etchguard.cli", "serve", "--listen", "127.0.0.1:0",
                           "--rules", str(DEMO_DECK), "--cost-knee", "1.5"],
                          capture_output=True, text=True, timeout=30, cwd=REPO)
    assert proc.returncode == 2
    assert "cost_knee" in proc.stderr
