"""The journal: every acknowledged change on disk before its reply, and a fast restart.

A server with ``--state-dir DIR`` keeps there:

* ``journal-NNNNNNNN.log`` - segments of the journal, numbered upwards. Each starts
  with a 12-byte header (8 bytes of magic, ``JOURNAL_MAGIC``; a little-endian uint32
  format version, ``FORMAT_VERSION``), then frames: uint32 payload length, uint32
  CRC-32 of the payload (zlib), the payload, one ``etchguard.v1.JournalRecord``
  (proto/etchguard/v1/journal.proto). Records come in the order the engine applied
  them to each net (the engine records under the net's lock, see ``_changelog``).
* ``snapshot.pb`` - the whole state at one instant: the same header with
  ``SNAPSHOT_MAGIC``, a ``SnapshotHeader`` frame (it names the first segment *not*
  in the snapshot), one ``NetImage`` frame per net, a ``SnapshotEnd`` frame. Written
  to a temporary file, fsynced, renamed over the old one, the folder fsynced; then
  the segments it covers are deleted.
* ``LOCK`` - held (flock) by the one server using the folder.

Every file is created 0600 and the folder 0700: they hold every net of a design. A
folder that already exists readable by others is used as it is, with a warning.

Start = snapshot (if any) + replay of the segments from the one it names, in order.
Replay checks that every shape gets back the id it had; a blockage is declared again
under the id its record names (picked or asked for alike), which the engine refuses
when a blockage already holds it.

Damage on start (a frame whose length runs past the end, whose CRC fails, or whose
length is zero with data after it):
* cut - only a *torn tail*: the damage is in the newest segment, no whole record
  frame follows it anywhere in the file (``next_record_frame`` searches every offset
  after it), and the bytes to the end do not match the frame's CRC (which would make
  it a whole record under a damaged length). That is what a write cut short by a
  crash leaves, so no acknowledged record is in those bytes: logged (``torn journal
  tail truncated``, file, offset, bytes) and truncated away;
* refused - any other damage (a whole record after it, a whole payload under a bad
  length, damage in an older segment), a gap in the numbering, a record the engine
  refuses: the server does not start, and the message names the file, the damaged
  offset and where the next whole record starts. Cutting there would drop
  acknowledged records, so that takes the operator's word:
* ``keep_before_damage`` (``etchguard serve --keep-journal-before-damage``): the
  records before the damage are replayed (a consistent state: the journal as it was
  up to one record), the damaged segment is copied whole to ``<name>.damaged`` and
  cut at the damage, every later segment is renamed ``<name>.damaged``, nothing is
  deleted; the log (``journal cut at damage; the rest set aside``) names the files
  and counts the whole records set aside;
* a newest segment shorter than its header (a kill between creating it and writing
  the header, a full disk) holds no record: removed (logged), and its number reused;
* another magic or format version: refused, naming the file and both versions.

Sync policy (``SyncPolicy``), what an acknowledged change survives:
* ``always`` - fsync before the reply (commits waiting at once share one fsync);
  survives a crash of the process and of the machine (power loss).
* ``batch`` - every record is written to the OS (``os.write``) before the reply and a
  background flusher fsyncs at most every ``interval_ms`` (default 50 ms). Survives a
  crash or kill of the process entirely; a crash of the machine loses at most the
  acknowledged changes of the last ``interval_ms`` (plus the fsync's own duration).
* ``none`` - written to the OS before the reply, never fsynced except at segment
  rotation and shutdown: survives a process crash; a machine crash loses what the OS
  had not written back (its own writeback policy, typically tens of seconds).
"""

from __future__ import annotations

import contextlib
import fcntl
import logging
import os
import re
import stat
import struct
import threading
import time
import zlib
from collections.abc import Iterator
from dataclasses import dataclass, field
from enum import StrEnum
from pathlib import Path
from typing import NoReturn

from ._changelog import (
    BlockageDeclared,
    BlockageRemoved,
    Change,
    ChangeLogError,
    DeckLoaded,
    EngineImage,
    NetClosed,
    NetImage,
    NetOpened,
    ShapesCommitted,
    ShapesRemoved,
)
from ._errors import EtchguardError
from ._nets import Pin, Shape
from ._rules import loads_deck
from .v1 import journal_pb2 as jpb

log = logging.getLogger("etchguard.journal")

JOURNAL_MAGIC = b"EGJOURN\n"
SNAPSHOT_MAGIC = b"EGSNAPS\n"
FORMAT_VERSION = 1
_HEADER = struct.Struct("<8sI")
_FRAME = struct.Struct("<II")  # payload length, crc32(payload)
SNAPSHOT_NAME = "snapshot.pb"
FILE_MODE, DIR_MODE = 0o600, 0o700
_SEGMENT = re.compile(r"^journal-(\d{8})\.log$")


