"""Journal damage on start: what is cut, what is refused, what an operator may salvage.

The rule (etchguard._journal, "Damage on start"): only damage that is
indistinguishable from a write cut short - at the end of the newest segment, with no
whole record after it and no whole payload under a bad length - is cut. Anything
else refuses the start, naming the file and the offsets, unless the operator starts
with ``--keep-journal-before-damage``: then the records before the damage are
replayed and the damaged segment (and every later one) is set aside, never deleted.
A newest segment shorter than its header holds no record and never stops a start.
A snapshot rotation that cannot start its new segment leaves the journal on the old
one. The files are written by a real Journal and damaged here byte by byte.
"""

from __future__ import annotations

import errno
import os
import struct

import pytest

from etchguard import Engine, load_deck, loads_deck
from etchguard._journal import (JOURNAL_MAGIC, Journal, JournalError, file_header, iter_records,
                                segment_path, segments)
from etchguard.client import rect
from etchguard.server import convert
from grpc_fixtures import DEMO_DECK, DRIVER, GATE, start_server
from test_durability import _serve_fails

import etchguard._journal as journal_module

DECK = load_deck(DEMO_DECK)
TEXT = DEMO_DECK.read_text(encoding="utf-8")


def _shape(k: int):
    return convert.shapes(DECK, [rect("M1", k * 1000, 0, k * 1000 + 500, 140)], "s")


def _write_journal(state, commits: int) -> None:
    """deck, open, ``commits`` commits of one shape each, no snapshot."""
    engine = Engine()
    journal = Journal.open(state, engine, sync="none", snapshot_every=0)
    engine.load_deck(loads_deck(TEXT), TEXT)
    engine.open_net("n", convert.pins(DECK, [GATE, DRIVER]))
    for k in range(commits):
        engine.commit("n", _shape(k))
    journal.close(snapshot=False)


def _record_offsets(state) -> list[int]:
    return [off for _, off, _ in iter_records(state)]


def test_a_damaged_length_with_records_after_it_refuses_to_start(tmp_path):
    state = tmp_path / "state"
    _write_journal(state, commits=20)
    seg = segments(state)[-1][1]
    offsets = _record_offsets(state)
    data = bytearray(seg.read_bytes())
    struct.pack_into("<I", data, offsets[5], 1 << 30)  # the 6th record's length runs past the end
    seg.write_bytes(bytes(data))
    with pytest.raises(JournalError) as info:
        Journal.open(state, Engine())
    message = str(info.value)
    assert str(seg) in message and f"byte offset {offsets[5]}" in message
    assert f"byte offset {offsets[6]}" in message, "names where the next whole record starts"
    assert "--keep-journal-before-damage" in message
    assert seg.read_bytes() == bytes(data), "a refused start changes no file"
    assert "--keep-journal-before-damage" in _serve_fails(state)
    server = start_server("--state-dir", str(state), "--keep-journal-before-damage", metrics=False)
    try:
        cut = next(e for e in server.logs if e.get("msg") == "journal cut at damage; the rest set aside")
        assert cut["file"] == str(seg) and cut["offset"] == offsets[5]
        assert cut["records_set_aside"] == len(offsets) - 6
        with server.client() as c:  # deck, open, 3 commits kept
            assert [s.id for s in c.get_net("n").shapes] == [1, 2, 3]
    finally:
        assert server.stop() == 0


def test_a_damaged_crc_with_records_after_it_refuses_to_start(tmp_path):
    state = tmp_path / "state"
    _write_journal(state, commits=10)
    seg = segments(state)[-1][1]
    offsets = _record_offsets(state)
    data = bytearray(seg.read_bytes())
    data[offsets[4] + 4] ^= 0x01  # the 5th record's CRC field
    seg.write_bytes(bytes(data))
    with pytest.raises(JournalError) as info:
        Journal.open(state, Engine())
    assert f"byte offset {offsets[4]}" in str(info.value)


def test_a_whole_last_record_under_a_damaged_length_is_not_cut_as_torn(tmp_path):
    """The last frame's payload is all there (its CRC matches it) but its length field
    says it runs on: a write that finished, then got damaged; not a torn tail."""
    state = tmp_path / "state"
    _write_journal(state, commits=4)
    seg = segments(state)[-1][1]
    last = _record_offsets(state)[-1]
    data = bytearray(seg.read_bytes())
    length = struct.unpack_from("<I", data, last)[0]
    struct.pack_into("<I", data, last, length + 7)
    seg.write_bytes(bytes(data))
    with pytest.raises(JournalError) as info:
        Journal.open(state, Engine())
    assert f"byte offset {last}" in str(info.value)


