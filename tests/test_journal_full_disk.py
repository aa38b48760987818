"""A journal that cannot be written: the change is refused and not applied.

Unit part: a real Journal on a real folder, with write/fsync failures injected
(``journal_faults.FaultyOs``): every kind of change, refused, leaves the engine as
it was (compared with an image taken before), the journal keeps going once writes
work again, and a restart holds exactly what memory held. A partial write is cut
back so no half frame sits before the next record.

Server part: a real ``etchguard serve`` on a small tmpfs in a mount namespace of
its own (``unshare``/``nsenter``; skipped with the reason where it cannot be
mounted): fill the disk, commits are refused UNAVAILABLE and the net is unchanged;
a restart on the full disk is a clear error (exit 2, no traceback) and leaves no
file behind; once space is back the server starts with every acknowledged shape.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys

import pytest

import etchguard._journal as journal_module
from etchguard import Engine, load_deck, loads_deck
from etchguard._changelog import ChangeLogError
from etchguard._journal import Journal
from etchguard.client import ServiceError, rect
from etchguard.server import convert
from grpc_fixtures import DEMO_DECK, DRIVER, GATE, REPO, start_server
from journal_faults import FaultyOs

DECK = load_deck(DEMO_DECK)
TEXT = DEMO_DECK.read_text(encoding="utf-8")
OTHER_TEXT = (REPO / "service" / "etchguard" / "data" / "lumen-5m.toml").read_text(encoding="utf-8")


def _shapes(k: int, n: int = 1):
    return convert.shapes(DECK, [rect("M1", (k + i) * 1000, 0, (k + i) * 1000 + 500, 140)
                                 for i in range(n)], "s")


def _held(engine: Engine):
    """Everything a restart must bring back, as comparable values."""
    image, _ = engine.export_state(lambda: None)
    return image.deck_text, sorted((n.name, n.pins, n.layer_range, sorted(n.shapes.items()), n.next_id)
                                   for n in image.nets), sorted(image.blockages.items()), \
        image.next_blockage_id


def _journaled(state, sync="none"):
    engine = Engine()
    journal = Journal.open(state, engine, sync=sync, snapshot_every=0)
    if engine.deck_text is None:
        engine.load_deck(loads_deck(TEXT), TEXT)
        engine.open_net("a", convert.pins(DECK, [GATE, DRIVER]), None, _shapes(0, 3))
        engine.declare_blockage(2, (0, 0, 100, 100))
    return engine, journal


# every kind of change, as (name, call) on an engine set up by _journaled
CHANGES = [
    ("commit", lambda e: e.commit("a", _shapes(10, 2))),
    ("remove", lambda e: e.remove("a", [1, 2])),
    ("open", lambda e: e.open_net("b", convert.pins(DECK, [GATE]), None, _shapes(20))),
    ("close", lambda e: e.close_net("a")),
    ("deck", lambda e: e.load_deck(loads_deck(OTHER_TEXT), OTHER_TEXT)),
    ("blockage", lambda e: e.declare_blockage(1, (0, 0, 50, 50))),
    ("unblock", lambda e: e.remove_blockage(1)),
]


@pytest.mark.parametrize("partial", [0, 5], ids=["nothing-written", "half-written"])
@pytest.mark.parametrize("name,change", CHANGES, ids=[c[0] for c in CHANGES])
def test_a_change_the_journal_cannot_write_is_not_applied(tmp_path, monkeypatch, name, change, partial):
    state = tmp_path / "state"
    engine, journal = _journaled(state)
    before = _held(engine)
    faulty = FaultyOs(partial=partial)
    monkeypatch.setattr(journal_module, "os", faulty)
    faulty.failing = True
    with pytest.raises(ChangeLogError):
        change(engine)
    assert faulty.failures == 1
    assert _held(engine) == before, f"a refused {name} changed the state held"
    faulty.failing = False  # space is back: the same change goes through now
    change(engine)
    after = _held(engine)
    assert after != before
    journal.close(snapshot=False)
    monkeypatch.undo()
    engine, journal = _journaled(state)
    try:
        assert _held(engine) == after, "a restart holds what memory held"
        assert journal.recovery.torn == [], "no half frame was left in the journal"
    finally:
        journal.close()


def test_a_failed_fsync_under_sync_always_refuses_the_change_and_every_later_one(tmp_path, monkeypatch):
    state = tmp_path / "state"
    engine, journal = _journaled(state, sync="always")
    before = _held(engine)
    faulty = FaultyOs(writes=False, fsyncs=True)
    monkeypatch.setattr(journal_module, "os", faulty)
    faulty.failing = True
    with pytest.raises(ChangeLogError):
        engine.commit("a", _shapes(10))
    assert _held(engine) == before
    faulty.failing = False
    with pytest.raises(ChangeLogError):  # after a failed fsync nothing on disk can be trusted
        engine.commit("a", _shapes(11))
    assert _held(engine) == before
    journal.close(snapshot=False)
    monkeypatch.undo()
    engine, journal = _journaled(state)
    try:
        assert _held(engine) == before, "the refused commit is not replayed"
    finally:
        journal.close()


class _SnapshotFsyncFails(FaultyOs):
    """Only the fsync of the snapshot's temporary file fails (the rotation works)."""

    def fsync(self, fd):
        if os.readlink(f"/proc/self/fd/{fd}").endswith(".tmp"):
            self._fail()
        return os.fsync(fd)


