"""Concurrency: 8 clients x 5,000 mixed operations on overlapping nets, one server.

Every client streams on its own Session: commits and removals on four nets all of
them share, scores, checks and headroom questions, and now and then it opens and
closes a net of its own. Ids are handed out per net in commit order, so the replies
say in which order the server applied each net's commits; the final state must equal
a serial replay of them in that order (then the removals), figures compared exactly
as protobuf NetReports. No request may be refused, and the whole run must finish
within its timeout (a deadlock would not). The server keeps a journal (--sync batch):
after a kill -9 and a restart the same replay must still hold.
"""

from __future__ import annotations

import random
import signal
import threading
import time

from etchguard import Engine, load_deck
from etchguard.client import pb, rect
from etchguard.server import convert
from grpc_fixtures import DEMO_DECK, DRIVER, GATE, start_server

DECK = load_deck(DEMO_DECK)
CLIENTS, OPS = 8, 5_000
SHARED = [f"shared/n{i}" for i in range(4)]
TIMEOUT_S = 150.0
WINDOW = 16  # requests in flight per stream; removals only name ids already acknowledged
KEEP = 4  # live shapes a client keeps per shared net before it rips some up


def random_shape(rng: random.Random) -> pb.Shape:
    x = rng.randrange(0, 20_000, 10)
    if rng.random() < 0.8:  # across the M1 trunk: counts on the gate's figures
        return rect("M1", x, rng.randrange(0, 90, 10), x + rng.randrange(140, 2000, 10),
                    rng.randrange(110, 500, 10))
    y = rng.randrange(0, 3000, 10)
    return rect("M2", x, y, x + rng.randrange(140, 600, 10), y + rng.randrange(140, 3000, 10))


class Client(threading.Thread):
    def __init__(self, server, index: int) -> None:
        super().__init__(daemon=True)
        self.server, self.index = server, index
        self.rng = random.Random(1000 + index)
        self.commits: list[tuple[str, list[pb.Shape], list[int]]] = []
        self.removed: list[tuple[str, list[int]]] = []
        self.errors: list[str] = []
        self.done = 0

    def run(self) -> None:
        rng = self.rng
        mine: dict[str, list[int]] = {n: [] for n in SHARED}  # my acknowledged, live ids
        own = f"own/c{self.index}"
        own_open = False
        sent: dict[int, tuple] = {}
        with self.server.client(timeout=60) as c, c.session() as s:
            def receive() -> None:
                reply = s.receive()
                what = sent.pop(reply.seq)
                if reply.HasField("error"):
                    self.errors.append(f"{what[0]}: {reply.error.message}")
                elif what[0] == "commit" and what[1] in mine:
                    ids = list(reply.commit.shape_ids)
                    self.commits.append((what[1], what[2], ids))
                    mine[what[1]].extend(ids)
                self.done += 1

            for k in range(OPS):
                roll = rng.random()
                net = rng.choice(SHARED)
                if len(mine[net]) > KEEP:  # rip up: nets stay router-sized, each op cheap
                    roll = 0.45
                if roll < 0.40:
                    shapes = [random_shape(rng) for _ in range(rng.randint(1, 2))]
                    seq = s.send("commit", pb.CommitRequest(net=net, shapes=shapes))
                    sent[seq] = ("commit", net, shapes)
                elif roll < 0.55 and mine[net]:
                    victims = rng.sample(mine[net], min(len(mine[net]), rng.randint(1, 2)))
                    for v in victims:
                        mine[net].remove(v)
                    self.removed.append((net, victims))
                    seq = s.send("remove", pb.RemoveRequest(net=net, shape_ids=victims))
                    sent[seq] = ("remove", net)
                elif roll < 0.80:
                    seq = s.send("score", pb.ScoreRequest(net=net, candidate=[random_shape(rng)],
                                                          without_changes=rng.random() < 0.5))
                    sent[seq] = ("score", net)
                elif roll < 0.90:
                    seq = s.send("check", pb.CheckNetRequest(net=net))
                    sent[seq] = ("check", net)
                elif roll < 0.96:
                    seq = s.send("headroom", pb.HeadroomRequest(net=net, layer="M1", x=100, y=100))
                    sent[seq] = ("headroom", net)
                else:  # registry traffic: a net of my own, opened and closed
                    if own_open:
                        seq = s.send("close_net", pb.CloseNetRequest(net=own))
                    else:
                        seq = s.send("open_net", pb.OpenNetRequest(net=own, pins=[GATE, DRIVER],
                                                                   shapes=[random_shape(rng)]))
                    own_open = not own_open
                    sent[seq] = ("own", own)
                while len(sent) >= WINDOW:
                    receive()
            while sent:
                receive()


def serial_replay(clients: list[Client]) -> Engine:
    """The shared nets replayed serially: commits in the order of their ids (the order
    the server applied them), each removal right after the commit of the last id it
    names (held sets, and so the figures, do not depend on where a removal goes after
    that; placing it early keeps the replayed nets router-sized)."""
    engine = Engine(DECK)
    pins = convert.pins(DECK, [GATE, DRIVER])
    trunk = convert.shapes(DECK, [rect("M1", 0, 30, 20_200, 170)], "trunk")
    for net in SHARED:
        engine.open_net(net, pins, None, trunk)
        commits = sorted((ids[0], shapes, ids) for c in clients for n, shapes, ids in c.commits if n == net)
        every = [i for _, _, ids in commits for i in ids]
        assert every == list(range(2, len(every) + 2)), f"{net}: ids are not handed out once each, in order"
        events = [(ids[0], 0, "commit", shapes, ids) for _, shapes, ids in commits]
        events += [(max(victims), 1, "remove", None, victims) for c in clients
                   for n, victims in c.removed if n == net]
        for _, _, kind, shapes, ids in sorted(events, key=lambda e: e[:2]):
            if kind == "commit":
                assert engine.commit(net, convert.shapes(DECK, shapes, "shapes")) == ids
            else:
                engine.remove(net, ids)
    return engine