def test_keep_journal_before_damage_replays_the_prefix_and_sets_the_rest_aside(tmp_path):
    state = tmp_path / "state"
    _write_journal(state, commits=20)
    seg = segments(state)[-1][1]
    offsets = _record_offsets(state)
    original = bytearray(seg.read_bytes())
    damaged = bytearray(original)
    struct.pack_into("<I", damaged, offsets[8], 1 << 30)
    seg.write_bytes(bytes(damaged))
    engine = Engine()
    journal = Journal.open(state, engine, keep_before_damage=True)
    try:
        # records: deck, open, 20 commits; the 9th record is the 7th commit
        assert sorted(engine.shapes("n")) == [1, 2, 3, 4, 5, 6]
        r = journal.recovery
        assert r.records == 8 and r.records_set_aside == len(offsets) - 9
        assert [p.name for p in r.set_aside] == [seg.name + ".damaged"]
        assert (state / (seg.name + ".damaged")).read_bytes() == bytes(damaged)
        assert engine.commit("n", _shape(30)) == [7]  # ids go on from the kept prefix
    finally:
        journal.close(snapshot=False)
    engine = Engine()
    journal = Journal.open(state, engine)  # the next start needs no option
    try:
        assert sorted(engine.shapes("n")) == [1, 2, 3, 4, 5, 6, 7]
    finally:
        journal.close()


def test_damage_in_an_older_segment_sets_aside_every_later_segment_too(tmp_path):
    state = tmp_path / "state"
    _write_journal(state, commits=5)
    engine = Engine()
    journal = Journal.open(state, engine, sync="none", snapshot_every=0)  # a second segment
    engine.commit("n", _shape(10))
    journal.close(snapshot=False)
    first, second = [p for _, p in segments(state)]
    offsets = [off for path, off, _ in iter_records(state) if path == first]
    data = bytearray(first.read_bytes())
    data[offsets[3] + 12] ^= 0xFF
    first.write_bytes(bytes(data))
    with pytest.raises(JournalError):
        Journal.open(state, Engine())
    engine = Engine()
    journal = Journal.open(state, engine, keep_before_damage=True)
    try:
        assert sorted(engine.shapes("n")) == [1]
        assert {p.name for p in journal.recovery.set_aside} == {first.name + ".damaged",
                                                                second.name + ".damaged"}
        assert len(list(iter_records(state))) == 3, "deck, open and the first commit; no more"
    finally:
        journal.close(snapshot=False)


@pytest.mark.parametrize("left", [0, 5, 11])
def test_a_newest_segment_shorter_than_its_header_does_not_stop_a_start(tmp_path, left):
    """A kill between creating a segment and writing its header (or a full disk while
    writing it) leaves 0-11 bytes: no record can be in there."""
    state = tmp_path / "state"
    _write_journal(state, commits=3)
    number = segments(state)[-1][0] + 1
    segment_path(state, number).write_bytes(file_header(JOURNAL_MAGIC)[:left])
    engine = Engine()
    journal = Journal.open(state, engine)
    try:
        assert sorted(engine.shapes("n")) == [1, 2, 3]
        assert engine.commit("n", _shape(9)) == [4]
    finally:
        journal.close(snapshot=False)
    engine = Engine()
    journal = Journal.open(state, engine)
    try:
        assert sorted(engine.shapes("n")) == [1, 2, 3, 4]
    finally:
        journal.close()


class _HeaderWritesFail:
    """``os`` for the journal module, except that writing a segment header fails as on
    a full disk."""

    def __init__(self) -> None:
        self.failed = 0

    def write(self, fd, data):
        if bytes(data) == file_header(JOURNAL_MAGIC):
            self.failed += 1
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return os.write(fd, data)

    def __getattr__(self, name):
        return getattr(os, name)