class JournalError(EtchguardError):
    """The state folder cannot be used: damage, another format version, another server."""


class SyncPolicy(StrEnum):
    ALWAYS = "always"
    BATCH = "batch"
    NONE = "none"


# -- frames ----------------------------------------------------------------------------

def frame(payload: bytes) -> bytes:
    return _FRAME.pack(len(payload), zlib.crc32(payload)) + payload


def file_header(magic: bytes) -> bytes:
    return _HEADER.pack(magic, FORMAT_VERSION)


def check_header(path: Path, data: bytes, magic: bytes, what: str) -> None:
    if len(data) < _HEADER.size:
        raise JournalError(f"too short for a {what} header ({len(data)} bytes)", str(path))
    found, version = _HEADER.unpack_from(data)
    if found != magic:
        raise JournalError(f"not an etchguard {what} (magic {found!r}, expected {magic!r})", str(path))
    if version != FORMAT_VERSION:
        raise JournalError(f"written in {what} format version {version}; this etchguard reads "
                           f"version {FORMAT_VERSION} only. Start from a matching etchguard, or "
                           f"move the state folder aside to start empty", str(path))


@dataclass
class Damage:
    """A frame that does not read (bad length, CRC mismatch), and what follows it."""

    path: Path
    offset: int  # byte offset of the damaged frame
    size: int  # bytes from there to the end of the file
    reason: str
    next_record: int | None  # byte offset of the first whole record frame after it
    whole_payload: bool  # the bytes to the end match the frame's CRC: only its length is bad

    @property
    def torn(self) -> bool:
        """Nothing whole after the damage, and no whole payload under it: what a write
        cut short by a crash leaves, so nothing acknowledged can be in these bytes."""
        return self.next_record is None and not self.whole_payload

    def refusal(self, later_segments: int, records_after: int) -> str:
        if self.next_record is not None:
            after = (f"a whole record follows at byte offset {self.next_record} "
                     f"({records_after} readable from there in this segment")
            after += f", and {later_segments} later segment(s))" if later_segments else ")"
        elif self.whole_payload:
            after = "the frame's payload is whole (its CRC matches), only its length is wrong"
        else:
            after = f"{later_segments} later segment(s) follow it"
        return (f"damaged frame at byte offset {self.offset} ({self.reason}); {after}: this is "
                f"damage, not a torn write, and cutting it would drop acknowledged records. "
                f"Refusing to start. To keep the records before the damage and set this segment "
                f"and every later one aside (renamed *.damaged, not deleted), start once with "
                f"--keep-journal-before-damage")


# The first byte of a serialized JournalRecord: the tag of its one `change` field
# (field numbers 1-7, wire type 2, length-delimited).
_RECORD_TAGS = frozenset((number << 3) | 2 for number in range(1, 8))


def _one_field_fills(data: bytes, body: int, length: int) -> bool:
    """The payload at ``body`` is one length-delimited field that fills exactly
    ``length`` bytes, as every JournalRecord does (a cheap test before a CRC)."""
    if data[body] not in _RECORD_TAGS:
        return False
    value = shift = 0
    for k in range(body + 1, min(body + 11, body + length)):
        byte = data[k]
        value |= (byte & 0x7F) << shift
        shift += 7
        if byte < 0x80:
            return value == body + length - k - 1
    return False


def next_record_frame(data: bytes, start: int) -> int | None:
    """The offset of the first whole journal record frame at or after ``start``: its
    length fits, its payload is one record field filling it, and its CRC matches.
    A random match is about as likely as a CRC-32 collision among candidates that
    already passed the length and field tests."""
    end = len(data)
    unpack = _FRAME.unpack_from
    for p in range(start, end - _FRAME.size):
        length, crc = unpack(data, p)
        body = p + _FRAME.size
        if 0 < length <= end - body and _one_field_fills(data, body, length) \
                and zlib.crc32(data[body:body + length]) == crc:
            return p
    return None


