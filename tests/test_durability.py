"""Durability: the journal keeps every acknowledged change across a kill -9.

Real ``etchguard serve`` processes on loopback ports with ``--state-dir``. The
reference for "what the server must hold" is a serial replay of the operations the
clients saw acknowledged, into an in-process Engine; the figures are compared as
protobuf NetReports, exactly (the engine's sums are order-independent, see
DEVELOPERS.md). The framing tests work on the files directly.
"""

from __future__ import annotations

import random
import signal
import struct
import subprocess
import sys
import threading
import time
import zlib
from pathlib import Path

import pytest

from etchguard import Engine, load_deck
from etchguard._journal import (FORMAT_VERSION, Journal, JournalError, iter_records,
                                segments)
from etchguard.client import ServiceError, pb, rect
from etchguard.server import convert
from grpc_fixtures import DEMO_DECK, DRIVER, GATE, REPO, start_server

DECK = load_deck(DEMO_DECK)


# -- the reference: acknowledged operations replayed serially ------------------------------

TRUNK = rect("M1", 0, 30, 20_200, 170)  # joins the gate and the driver pin


def random_shape(rng: random.Random) -> pb.Shape:
    """Mostly M1 across the trunk (so its area counts on the gate's figures), else M2."""
    x = rng.randrange(0, 20_000, 10)
    if rng.random() < 0.8:
        return rect("M1", x, rng.randrange(0, 90, 10), x + rng.randrange(140, 3000, 10),
                    rng.randrange(110, 600, 10))
    y = rng.randrange(0, 3000, 10)
    return rect("M2", x, y, x + rng.randrange(140, 600, 10), y + rng.randrange(140, 3000, 10))


def replay(ops_by_net: dict[str, list[tuple]]) -> Engine:
    """An engine holding each net after its operations, applied in the given order.
    An op is ("commit", [pb.Shape], ids) or ("remove", [ids])."""
    engine = Engine(DECK)
    pins = convert.pins(DECK, [GATE, DRIVER])
    for net, ops in ops_by_net.items():
        engine.open_net(net, pins)
        for op in ops:
            if op[0] == "commit":
                got = engine.commit(net, convert.shapes(DECK, op[1], "shapes"))
                assert got == list(op[2]), f"{net}: replay ids {got} != acknowledged {op[2]}"
            else:
                engine.remove(net, op[1])
    return engine


def report(engine: Engine, net: str) -> pb.NetReport:
    out = pb.NetReport()
    convert.report_into(out, engine.check(net))
    return out


class Router(threading.Thread):
    """A client streaming commits and removals on its own nets, recording what was
    acknowledged, until the server goes away or ``ops`` are done."""

    def __init__(self, server, nets: list[str], seed: int, ops: int) -> None:
        super().__init__(daemon=True)
        self.server, self.nets, self.ops = server, nets, ops
        self.rng = random.Random(seed)
        self.acked: dict[str, list[tuple]] = {n: [] for n in nets}
        self.pending: tuple[str, tuple] | None = None  # sent, reply not seen
        self.done = 0
        self.stopped_by: Exception | None = None

    def run(self) -> None:
        rng = self.rng
        try:
            with self.server.client() as c, c.session() as s:
                live: dict[str, list[int]] = {n: [] for n in self.nets}
                for net in self.nets:
                    s.open_net(net, [GATE, DRIVER])
                    live[net] = s.commit(net, [TRUNK])
                    self.acked[net].append(("commit", [TRUNK], list(live[net])))
                for _ in range(self.ops):
                    net = rng.choice(self.nets)
                    if live[net] and rng.random() < 0.25:
                        victims = rng.sample(live[net], min(len(live[net]), rng.randint(1, 2)))
                        self.pending = (net, ("remove", victims))
                        s.remove(net, victims)
                        for v in victims:
                            live[net].remove(v)
                        self.acked[net].append(("remove", victims))
                    else:
                        shapes = [random_shape(rng) for _ in range(rng.randint(1, 3))]
                        self.pending = (net, ("commit", shapes, ()))
                        ids = s.commit(net, shapes)
                        live[net].extend(ids)
                        self.acked[net].append(("commit", shapes, ids))
                    self.pending = None
                    self.done += 1
        except ServiceError as exc:  # the server was killed under us
            self.stopped_by = exc