def test_a_rotation_that_cannot_start_its_segment_keeps_writing_the_old_one(tmp_path, monkeypatch):
    state = tmp_path / "state"
    engine = Engine()
    journal = Journal.open(state, engine, sync="none", snapshot_every=0)
    engine.load_deck(loads_deck(TEXT), TEXT)
    engine.open_net("n", convert.pins(DECK, [GATE, DRIVER]))
    engine.commit("n", _shape(0))
    faulty = _HeaderWritesFail()
    monkeypatch.setattr(journal_module, "os", faulty)
    with pytest.raises(JournalError):
        journal.snapshot()
    monkeypatch.undo()
    assert faulty.failed == 1
    assert [n for n, _ in segments(state)] == [1], "no second, headerless segment is left"
    assert not (state / "snapshot.pb").exists()
    engine.commit("n", _shape(1))  # still journaled, in the old segment
    engine.commit("n", _shape(2))
    journal.close(snapshot=False)
    engine = Engine()
    journal = Journal.open(state, engine)
    try:
        assert sorted(engine.shapes("n")) == [1, 2, 3]
    finally:
        journal.close()


def test_random_damage_never_silently_loses_more_than_a_torn_last_frame(tmp_path):
    """Seeded trials: one byte of a record frame (length, CRC or payload) changed at
    random. A start either refuses naming the file, or cuts a torn last frame and
    keeps every other record; it never comes up with fewer records silently."""
    import random

    pristine = tmp_path / "pristine"
    _write_journal(pristine, commits=30)
    seg = segments(pristine)[-1][1]
    original = seg.read_bytes()
    offsets = _record_offsets(pristine)
    total = len(offsets)
    rng = random.Random(2024)
    outcomes = {"refused": 0, "torn": 0}
    for trial in range(120):
        state = tmp_path / f"t{trial}"
        state.mkdir()
        data = bytearray(original)
        at = rng.randrange(offsets[0], len(data))
        if trial % 3 == 0:  # aim at a length field: the damage that used to pass as torn
            at = rng.choice(offsets) + rng.randrange(4)
        elif trial % 10 == 1:  # a payload byte of the last record: a torn write looks the same
            at = rng.randrange(offsets[-1] + 8, len(data))
        data[at] ^= rng.randrange(1, 256)
        (state / seg.name).write_bytes(bytes(data))
        engine = Engine()
        try:
            journal = Journal.open(state, engine, snapshot_every=0)
        except JournalError as exc:
            assert str(state / seg.name) in str(exc)
            outcomes["refused"] += 1
            continue
        try:
            assert journal.recovery.torn, f"trial {trial}: damage at {at} passed unnoticed"
            assert at >= offsets[-1], f"trial {trial}: damage at {at}, before the last record, was cut"
            assert journal.recovery.records == total - 1
            outcomes["torn"] += 1
        finally:
            journal.close(snapshot=False)
    assert outcomes["refused"] >= 100 and outcomes["torn"] >= 5, outcomes


def test_a_journal_cut_anywhere_starts_with_every_whole_record(tmp_path):
    """A torn write at any byte: the whole frames before the cut are replayed."""
    pristine = tmp_path / "pristine"
    _write_journal(pristine, commits=12)
    seg = segments(pristine)[-1][1]
    original = seg.read_bytes()
    offsets = _record_offsets(pristine) + [len(original)]
    for cut in range(offsets[0], len(original) + 1, 7):
        state = tmp_path / f"c{cut}"
        state.mkdir()
        (state / seg.name).write_bytes(original[:cut])
        engine = Engine()
        journal = Journal.open(state, engine, snapshot_every=0)
        try:
            whole = sum(1 for k in range(len(offsets) - 1) if offsets[k + 1] <= cut)
            assert journal.recovery.records == whole, f"cut at {cut}"
        finally:
            journal.close(snapshot=False)


def test_a_snapshot_without_nets_starts_and_zeros_after_it_are_refused(tmp_path):
    """A snapshot of a deck alone (or a deck and blockages) ends with an empty end frame
    (SnapshotEnd of no nets serializes to no bytes), which is a frame, not damage; a
    snapshot that zeros follow is still refused."""
    state = tmp_path / "state"
    engine = Engine()
    journal = Journal.open(state, engine, sync="none", snapshot_every=0)
    engine.load_deck(load_deck(DEMO_DECK), DEMO_DECK.read_text(encoding="utf-8"))
    engine.declare_blockage(2, (0, 0, 100, 100))
    journal.close(snapshot=True)
    again = Engine()
    Journal.open(state, again, sync="none", snapshot_every=0).close(snapshot=False)
    assert again.deck_text is not None and again.export_state(lambda: None)[0].blockages == {
        1: (2, (0, 0, 100, 100))}
    with open(state / "snapshot.pb", "ab") as f:
        f.write(bytes(16))
    with pytest.raises(JournalError):
        Journal.open(state, Engine(), sync="none", snapshot_every=0)
