"""Issue 10, item 7: Advise honours its call's deadline and cancellation, and lets go
of the net when the client goes.

The case: a gate on M1 and 500 short M1 pieces along the candidate run; advice for
the run takes seconds here (measured in the same run, ``full``; about 16,000 exact
scores, so the server runs with a budget of scores far above that: this test is about
deadlines, not the budget). With a deadline of 0.2 s, or the call cancelled after
0.2 s, a check of the same net (it needs the net's lock) must be answered well before
the advice would have finished: within a quarter of ``full`` after the deadline. Only
ratios of times measured in one run are compared.
"""

from __future__ import annotations

import time

import grpc
import pytest

from etchguard.client import advise_request, pin, rect
from grpc_fixtures import start_server

GATE = pin("u7.a", "M1", [(0, 0, 200, 200)], gate_area={"thin": 0.05})
PIECES_ALONG = 500
PIECES = [rect("M1", 0, 30, 400, 170)] + [rect("M1", 600 + k * 400, 30, 800 + k * 400, 170)
                                          for k in range(PIECES_ALONG)]
RUN = ("M1", 300, 100, 600 + PIECES_ALONG * 400 + 1000, 100)
CUT_AFTER_S = 0.2


@pytest.fixture(scope="module")
def slow_advice():
    server = start_server("--max-advice-scores", "1000000", metrics=False)
    with server.client(timeout=120) as c:
        c.open_net("slow", [GATE], shapes=PIECES)
        t0 = time.perf_counter()
        c.advise("slow", *RUN)
        full = time.perf_counter() - t0
        if full < 10 * CUT_AFTER_S:
            pytest.skip(f"advice takes {full:.2f} s here, too little to see a deadline honoured")
        yield server, c, full
    server.stop()


def _check_answered_after(client) -> float:
    t0 = time.perf_counter()
    client.check("slow")
    return time.perf_counter() - t0


def test_advise_stops_at_its_deadline(slow_advice):
    server, c, full = slow_advice
    with pytest.raises(grpc.RpcError) as info:
        c.stub.Advise(advise_request("slow", *RUN), timeout=CUT_AFTER_S)
    assert info.value.code() == grpc.StatusCode.DEADLINE_EXCEEDED
    waited = _check_answered_after(c)
    assert waited < full / 4, f"the net stayed locked {waited:.2f} s after the deadline (advice: {full:.2f} s)"


def test_advise_stops_when_the_client_cancels(slow_advice):
    server, c, full = slow_advice
    future = c.stub.Advise.future(advise_request("slow", *RUN))
    time.sleep(CUT_AFTER_S)
    assert future.cancel()
    waited = _check_answered_after(c)
    assert waited < full / 4, f"the net stayed locked {waited:.2f} s after the cancel (advice: {full:.2f} s)"