def held_equals(server, engine: Engine) -> None:
    with server.client() as c:
        for net in SHARED:
            want = pb.NetReport()
            convert.report_into(want, engine.check(net))
            assert c.check(net) == want, f"{net}: held figures differ from the serial replay"
            held = sorted(engine.shapes(net))
            assert c.remove(net, held) == len(held)  # every id the replay holds is held


def test_eight_clients_five_thousand_mixed_operations_each(tmp_path):
    state = tmp_path / "state"
    server = start_server("--state-dir", str(state), "--sync", "batch", "--snapshot-every", "20000",
                          metrics=False)
    try:
        with server.client() as c:
            for net in SHARED:
                c.open_net(net, [GATE, DRIVER], shapes=[rect("M1", 0, 30, 20_200, 170)])
        clients = [Client(server, i) for i in range(CLIENTS)]
        t0 = time.monotonic()
        for c in clients:
            c.start()
        for c in clients:
            c.join(max(1.0, TIMEOUT_S - (time.monotonic() - t0)))
        stuck = [c.index for c in clients if c.is_alive()]
        assert not stuck, f"clients {stuck} did not finish in {TIMEOUT_S} s (deadlock?)"
        assert [c.done for c in clients] == [OPS] * CLIENTS
        errors = [e for c in clients for e in c.errors]
        assert not errors, f"{len(errors)} refused, e.g. {errors[:3]}"
        engine = serial_replay(clients)
        with server.client() as c:
            for net in SHARED:
                want = pb.NetReport()
                convert.report_into(want, engine.check(net))
                assert c.check(net) == want, f"{net}: held figures differ from the serial replay"
        server.proc.send_signal(signal.SIGKILL)
        server.proc.wait(10)
    finally:
        server.stop()
    server = start_server("--state-dir", str(state), metrics=False)
    try:
        held_equals(server, engine)
    finally:
        server.stop()


def test_a_client_gone_mid_stream_leaves_whole_commits_only():
    """Pipeline 300 commits of three shapes and drop the stream after a few replies: the
    server applies each commit whole or not at all. Ids come in threes from 1, so the
    id a probe commit gets says how many commits landed, and removing every id below
    it in one all-or-nothing call proves they are all held."""
    server = start_server(metrics=False)
    try:
        with server.client() as c:
            c.open_net("gone/n", [GATE, DRIVER])
            s = c.session()
            rng = random.Random(5)
            for _ in range(300):
                s.send("commit", pb.CommitRequest(net="gone/n", shapes=[random_shape(rng) for _ in range(3)]))
            acked = [s.receive() for _ in range(5)]
            s.close()  # the client goes away with most of the stream unanswered
            assert all(not r.HasField("error") for r in acked)
            time.sleep(1.0)  # let the server finish what it had read
            first = c.commit("gone/n", [rect("M1", 0, 30, 400, 170)])[0]
            landed = first - 1
            assert landed % 3 == 0 and 15 <= landed <= 900, f"{landed} shapes: a commit was split"
            assert c.remove("gone/n", list(range(1, first + 1))) == first
    finally:
        server.stop()


def test_commit_if_legal_is_one_step_under_two_racing_threads():
    """Two runs on a gate's M1, each legal alone and illegal together, committed only if
    legal by two threads at once, 200 times: the score and the commit are one step under
    the net's lock, so exactly one run is committed and the net stays legal. (Asked as a
    Score then a Commit, both threads could see the net without the other's run.)"""
    engine = Engine(DECK)
    pins = convert.pins(DECK, [GATE], "pins")
    m1 = next(layer.index for layer in DECK.layers if layer.name == "M1")

    def runs(length: int):
        return ([convert.shape(DECK, rect("M1", -length, 30, 100, 170), "a")],
                [convert.shape(DECK, rect("M1", 100, 30, 100 + length, 170), "b")])

    engine.open_net("probe", pins)
    lo, hi = 200, 4_000_000  # the shortest length at which the two runs together break a limit
    while hi - lo > 10:
        mid = (lo + hi) // 2
        a, b = runs(mid)
        lo, hi = (mid, hi) if engine.score("probe", a + b, detail=False).legal else (lo, mid)
    a, b = runs(hi)
    assert engine.score("probe", a, detail=False).legal and engine.score("probe", b, detail=False).legal
    assert not engine.score("probe", a + b, detail=False).legal
    assert a[0].layer == m1

    for i in range(200):
        name = f"race{i}"
        engine.open_net(name, pins)
        start = threading.Barrier(2)
        results: dict[str, tuple] = {}

        def commit(which: str, shapes) -> None:
            start.wait()
            results[which] = engine.commit_if_legal(name, shapes)

        threads = [threading.Thread(target=commit, args=(w, s)) for w, s in (("a", a), ("b", b))]
        for t in threads:
            t.start()
        for t in threads:
            t.join(10)
        committed = [w for w, (_, ids) in results.items() if ids]
        assert len(results) == 2 and len(committed) == 1, (i, results)
        loser = "b" if committed == ["a"] else "a"
        assert not results[loser][0].legal  # it was scored with the winner's run held
        assert engine.check(name).legal
        engine.close_net(name)