def held_matches_a_replay(client, routers: list[Router]) -> None:
    """Each net the server holds equals the replay of its acknowledged operations, or
    of those plus the one in flight at the kill (journaled, reply lost). Told apart by
    the figures, by the id a probe commit gets (ids are never reused), and by removing:
    every id that should be held goes in one all-or-nothing call; a sample of those
    that should be gone is NOT_FOUND."""
    probe = [rect("M1", 0, 30, 400, 170)]
    for r in routers:
        for net in r.nets:
            variants = [list(r.acked[net])]
            if r.pending is not None and r.pending[0] == net:
                op = r.pending[1]
                if op[0] == "commit":  # the ids it would have got follow the last ones
                    last = max([i for o in r.acked[net] if o[0] == "commit" for i in o[2]], default=0)
                    op = ("commit", op[1], list(range(last + 1, last + 1 + len(op[1]))))
                variants.append(variants[0] + [op])
            got_ids = client.commit(net, probe)
            got = client.check(net)
            matches = []
            for ops in variants:
                engine = replay({net: ops})
                want_ids = engine.commit(net, convert.shapes(DECK, probe, "probe"))
                if want_ids == got_ids and report(engine, net) == got:
                    matches.append(engine)
            assert matches, f"{net}: held state is no replay of the acknowledged operations"
            # A removal in flight may have landed without changing any figure (shapes
            # fully covered by others): then both variants match, and only the ids tell
            # them apart. A refused removal changes nothing, so try each in turn.
            for engine in matches:
                held = sorted(engine.shapes(net))
                try:
                    assert client.remove(net, held) == len(held)
                    break
                except ServiceError as exc:
                    if exc.code.name != "NOT_FOUND" or engine is matches[-1]:
                        raise
            gone = sorted(set(range(1, max(held) + 1)) - set(held))
            for sid in random.Random(net).sample(gone, min(len(gone), 10)):
                with pytest.raises(ServiceError) as info:
                    client.remove(net, [sid])
                assert info.value.code.name == "NOT_FOUND"


