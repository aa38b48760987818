"""The router cost model is the server's to configure: `etchguard serve --cost-*`
changes the cost a score reply carries, by the formula the proto documents (CostCurve),
checked against figures worked by hand; a bad setting refuses to start naming the option."""

from __future__ import annotations

import subprocess
import sys

import pytest

from etchguard.client import rect, run
from grpc_fixtures import DEMO_DECK, GATE, REPO, start_server


def _side_utilization(x_end: int) -> float:
    """By hand, from the antenna model and the demo deck (lumen-6m, 1000 DBU/um): the
    net's M1 is the union of the stub (0, 30, 400, 170) and the run from (300, 100) to
    (x_end, 100), 140 wide and extended 70 past each end: one rectangle (0, 30, x_end +
    70, 170). The M1 side rule (thin, partial_max 450) measures its perimeter times
    thickness_um 0.13 over the gate's 0.05 um^2 (pin rectangles add no conductor; the
    pin's cell_area is of the area measure). The area ratios are far lower:
    (x_end + 70) x 140 DBU^2 + 0.02 um^2 over 0.05 against 400 and 1600."""
    perimeter_um = 2 * ((x_end + 70) + 140) / 1000
    return perimeter_um * 0.13 / 0.05 / 450.0


def test_cost_options_reach_the_reply():
    """The reply's cost against figures worked by hand with the formula the proto
    documents (CostCurve: scale * ((u - knee) / (1 - knee))^exponent up to the limit,
    violation + scale * over_slope * (u - 1) above), not against the engine's own
    cost function."""
    server = start_server("--cost-knee", "0.0", "--cost-exponent", "2", "--cost-scale", "7",
                          metrics=False)
    try:
        with server.client() as c:
            c.open_net("k", [GATE], shapes=[rect("M1", 0, 30, 400, 170)])
            below = c.score("k", [run("M1", 300, 100, 40_300, 100)])
            above = c.score("k", [run("M1", 300, 100, 100_300, 100)])
    finally:
        server.stop()
    u = _side_utilization(40_300)  # 81.02 um x 0.13 um / 0.05 / 450 = 0.46812 (by hand)
    assert u == pytest.approx(0.468116, abs=1e-6)
    assert below.worst_change_utilization == pytest.approx(u, rel=1e-12)
    assert below.cost == pytest.approx(7.0 * u**2, rel=1e-12)  # knee 0, exponent 2, scale 7: 1.5339
    assert below.cost == pytest.approx(1.53393, abs=1e-5)
    u = _side_utilization(100_300)  # 201.02 um: 1.16145, over the limit
    assert above.worst_change_utilization == pytest.approx(u, rel=1e-12) and not above.legal
    # violation 1e6 and over_slope 1e3 (the defaults) + scale 7: 1e6 + 7e3 * 0.16145
    assert above.cost == pytest.approx(1.0e6 + 7.0 * 1.0e3 * (u - 1.0), rel=1e-12)
    assert above.cost == pytest.approx(1_001_130.14, abs=0.01)


def test_a_bad_cost_setting_refuses_to_start():
    proc = subprocess.run([sys.executable, "-m", "etchguard.cli", "serve", "--listen", "127.0.0.1:0",
                           "--rules", str(DEMO_DECK), "--cost-knee", "1.5"],
                          capture_output=True, text=True, timeout=30, cwd=REPO)
    assert proc.returncode == 2
    assert "cost_knee" in proc.stderr