def test_a_failed_snapshot_leaves_no_temporary_file(tmp_path, monkeypatch):
    state = tmp_path / "state"
    engine, journal = _journaled(state)
    faulty = _SnapshotFsyncFails()
    monkeypatch.setattr(journal_module, "os", faulty)
    with pytest.raises(OSError):
        journal.snapshot()
    monkeypatch.undo()
    assert faulty.failures == 1
    left = sorted(p.name for p in state.iterdir())
    assert not any(n.endswith(".tmp") for n in left), left
    journal.close()
    engine, journal = _journaled(state)
    try:
        assert sorted(engine.shapes("a")) == [1, 2, 3]
    finally:
        journal.close()


# -- a real server on a small disk ------------------------------------------------------

class SmallDisk:
    """A tmpfs of ``size`` at ``path``, mounted in a mount namespace of its own that a
    sleeping process holds; ``run`` and ``prefix`` reach it through nsenter. Nothing
    is mounted where the rest of the machine sees it."""

    def __init__(self, path, size: str) -> None:
        self.path = path
        path.mkdir()
        self.holder = subprocess.Popen(
            ["unshare", "--mount", "--propagation", "private", "sh", "-c",
             f"mount -t tmpfs -o size={size} etchguard-test {path} && echo mounted && exec sleep 300"],
            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        assert self.holder.stdout is not None
        if self.holder.stdout.readline().strip() != "mounted":
            self.holder.wait(10)
            reason = self.holder.stderr.read().strip() if self.holder.stderr else ""
            pytest.skip(f"cannot mount a small tmpfs here ({reason or 'unshare failed'})")
        self.prefix = ["nsenter", "-t", str(self.holder.pid), "-m", "--"]

    def run(self, *cmd: str) -> subprocess.CompletedProcess:
        return subprocess.run([*self.prefix, *cmd], capture_output=True, text=True, timeout=30)

    def fill(self) -> None:
        done = self.run("dd", "if=/dev/zero", f"of={self.path}/filler", "bs=4k")
        assert "No space left" in done.stderr, done.stderr

    def free(self) -> None:
        assert self.run("rm", f"{self.path}/filler").returncode == 0

    def files(self, folder) -> list[str]:
        return sorted(self.run("ls", "-A", str(folder)).stdout.split())

    def close(self) -> None:
        self.holder.kill()
        self.holder.wait()


@pytest.fixture
def small_disk(tmp_path):
    if not (shutil.which("unshare") and shutil.which("nsenter")):
        pytest.skip("unshare/nsenter are not installed: no private tmpfs for this test")
    disk = SmallDisk(tmp_path / "disk", "512k")
    yield disk
    disk.close()


def test_a_full_disk_refuses_changes_without_applying_them_and_a_restart_is_clear(small_disk):
    state = small_disk.path / "state"
    args = ("--state-dir", str(state), "--sync", "always", "--snapshot-every", "0")
    server = start_server(*args, metrics=False, prefix=small_disk.prefix)
    acked = []
    try:
        with server.client() as c:
            c.open_net("n", [GATE, DRIVER])
            acked += c.commit("n", [rect("M1", 0, 30, 20_200, 170)])
            small_disk.fill()
            refused = 0
            for k in range(400):  # the segment's last page takes a few more, then it is full
                shape = rect("M1", 100 + k, 0, 600 + k, 140)
                try:
                    acked += c.commit("n", [shape])
                except ServiceError as exc:
                    assert exc.code.name == "UNAVAILABLE" and "No space left" in exc.message
                    refused += 1
                    held = [s.id for s in c.get_net("n").shapes]
                    assert held == acked, "a refused commit is not held"
                    if refused == 5:
                        break
            assert refused == 5, "the disk never filled up"
    finally:
        assert server.stop() == 0
    assert not any(n.endswith(".tmp") for n in small_disk.files(state)), "the failed final snapshot left its temporary file"
    before = small_disk.files(state)
    started = subprocess.run([*small_disk.prefix, sys.executable, "-m", "etchguard.cli", "serve",
                              "--listen", "127.0.0.1:0", "--rules", str(DEMO_DECK), *args],
                             capture_output=True, text=True, timeout=60, cwd=REPO)
    assert started.returncode == 2, started.stderr
    assert "Traceback" not in started.stderr and "No space left on device" in started.stderr
    assert str(state) in started.stderr
    assert small_disk.files(state) == before, "a refused start leaves no file behind"
    small_disk.free()
    server = start_server(*args, metrics=False, prefix=small_disk.prefix)
    try:
        with server.client() as c:
            assert [s.id for s in c.get_net("n").shapes] == acked
            assert c.commit("n", [rect("M1", 0, 0, 300, 140)]) == [acked[-1] + 1]
    finally:
        assert server.stop() == 0