def test_kill_9_mid_stream_loses_no_acknowledged_commit_and_a_torn_tail_is_cut(tmp_path):
    state = tmp_path / "state"
    server = start_server("--state-dir", str(state), "--sync", "always", "--snapshot-every", "150",
                          metrics=False)
    routers = [Router(server, [f"c{i}/n{j}" for j in range(2)], seed=i, ops=400) for i in range(4)]
    try:
        for r in routers:
            r.start()
        deadline = time.monotonic() + 30
        while sum(r.done for r in routers) < 300 and time.monotonic() < deadline:
            time.sleep(0.02)
        server.proc.send_signal(signal.SIGKILL)  # in the middle of the streams
        server.proc.wait(10)
        for r in routers:
            r.join(20)
            assert not r.is_alive()
        assert sum(r.done for r in routers) >= 300, "the clients did not get going"
        assert any(r.stopped_by is not None for r in routers), "the kill came after the streams ended"
    finally:
        server.stop()
    # The kill left whole records (os.write is not torn by a kill); tear the last one as
    # a crash in the middle of a write would: half a frame of a record at the end.
    last = segments(state)[-1][1]
    payload = pb.CommitRequest(net="c0/n0").SerializeToString() * 4
    torn = struct.pack("<II", len(payload), zlib.crc32(payload)) + payload[: len(payload) // 2]
    with open(last, "ab") as f:
        f.write(torn)
    size_before = last.stat().st_size
    server = start_server("--state-dir", str(state), "--sync", "always", metrics=False)
    try:
        cut = [e for e in server.logs if e.get("msg") == "torn journal tail truncated"]
        assert cut and cut[0]["file"] == str(last) and cut[0]["dropped_bytes"] == len(torn)
        assert last.stat().st_size == size_before - len(torn)
        with server.client() as c:
            held_matches_a_replay(c, routers)
    finally:
        assert server.stop() == 0


def test_snapshots_bound_the_journal_and_a_restart_brings_back_ids_and_figures(tmp_path):
    state = tmp_path / "state"
    server = start_server("--state-dir", str(state), "--sync", "batch", "--snapshot-every", "40",
                          metrics=False)
    router = Router(server, ["s/n0", "s/n1", "s/n2"], seed=7, ops=300)
    try:
        router.run()  # in this thread: every reply is seen
        assert router.stopped_by is None and router.done == 300
        time.sleep(0.5)  # let the snapshot thread catch up with the last threshold
        assert (state / "snapshot.pb").exists()
        numbers = [n for n, _ in segments(state)]
        assert len(numbers) <= 3, f"segments covered by a snapshot are deleted: {numbers}"
        server.proc.send_signal(signal.SIGKILL)  # no final snapshot: replay the rest
        server.proc.wait(10)
    finally:
        server.stop()
    server = start_server("--state-dir", str(state), metrics=False)
    try:
        recovered = next(e for e in server.logs if e.get("msg") == "state recovered")
        assert recovered["snapshot"] and recovered["records_replayed"] < 40 + 3
        with server.client() as c:
            router.pending = None
            held_matches_a_replay(c, [router])
    finally:
        assert server.stop() == 0
    # a clean stop leaves a snapshot covering everything: the next start replays nothing
    server = start_server("--state-dir", str(state), metrics=False)
    try:
        recovered = next(e for e in server.logs if e.get("msg") == "state recovered")
        assert recovered["records_replayed"] == 0 and recovered["nets"] == 3
    finally:
        server.stop()


def _serve_fails(state: Path) -> str:
    """Start a server on ``state`` that must refuse to start; its stderr."""
    proc = subprocess.run([sys.executable, "-m", "etchguard.cli", "serve", "--listen", "127.0.0.1:0",
                           "--state-dir", str(state), "--rules", str(DEMO_DECK)],
                          capture_output=True, text=True, timeout=30, cwd=REPO)
    assert proc.returncode == 2, proc.stderr
    return proc.stderr


def _journal_with_records(state: Path, commits: int = 5) -> None:
    engine = Engine()
    journal = Journal.open(state, engine, sync="none", snapshot_every=0)
    text = DEMO_DECK.read_text(encoding="utf-8")
    from etchguard import loads_deck

    engine.load_deck(loads_deck(text), text)
    engine.open_net("n", convert.pins(DECK, [GATE, DRIVER]))
    for k in range(commits):
        engine.commit("n", convert.shapes(DECK, [rect("M1", k * 1000, 0, k * 1000 + 500, 140)], "s"))
    journal.close(snapshot=False)


def test_a_journal_of_another_format_version_is_refused_naming_file_and_versions(tmp_path):
    state = tmp_path / "state"
    _journal_with_records(state)
    seg = segments(state)[0][1]
    data = bytearray(seg.read_bytes())
    data[8:12] = struct.pack("<I", FORMAT_VERSION + 1)
    seg.write_bytes(bytes(data))
    err = _serve_fails(state)
    assert str(seg) in err and f"version {FORMAT_VERSION + 1}" in err and f"version {FORMAT_VERSION} only" in err


def test_corruption_in_the_middle_refuses_to_start_and_names_the_offset(tmp_path):
    state = tmp_path / "state"
    _journal_with_records(state)
    seg = segments(state)[0][1]
    offsets = [off for _, off, _ in iter_records(state)]
    data = bytearray(seg.read_bytes())
    data[offsets[2] + 12] ^= 0xFF  # a payload byte of the third record: its CRC fails
    seg.write_bytes(bytes(data))
    with pytest.raises(JournalError) as info:
        Journal.open(state, Engine())
    assert f"offset {offsets[2]}" in str(info.value) and str(seg) in str(info.value)
    assert seg.read_bytes() == bytes(data), "a refused start changes no file"
    err = _serve_fails(state)
    assert f"offset {offsets[2]}" in err


def test_a_corrupt_last_record_is_cut_and_the_rest_replayed(tmp_path):
    state = tmp_path / "state"
    _journal_with_records(state, commits=5)
    seg = segments(state)[0][1]
    offsets = [off for _, off, _ in iter_records(state)]
    data = bytearray(seg.read_bytes())
    data[-1] ^= 0xFF  # last record's payload: CRC mismatch, nothing after it
    seg.write_bytes(bytes(data))
    engine = Engine()
    journal = Journal.open(state, engine)
    try:
        assert [t.offset for t in journal.recovery.torn] == [offsets[-1]]
        assert len(engine.shapes("n")) == 4  # five commits, the last one cut
        assert engine.commit("n", convert.shapes(DECK, [rect("M1", 0, 0, 300, 140)], "s")) == [5]
    finally:
        journal.close()


def test_a_second_server_on_the_same_state_folder_is_refused(tmp_path):
    state = tmp_path / "state"
    server = start_server("--state-dir", str(state), metrics=False)
    try:
        assert "another etchguard server" in _serve_fails(state)
    finally:
        server.stop()


def test_journal_records_follow_each_nets_order_and_a_refused_call_records_nothing(tmp_path):
    state2 = tmp_path / "state2"
    server = start_server("--state-dir", str(state2), "--sync", "none", "--snapshot-every", "0",
                          metrics=False)
    try:
        with server.client() as c:
            c.open_net("o", [GATE, DRIVER])
            ids = c.commit("o", [rect("M1", 0, 30, 5000, 170)])
            with pytest.raises(ServiceError):
                c.commit("o", [rect("M1", 10, 10, 5, 5)])
            # a commit only if legal is recorded when it commits, and only then
            verdict, none = c.commit_if_legal("o", [rect("M1", -400_000, 30, 200, 170)])
            assert not verdict.legal and none == []
            verdict, more = c.commit_if_legal("o", [rect("M1", 0, 200, 200, 400)])
            assert verdict.legal and more
            c.remove("o", ids + more)
            c.close_net("o")
            c.open_net("o", [GATE])
        kinds = [rec.WhichOneof("change") for _, _, rec in iter_records(state2)]
        assert kinds == ["deck_loaded", "net_opened", "shapes_committed", "shapes_committed", "shapes_removed",
                         "net_closed", "net_opened"]
    finally:
        server.stop()