def read_frames(path: Path, data: bytes, start: int = _HEADER.size, records: bool = True,
                empty_ok: bool = False) -> tuple[list[tuple[int, bytes]], Damage | None]:
    """The frames from ``start`` as (offset, payload), up to the first damaged one,
    which is described (``records``: the frames are journal records, so what follows
    the damage is searched for whole records; ``empty_ok``: an empty payload is a
    frame, as a snapshot's end frame of an engine without nets serializes empty)."""
    frames: list[tuple[int, bytes]] = []
    offset, end = start, len(data)
    while offset < end:
        if end - offset < _FRAME.size:
            reason = f"{end - offset} bytes, less than a frame header"
            length = crc = 0
        else:
            length, crc = _FRAME.unpack_from(data, offset)
            frame_end = offset + _FRAME.size + length
            if length == 0 and not empty_ok:  # no record is empty; zeros to the end are a file the OS extended
                reason = "zero frame length"
            elif frame_end > end:
                reason = f"frame of {length} bytes runs past the end ({end - offset - _FRAME.size} there)"
            elif zlib.crc32(data[offset + _FRAME.size:frame_end]) != crc:
                reason = "CRC mismatch"
            else:
                frames.append((offset, data[offset + _FRAME.size:frame_end]))
                offset = frame_end
                continue
        body = offset + _FRAME.size
        whole = body < end and length != end - body and zlib.crc32(data[body:]) == crc
        following = next_record_frame(data, offset + 1) if records else None
        return frames, Damage(path, offset, end - offset, reason, following, whole)
    return frames, None


def _private(path: Path):
    """``open(path, "wb")`` on a new file of mode FILE_MODE (one left by a crash is
    replaced, not reused with whatever mode it had)."""
    path.unlink(missing_ok=True)
    return os.fdopen(os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, FILE_MODE), "wb")


def _write_all(fd: int, data: bytes) -> None:
    view = memoryview(data)
    while view:
        view = view[os.write(fd, view):]


