"""The session stream: commits, removals and scores interleaved on one stream are
answered in order, each as the in-process engine answers the same sequence."""

from __future__ import annotations

import random
import threading

import pytest

import etchguard as eg
from etchguard.client import ServiceError, pb, rect, run
from etchguard.server import convert
from grpc_fixtures import DEMO_DECK, DRIVER, GATE, net_name


def _random_shape(rng: random.Random) -> pb.Shape:
    """A short run near the pins on M1..M3 or a via, so most shapes connect."""
    kind = rng.random()
    x, y = rng.randrange(0, 20_000, 100), rng.randrange(0, 6_000, 100)
    if kind < 0.35:
        return run("M1", x, y, x + rng.randrange(200, 8_000, 100), y)
    if kind < 0.65:
        return run("M2", x, y, x, y + rng.randrange(200, 8_000, 100))
    if kind < 0.8:
        return run("M3", x, y, x + rng.randrange(200, 8_000, 100), y)
    return rect(rng.choice(["V1", "V2"]), x - 70, y - 70, x + 70, y + 70)


def _expected_score(deck, engine, name, shapes, without_changes=False) -> pb.ScoreReply:
    out = pb.ScoreReply()
    convert.score_into(out, engine.score(name, convert.shapes(deck, shapes, "candidate"),
                                         not without_changes))
    return out


def test_interleaved_commits_removals_scores(client):
    deck = eg.load_deck(DEMO_DECK)
    engine = eg.Engine(deck)
    rng = random.Random(7)
    name = net_name("sess")
    engine.open_net(name, convert.pins(deck, [GATE, DRIVER]))
    held: list[int] = []
    with client.session() as s:
        assert s.open_net(name, [GATE, DRIVER]) == []
        for step in range(150):
            roll = rng.random()
            if roll < 0.3 or not held:
                shapes = [_random_shape(rng) for _ in range(rng.randint(1, 3))]
                ids = s.commit(name, shapes)
                assert ids == engine.commit(name, convert.shapes(deck, shapes, "shapes"))
                held += ids
            elif roll < 0.4:
                gone = rng.sample(held, rng.randint(1, min(3, len(held))))
                assert s.remove(name, gone) == len(gone)
                engine.remove(name, gone)
                held = [i for i in held if i not in gone]
            elif roll < 0.9:
                cand = [_random_shape(rng) for _ in range(rng.randint(1, 2))]
                lean = roll > 0.8
                assert s.score(name, cand, without_changes=lean) == _expected_score(
                    deck, engine, name, cand, lean), step
            else:
                expected = pb.NetReport()
                convert.report_into(expected, engine.check(name))
                assert s.check(name) == expected
        x, y = 100, 100
        expected_h = pb.HeadroomReply()
        convert.headroom_into(expected_h, engine.headroom(name, 0, x, y))
        assert s.headroom(name, "M1", x, y) == expected_h
        s.close_net(name)
        with pytest.raises(ServiceError):
            s.check(name)


def test_pipelined_requests_answer_in_order(client):
    name = net_name("pipe")
    with client.session() as s:
        s.open_net(name, [GATE, DRIVER])
        sent = []
        for i in range(40):
            sent.append(s.send("commit", pb.CommitRequest(net=name, shapes=[run("M1", 0, 100, 500 + 100 * i, 100)])))
            sent.append(s.send("score", pb.ScoreRequest(net=name, candidate=[run("M2", 400, 100, 400, 3000 + i)])))
        sent.append(s.send("remove", pb.RemoveRequest(net=name, shape_ids=[999])))  # refused in line
        sent.append(s.send("check", pb.CheckNetRequest(net=name)))
        replies = [s.receive() for _ in sent]
        assert [r.seq for r in replies] == sent
        assert [r.WhichOneof("result") for r in replies[:4]] == ["commit", "score", "commit", "score"]
        assert [r.commit.shape_ids[0] for r in replies[:80:2]] == list(range(1, 41))
        assert replies[-2].error.field == "remove.shape_ids[0]"
        assert replies[-1].check.net == name
        with pytest.raises(RuntimeError):  # a blocking call with replies still pending
            s.send("check", pb.CheckNetRequest(net=name))
            s.check(name)


def test_one_session_per_router_thread(server):
    errors: list[BaseException] = []

    def router(seed: int) -> None:
        try:
            rng = random.Random(seed)
            name = net_name(f"thread{seed}-")
            with server.client() as c, c.session() as s:
                s.open_net(name, [GATE])
                total = 0
                for _ in range(40):
                    total += len(s.commit(name, [_random_shape(rng)]))
                    s.score(name, [_random_shape(rng)])
                assert c.stats().shapes >= total
                s.close_net(name)
        except BaseException as exc:  # noqa: BLE001 - handed to the main thread
            errors.append(exc)

    threads = [threading.Thread(target=router, args=(i,)) for i in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(60)
    assert not errors, errors
