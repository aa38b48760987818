"""Issue 10, item 7, in the engine: an advice stops when its caller says so (refused
with the caller's StoppedError, the net let go) and takes at most the configured
number of exact scores (the part under way cut, the answer saying so).

The case is the one of the gRPC deadline test, smaller: a gate on M1 and short M1
pieces along the run, so the jumper search has many event intervals to walk.
"""

from __future__ import annotations

import threading

import pytest

from etchguard import (CancelledError, DeadlineExceededError, Engine, Limits, Pin, Shape,
                       load_deck)
from grpc_fixtures import DEMO_DECK

PIECES_ALONG = 250  # fewer leave the run legal as is (nothing to search)


def _open(limits: Limits | None = None) -> tuple[Engine, tuple]:
    engine = Engine(load_deck(DEMO_DECK), limits)
    m1 = engine.deck.layer_index["M1"]
    gate = Pin("u7.a", m1, ((0, 0, 200, 200),), {"thin": 0.05}, 0.0, {})
    pieces = [Shape(m1, (0, 30, 400, 170))] + [Shape(m1, (600 + k * 400, 30, 800 + k * 400, 170))
                                               for k in range(PIECES_ALONG)]
    engine.open_net("slow", [gate], shapes=pieces)
    return engine, (m1, 300, 100, 600 + PIECES_ALONG * 400 + 1000, 100)


@pytest.fixture(scope="module")
def full():
    engine, run = _open()
    advice = engine.advise("slow", *run)
    assert not advice.cut and advice.exact_scores > 100  # the case needs a long search
    return advice


def test_a_stop_refuses_the_advice_within_one_score_and_lets_go_of_the_net(full):
    engine, run = _open()
    for error in (DeadlineExceededError("passed", "deadline"), CancelledError("gone", "call")):
        asked = 0

        def should_stop():
            nonlocal asked
            asked += 1
            return error if asked > 50 else None

        with pytest.raises(type(error)):
            engine.advise("slow", *run, should_stop=should_stop)
        assert asked == 51  # asked before each score; refused at the first "stop"
        assert engine._nets["slow"].lock.acquire(blocking=False)  # let go
        engine._nets["slow"].lock.release()
    assert engine.advise("slow", *run) == full  # nothing of the stopped ones stayed behind


def test_a_waiting_advice_gives_up_the_wait_when_its_caller_stops():
    engine, run = _open()
    lock = engine._nets["slow"].lock
    lock.acquire()  # another call holds the net
    try:
        stop = threading.Event()
        threading.Timer(0.1, stop.set).start()
        with pytest.raises(CancelledError):
            engine.advise("slow", *run, should_stop=lambda: CancelledError("gone", "call")
                          if stop.is_set() else None)
    finally:
        lock.release()


def test_the_budget_cuts_the_part_under_way_and_says_so(full):
    budget = full.exact_scores // 2
    engine, run = _open(Limits(max_advice_scores=budget))
    advice = engine.advise("slow", *run)
    assert advice.exact_scores == budget
    assert advice.cut  # the parts left unsettled, by name
    assert set(advice.cut) <= {"hop", "jumper", "diode"}
    assert advice.explanation[-1].startswith(f"cut: the advice's budget of {budget} exact scores")
    for part in advice.cut:
        assert part in advice.explanation[-1]
    # what was settled before the budget ran out is what the full advice says
    assert advice.score == full.score
    if "hop" not in advice.cut:
        assert advice.options == full.options
    if "jumper" in advice.cut:
        assert not advice.jumper.applicable and "not settled" in advice.jumper.reason
    elif advice.jumper is not None:
        assert advice.jumper == full.jumper


def test_a_budget_the_advice_stays_within_changes_nothing(full):
    engine, run = _open(Limits(max_advice_scores=full.exact_scores))
    assert engine.advise("slow", *run) == full


def test_the_smallest_budget_still_scores_the_run_as_it_is(full):
    engine, run = _open(Limits(max_advice_scores=1))
    advice = engine.advise("slow", *run)
    assert advice.exact_scores == 1 and advice.score == full.score
    assert set(advice.cut) == {"hop", "jumper", "diode"}