def _fsync_dir(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


# -- changes <-> records ---------------------------------------------------------------

def _columns_into(cols: jpb.ShapeColumns, shapes) -> None:
    cols.layer.extend([s.layer for s in shapes])
    cols.xlo.extend([s.rect[0] for s in shapes])
    cols.ylo.extend([s.rect[1] for s in shapes])
    cols.xhi.extend([s.rect[2] for s in shapes])
    cols.yhi.extend([s.rect[3] for s in shapes])


def _shapes_of(cols: jpb.ShapeColumns) -> list[Shape]:
    return [Shape(layer, (a, b, c, d)) for layer, a, b, c, d in
            zip(cols.layer, cols.xlo, cols.ylo, cols.xhi, cols.yhi)]


def _pin_into(msg: jpb.PinImage, pin: Pin) -> None:
    msg.name = pin.name
    msg.layer = pin.layer
    msg.rects.extend([v for r in pin.rects for v in r])
    msg.gate_area.update(pin.gate_area)
    msg.diff_area = pin.diff_area
    msg.cell_area.update(pin.cell_area)
    msg.cell_side_area.update(pin.cell_side_area)
    msg.rect_layers.extend(pin.rect_layers)
    for (measure, step, oxide), ratio in pin.block_car.items():
        msg.block_car.add(step=step, measure=measure, oxide=oxide, ratio=ratio)


def _pin_of(msg: jpb.PinImage) -> Pin:
    v = list(msg.rects)
    rects = tuple(tuple(v[i:i + 4]) for i in range(0, len(v), 4))
    return Pin(msg.name, msg.layer, rects, dict(msg.gate_area), msg.diff_area,
               dict(msg.cell_area), dict(msg.cell_side_area),
               {(b.measure, b.step, b.oxide): b.ratio for b in msg.block_car}, tuple(msg.rect_layers))


def encode(change: Change) -> bytes:
    """One change as a serialized JournalRecord."""
    rec = jpb.JournalRecord()
    if isinstance(change, ShapesCommitted):
        m = rec.shapes_committed
        m.net, m.first_id = change.net, change.first_id
        _columns_into(m.shapes, change.shapes)
    elif isinstance(change, ShapesRemoved):
        m = rec.shapes_removed
        m.net = change.net
        m.ids.extend(change.ids)
    elif isinstance(change, NetOpened):
        m = rec.net_opened
        m.net, m.first_id = change.net, change.first_id
        for p in change.pins:
            _pin_into(m.pins.add(), p)
        if change.layer_range is not None:
            m.has_layer_range = True
            m.lowest, m.highest = change.layer_range
        _columns_into(m.shapes, change.shapes)
        m.shapes.SetInParent()
    elif isinstance(change, NetClosed):
        rec.net_closed.net = change.net
    elif isinstance(change, DeckLoaded):
        if change.text is None:
            raise ChangeLogError("a deck loaded without its TOML text cannot be journaled", "deck")
        rec.deck_loaded.toml = change.text
    elif isinstance(change, BlockageDeclared):
        m = rec.blockage_declared
        m.blockage_id, m.layer = change.blockage_id, change.layer
        m.xlo, m.ylo, m.xhi, m.yhi = change.rect
    elif isinstance(change, BlockageRemoved):
        rec.blockage_removed.blockage_id = change.blockage_id
    else:
        raise ChangeLogError(f"no journal record for {type(change).__name__}", "change")
    return rec.SerializeToString()


def _expect_ids(got: list[int], first: int, where: str) -> None:
    want = list(range(first, first + len(got)))
    if got != want:
        raise JournalError(f"replay gave shape ids {got[:3]}..., the journal says {want[:3]}...; "
                           "the journal does not match this engine", where)


def apply(engine, rec: jpb.JournalRecord, where: str) -> str | None:
    """Replay one record into ``engine``; returns the deck text when it loads one."""
    kind = rec.WhichOneof("change")
    try:
        if kind == "shapes_committed":
            m = rec.shapes_committed
            _expect_ids(engine.commit(m.net, _shapes_of(m.shapes)), m.first_id, where)
        elif kind == "shapes_removed":
            engine.remove(rec.shapes_removed.net, list(rec.shapes_removed.ids))
        elif kind == "net_opened":
            m = rec.net_opened
            layer_range = (m.lowest, m.highest) if m.has_layer_range else None
            ids = engine.open_net(m.net, [_pin_of(p) for p in m.pins], layer_range, _shapes_of(m.shapes))
            _expect_ids(ids, m.first_id, where)
        elif kind == "net_closed":
            engine.close_net(rec.net_closed.net)
        elif kind == "deck_loaded":
            text = rec.deck_loaded.toml
            engine.load_deck(loads_deck(text, f"{where} deck"), text)
            return text
        elif kind == "blockage_declared":
            m = rec.blockage_declared
            # the id as recorded, picked or asked: the engine refuses one held already
            engine.declare_blockage(m.layer, (m.xlo, m.ylo, m.xhi, m.yhi), m.blockage_id)
        elif kind == "blockage_removed":
            engine.remove_blockage(rec.blockage_removed.blockage_id)
        else:
            raise JournalError("a record without a change (written by a newer version?)", where)
    except JournalError:
        raise
    except EtchguardError as exc:
        raise JournalError(f"the engine refuses this record on replay: {exc}", where) from None
    return None


# -- snapshots ----------------------------------------------------------------------------

def write_snapshot(directory: Path, image: EngineImage, covers_segments_below: int,
                   version: str) -> Path:
    """Write ``snapshot.pb`` atomically (temp file, fsync, rename, fsync the folder)."""
    final = directory / SNAPSHOT_NAME
    tmp = directory / (SNAPSHOT_NAME + ".tmp")
    header = jpb.SnapshotHeader(covers_segments_below=covers_segments_below,
                                has_deck=image.deck_text is not None, deck_toml=image.deck_text or "",
                                next_blockage_id=image.next_blockage_id, net_count=len(image.nets),
                                written_by=version)
    for bid, (layer, (xlo, ylo, xhi, yhi)) in sorted(image.blockages.items()):
        header.blockages.add(blockage_id=bid, layer=layer, xlo=xlo, ylo=ylo, xhi=xhi, yhi=yhi)
    try:
        _write_image(tmp, header, image)
        os.replace(tmp, final)
    except BaseException:
        tmp.unlink(missing_ok=True)  # a full disk must not keep a half image on it
        raise
    _fsync_dir(directory)
    return final


def _write_image(tmp: Path, header: jpb.SnapshotHeader, image: EngineImage) -> None:
    shapes = 0
    with _private(tmp) as f:
        f.write(file_header(SNAPSHOT_MAGIC))
        f.write(frame(header.SerializeToString()))
        for net in image.nets:
            msg = jpb.NetImage(net=net.name, next_id=net.next_id)
            for p in net.pins:
                _pin_into(msg.pins.add(), p)
            if net.layer_range is not None:
                msg.has_layer_range = True
                msg.lowest, msg.highest = net.layer_range
            cols = msg.shapes
            items = sorted(net.shapes.items())
            cols.id.extend([sid for sid, _ in items])
            cols.layer.extend([v[0] for _, v in items])
            cols.xlo.extend([v[1] for _, v in items])
            cols.ylo.extend([v[2] for _, v in items])
            cols.xhi.extend([v[3] for _, v in items])
            cols.yhi.extend([v[4] for _, v in items])
            shapes += len(items)
            f.write(frame(msg.SerializeToString()))
        f.write(frame(jpb.SnapshotEnd(net_count=len(image.nets), shape_count=shapes).SerializeToString()))
        f.flush()
        os.fsync(f.fileno())


def read_snapshot(path: Path) -> tuple[EngineImage, int]:
    """The image a snapshot holds and the first segment number it does not cover."""
    data = path.read_bytes()
    check_header(path, data, SNAPSHOT_MAGIC, "snapshot")
    frames, damage = read_frames(path, data, records=False, empty_ok=True)
    if damage is not None:  # a snapshot is renamed into place whole: no torn tail
        raise JournalError(f"damaged frame at byte offset {damage.offset} ({damage.reason})", str(path))
    if len(frames) < 2:
        raise JournalError("a snapshot needs a header and an end frame", str(path))
    try:
        header = jpb.SnapshotHeader.FromString(frames[0][1])
        end = jpb.SnapshotEnd.FromString(frames[-1][1])
        nets = []
        for _offset, payload in frames[1:-1]:
            m = jpb.NetImage.FromString(payload)
            c = m.shapes
            shapes = {sid: (layer, a, b, cc, d) for sid, layer, a, b, cc, d in
                      zip(c.id, c.layer, c.xlo, c.ylo, c.xhi, c.yhi)}
            nets.append(NetImage(m.net, tuple(_pin_of(p) for p in m.pins),
                                 (m.lowest, m.highest) if m.has_layer_range else None, shapes, m.next_id))
    except Exception as exc:  # noqa: BLE001 - a protobuf decode error, any kind
        raise JournalError(f"a snapshot frame does not decode: {exc}", str(path)) from None
    if len(nets) != header.net_count or end.net_count != header.net_count:
        raise JournalError(f"snapshot lists {header.net_count} nets but holds {len(nets)}", str(path))
    blockages = {b.blockage_id: (b.layer, (b.xlo, b.ylo, b.xhi, b.yhi)) for b in header.blockages}
    image = EngineImage(header.deck_toml if header.has_deck else None, tuple(nets), blockages,
                        header.next_blockage_id or 1)
    return image, header.covers_segments_below


# -- recovery ---------------------------------------------------------------------------

@dataclass
class Recovery:
    """What a start found in the state folder."""

    snapshot: Path | None = None
    snapshot_nets: int = 0
    segments: list[Path] = field(default_factory=list)
    records: int = 0
    torn: list[Damage] = field(default_factory=list)  # torn tails cut
    set_aside: list[Path] = field(default_factory=list)  # files renamed *.damaged (keep_before_damage)
    records_set_aside: int = 0  # whole records found in them after the damage (at least)
    deck_text: str | None = field(default=None, repr=False)  # the deck in force after recovery
    next_segment: int = 1
    seconds: float = 0.0


def segment_path(directory: Path, number: int) -> Path:
    return directory / f"journal-{number:08d}.log"


def segments(directory: Path) -> list[tuple[int, Path]]:
    found = []
    for p in directory.iterdir():
        m = _SEGMENT.match(p.name)
        if m:
            found.append((int(m.group(1)), p))
    return sorted(found)


def _count_records(path: Path, data: bytes | None = None, start: int = _HEADER.size) -> int:
    """Whole records readable in a segment from ``start`` up to any damage."""
    try:
        data = path.read_bytes() if data is None else data
    except OSError:
        return 0
    return len(read_frames(path, data, start, records=False)[0]) if len(data) >= start else 0


def _aside_name(path: Path) -> Path:
    target = path.with_name(path.name + ".damaged")
    n = 1
    while target.exists():
        target = path.with_name(f"{path.name}.damaged.{n}")
        n += 1
    return target


def _set_aside(directory: Path, damage: Damage, data: bytes, later: list[Path], out: Recovery) -> None:
    """Keep the damaged segment's records before ``damage`` and set the rest aside: a
    copy of the whole damaged file and every later segment renamed ``*.damaged``."""
    copy = _aside_name(damage.path)
    with _private(copy) as f:
        f.write(data)
        f.flush()
        os.fsync(f.fileno())
    with open(damage.path, "r+b") as f:
        f.truncate(damage.offset)
        os.fsync(f.fileno())
    out.set_aside.append(copy)
    if damage.next_record is not None:
        out.records_set_aside += _count_records(damage.path, data, damage.next_record)
    for path in later:
        out.records_set_aside += _count_records(path)
        target = _aside_name(path)
        os.replace(path, target)
        out.set_aside.append(target)
    _fsync_dir(directory)
    log.warning("journal cut at damage; the rest set aside", extra={"fields": {
        "file": str(damage.path), "offset": damage.offset, "reason": damage.reason,
        "records_set_aside": out.records_set_aside, "set_aside": [str(p) for p in out.set_aside]}})


def _replay(engine, path: Path, frames: list[tuple[int, bytes]], out: Recovery) -> None:
    for offset, payload in frames:
        where = f"{path}: record at byte offset {offset}"
        try:
            rec = jpb.JournalRecord.FromString(payload)
        except Exception as exc:  # noqa: BLE001 - a protobuf decode error
            raise JournalError(f"does not decode: {exc}", where) from None
        text = apply(engine, rec, where)
        if text is not None:
            out.deck_text = text
        out.records += 1


def recover(directory: Path, engine, keep_before_damage: bool = False) -> Recovery:
    """Rebuild ``engine`` (empty, without a change log) from the folder's snapshot and
    journal, by the rules of the module docstring ("Damage on start")."""
    t0 = time.perf_counter()
    out = Recovery()
    snap = directory / SNAPSHOT_NAME
    first = 1
    if snap.exists():
        image, first = read_snapshot(snap)
        engine.restore_state(image)
        out.snapshot, out.snapshot_nets, out.deck_text = snap, len(image.nets), image.deck_text
    found = segments(directory)
    for number, path in found:
        if number < first:  # covered by the snapshot; left by a stop before their deletion
            path.unlink()
    found = [(n, p) for n, p in found if n >= first]
    out.next_segment = (found[-1][0] + 1) if found else first
    for i, (number, path) in enumerate(found):
        expected = first if i == 0 else found[i - 1][0] + 1
        if number != expected:
            raise JournalError(f"journal segment {expected:08d} is missing before this one", str(path))
        data = path.read_bytes()
        last = i == len(found) - 1
        if last and len(data) < _HEADER.size:  # created, header not (fully) written: no record
            log.warning("unfinished journal segment removed", extra={"fields": {
                "file": str(path), "bytes": len(data)}})
            path.unlink()
            _fsync_dir(directory)
            out.next_segment = number
            break
        check_header(path, data, JOURNAL_MAGIC, "journal")
        frames, damage = read_frames(path, data)
        if damage is not None and not (last and damage.torn) and not keep_before_damage:
            later = len(found) - i - 1
            after = _count_records(path, data, damage.next_record) if damage.next_record else 0
            raise JournalError(damage.refusal(later, after), str(path))
        _replay(engine, path, frames, out)
        out.segments.append(path)
        if damage is None:
            continue
        if last and damage.torn:
            log.warning("torn journal tail truncated", extra={"fields": {
                "file": str(path), "offset": damage.offset, "dropped_bytes": damage.size,
                "reason": damage.reason}})
            with open(path, "r+b") as f:
                f.truncate(damage.offset)
                os.fsync(f.fileno())
            out.torn.append(damage)
        else:
            _set_aside(directory, damage, data, [p for _, p in found[i + 1:]], out)
            out.next_segment = number + 1
            break
    out.seconds = time.perf_counter() - t0
    return out


# -- the writer ---------------------------------------------------------------------------

class Journal:
    """The change log of a server with a state folder (a ``ChangeLog`` for the engine).

    ``Journal.open(directory, engine, ...)`` locks the folder, recovers the engine,
    starts a new segment and attaches itself; ``close()`` takes a final snapshot and
    stops. ``record`` is called by the engine under the lock of the change's net.
    """

    def __init__(self, directory: Path, engine, recovery: Recovery, lock_fd: int,
                 sync: SyncPolicy, interval_ms: float, snapshot_every: int, version: str) -> None:
        self.directory = directory
        self.engine = engine
        self.recovery = recovery
        self.sync = SyncPolicy(sync)
        self.interval_s = interval_ms / 1000.0
        self.snapshot_every = snapshot_every
        self.version = version
        self._lock_fd = lock_fd
        self._write_lock = threading.Lock()  # one append at a time, in record order
        self._sync_cond = threading.Condition()
        self._syncing = False
        self._written = 0  # bytes appended since start (all segments)
        self._synced = 0  # bytes known on disk
        self._segment_base = 0  # self._written when the current segment was started
        self._since_snapshot = recovery.records
        self._failed: BaseException | None = None
        self._closed = False
        self._segment = recovery.next_segment
        self._fd = self._new_segment(self._segment)
        self._snapshot_lock = threading.Lock()
        self._wake = threading.Event()
        self._stop = threading.Event()
        self.snapshots_written = 0
        self._threads = [threading.Thread(target=self._snapshotter, name="etchguard-snapshot", daemon=True)]
        if self.sync is SyncPolicy.BATCH:
            self._threads.append(threading.Thread(target=self._flusher, name="etchguard-flush", daemon=True))
        for t in self._threads:
            t.start()
        if snapshot_every and recovery.records >= snapshot_every:
            self._wake.set()  # a long replay: the next start should not repeat it

    @classmethod
    def open(cls, directory: Path, engine, *, sync: SyncPolicy | str = SyncPolicy.BATCH,
             interval_ms: float = 50.0, snapshot_every: int = 100_000, version: str = "",
             keep_before_damage: bool = False) -> Journal:
        """``keep_before_damage``: the operator's choice to start from the records before
        damage that is not a torn tail (see "Damage on start") instead of refusing."""
        directory = Path(directory)
        try:
            directory.mkdir(mode=DIR_MODE, parents=True, exist_ok=True)
            lock_fd = os.open(directory / "LOCK", os.O_RDWR | os.O_CREAT, FILE_MODE)
            mode = stat.S_IMODE(directory.stat().st_mode)
        except OSError as exc:
            raise JournalError(f"cannot use the state folder: {exc.strerror}", str(directory)) from None
        if mode & 0o077:
            log.warning("state folder readable by others", extra={"fields": {
                "state_dir": str(directory), "mode": oct(mode), "advice": "chmod 700"}})
        try:
            fcntl.flock(lock_fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(lock_fd)
            raise JournalError("another etchguard server uses this state folder", str(directory)) from None
        try:
            recovery = recover(directory, engine, keep_before_damage)
            journal = cls(directory, engine, recovery, lock_fd, SyncPolicy(sync), interval_ms,
                          snapshot_every, version)
        except OSError as exc:  # a full disk or an I/O error while recovering: no traceback
            os.close(lock_fd)
            where = exc.filename or directory
            raise JournalError(f"cannot recover the state: {exc.strerror}", str(where)) from None
        except BaseException:
            os.close(lock_fd)
            raise
        engine.changelog = journal
        return journal

    def _new_segment(self, number: int) -> int:
        """Create segment ``number`` with its header, fsynced; on any failure nothing is
        left behind (no file, no descriptor) and JournalError names the file."""
        path = segment_path(self.directory, number)
        try:
            fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_APPEND, FILE_MODE)
        except OSError as exc:
            raise JournalError(f"cannot create a journal segment: {exc.strerror}", str(path)) from None
        try:
            _write_all(fd, file_header(JOURNAL_MAGIC))
            os.fsync(fd)
            _fsync_dir(self.directory)
        except OSError as exc:
            os.close(fd)
            path.unlink(missing_ok=True)
            raise JournalError(f"cannot start a journal segment: {exc.strerror}", str(path)) from None
        return fd

    # -- ChangeLog --------------------------------------------------------------------

    def record(self, change: Change) -> None:
        data = frame(encode(change))
        with self._write_lock:
            if self._failed is not None or self._closed:
                raise ChangeLogError("the journal is closed or failed earlier; changes are refused "
                                     f"({self._failed or 'closed'})", "journal")
            try:
                _write_all(self._fd, data)
            except OSError as exc:
                self._refuse_write(exc)
            self._written += len(data)
            mark = self._written
            self._since_snapshot += 1
            if self.snapshot_every and self._since_snapshot >= self.snapshot_every:
                self._wake.set()
        if self.sync is SyncPolicy.ALWAYS:
            self._sync_to(mark)

    def _refuse_write(self, exc: OSError) -> NoReturn:
        """A record could not be written (whole): cut the segment back to its last whole
        record, so the next one does not follow half a frame, and refuse the change (the
        engine applies a change only once it is recorded). If even the cut fails, no
        later record can be trusted to land after whole ones: refuse all from now on."""
        try:
            os.ftruncate(self._fd, _HEADER.size + self._written - self._segment_base)
        except OSError as cut_error:
            self._failed = cut_error
            log.error("journal write failed and could not be undone; changes are refused from "
                      "now on", extra={"fields": {"error": str(exc), "undo_error": str(cut_error)}})
            raise ChangeLogError(f"the journal cannot be written ({exc.strerror}); this change is "
                                 "refused, and so are later ones until a restart", "journal") from None
        log.error("journal write failed; the change is refused", extra={"fields": {
            "error": str(exc), "segment": self._segment}})
        raise ChangeLogError(f"the journal cannot be written ({exc.strerror}); this change is "
                             "refused and not applied", "journal") from None

    # -- syncing ----------------------------------------------------------------------

    def _sync_to(self, mark: int) -> None:
        """Return once the bytes up to ``mark`` are fsynced; one thread fsyncs for all
        that wait (group commit), the others wait on its result."""
        cond = self._sync_cond
        with cond:
            while self._synced < mark:
                if self._failed is not None:  # an fsync failed: nothing unsynced is trusted
                    raise ChangeLogError(f"the journal cannot be synced ({self._failed}); "
                                         "changes are refused until a restart", "journal")
                if self._syncing:
                    cond.wait()
                    continue
                self._syncing = True
                target, fd = self._written, self._fd
                cond.release()
                try:
                    os.fsync(fd)
                    error = None
                except OSError as exc:
                    error = exc
                finally:
                    cond.acquire()
                    self._syncing = False
                    cond.notify_all()
                if error is not None:
                    self._failed = error
                    break
                self._synced = max(self._synced, target)
        if self._failed is not None:
            self._fsync_failed()

    def _fsync_failed(self) -> NoReturn:
        """After a failed fsync the OS may have dropped the unsynced pages, or may write
        them later: nothing past the last good fsync is trusted, and no change is taken
        from now on. Under ``always`` no record past it was acknowledged (each waits for
        its fsync), so they are cut from the segment: a restart must not replay changes
        their callers were told were refused."""
        error = self._failed
        if self.sync is SyncPolicy.ALWAYS:
            # already failed; the records past the cut stay unacknowledged
            with self._write_lock, contextlib.suppress(OSError):
                os.ftruncate(self._fd, _HEADER.size + self._synced - self._segment_base)
        log.error("journal fsync failed; changes are refused from now on", extra={"fields": {
            "error": str(error)}})
        raise ChangeLogError(f"the journal cannot be synced ({error}); this change is refused "
                             "and not applied, and so are later ones until a restart", "journal")

    def _flusher(self) -> None:
        while not self._stop.wait(self.interval_s):
            if self._synced < self._written and self._failed is None:
                with contextlib.suppress(ChangeLogError):  # logged by _fsync_failed
                    self._sync_to(self._written)

    # -- snapshots --------------------------------------------------------------------

    def _rotate(self) -> int:
        """Start a new segment (called with every engine lock held); returns its number,
        the first segment the snapshot being taken does not cover. The new segment is
        complete (header, fsync) before the old one is let go: a failure leaves the
        journal appending to the old one, and the snapshot is not taken."""
        with self._write_lock, self._sync_cond:
            while self._syncing:
                self._sync_cond.wait()
            if self._failed is not None:
                raise ChangeLogError(f"the journal failed earlier ({self._failed})", "journal")
            try:
                os.fsync(self._fd)
            except OSError as exc:
                self._failed = exc
                raise ChangeLogError(f"the journal cannot be synced ({exc.strerror})", "journal") from None
            fd = self._new_segment(self._segment + 1)
            old, self._fd = self._fd, fd
            os.close(old)
            self._segment += 1
            self._synced = self._segment_base = self._written
            self._since_snapshot = 0
            return self._segment

    def snapshot(self) -> Path:
        """Write a snapshot of the engine now and drop the segments it covers."""
        with self._snapshot_lock:
            t0 = time.perf_counter()
            image, covers = self.engine.export_state(self._rotate)
            paused = time.perf_counter() - t0
            path = write_snapshot(self.directory, image, covers, self.version)
            for number, seg in segments(self.directory):
                if number < covers:
                    seg.unlink()
            self.snapshots_written += 1
            log.info("snapshot written", extra={"fields": {
                "file": str(path), "nets": len(image.nets), "covers_segments_below": covers,
                "pause_s": round(paused, 4), "seconds": round(time.perf_counter() - t0, 4)}})
            return path

    def _snapshotter(self) -> None:
        while True:
            self._wake.wait()
            self._wake.clear()
            if self._stop.is_set():
                return
            try:
                self.snapshot()
            except (OSError, EtchguardError) as exc:  # a full disk: the journal holds everything
                log.error("snapshot failed; the journal keeps every change", extra={"fields": {
                    "error": str(exc)}})
            except Exception:  # noqa: BLE001 - a bug; the journal still holds everything
                log.exception("snapshot failed; the journal keeps every change")

    # -- shutdown ---------------------------------------------------------------------

    def close(self, snapshot: bool = True) -> None:
        """Final snapshot (so the next start replays nothing), fsync, release the folder."""
        if self._closed:
            return
        self._stop.set()
        self._wake.set()
        for t in self._threads:
            t.join()
        if snapshot and self._failed is None:
            try:
                self.snapshot()
            except (OSError, EtchguardError) as exc:  # a full disk: the journal is still complete
                log.error("final snapshot failed; the journal keeps every change", extra={"fields": {
                    "error": str(exc)}})
            except Exception:  # noqa: BLE001 - a bug; the journal is still complete
                log.exception("final snapshot failed; the journal keeps every change")
        with self._write_lock:
            self._closed = True
            try:
                os.fsync(self._fd)
            except OSError as exc:  # reported, not raised: the stop goes on and frees the folder
                log.error("journal fsync at stop failed; the last changes may not be on disk",
                          extra={"fields": {"error": str(exc)}})
            finally:
                os.close(self._fd)
        os.close(self._lock_fd)

    def stats(self) -> dict[str, int]:
        return {"journal_bytes_written": self._written, "journal_bytes_synced": self._synced,
                "journal_segment": self._segment, "snapshots_written": self.snapshots_written}


def iter_records(directory: Path) -> Iterator[tuple[Path, int, jpb.JournalRecord]]:
    """Every record of the folder's segments, in order (for tools and tests)."""
    found = segments(Path(directory))
    for _, path in found:
        data = path.read_bytes()
        check_header(path, data, JOURNAL_MAGIC, "journal")
        frames, _ = read_frames(path, data, records=False)  # up to any damage
        for offset, payload in frames:
            yield path, offset, jpb.JournalRecord.FromString(payload)
