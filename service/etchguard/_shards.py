"""Which shard holds a net: a published function of the net's name, and the topology.

**The shard function** (the same in every client and server, in any language):

    shard_of(name, shards) = jump_hash(fnv1a_64(utf8(name)), shards)

* ``fnv1a_64`` is the 64-bit FNV-1a hash (Fowler, Noll, Vo; the public-domain
  reference at the FNV authors' page, also draft-eastlake-fnv): start from the offset
  basis 0xcbf29ce484222325; for each byte, XOR it in, then multiply by the prime
  0x100000001b3 modulo 2^64.
* ``jump_hash`` is jump consistent hashing (J. Lamping, E. Veach, "A Fast, Minimal
  Memory, Consistent Hash Algorithm", 2014, figure 1): a 64-bit key and a bucket count
  n give a bucket in [0, n); going from n to n + 1 buckets moves only the keys that
  land in the new bucket n (about 1 / (n + 1) of them), so a farm grows one shard at a
  time and moves the least. The arithmetic is the paper's: an LCG step
  ``key = key * 2862933555777941757 + 1`` (mod 2^64) and
  ``j = floor((b + 1) * 2^31 / ((key >> 33) + 1))`` in double precision.

``tests/data/shard_vectors.tsv`` holds the function's values for names of every kind
(ASCII, hierarchical, UTF-8 beyond ASCII, empty-ish edge cases) and shard counts 1 to
1,000; the Python and the C++ clients' tests both read it, so a router written in
either routes its own calls with no proxy between it and the shards.

**The topology** says where each shard listens. It is a small text file of our own
format, the same on every client and every shard (see ``parse_topology``)::

    # comment lines and blank lines are ignored
    etchguard-topology 1
    shards 3
    directory-cell 50000
    shard 0 10.1.0.11:50051
    shard 1 10.1.0.12:50051
    shard 2 unix:/run/etchguard/shard-2.sock

``directory-cell`` (optional, DBU, default 50,000) is the side of the square cells of
the farm's metal directory (which shards hold metal where; see ``_shard_engine``);
every shard must use the same, so it belongs to the topology.

Its fingerprint (``Topology.fingerprint``) is the FNV-1a 64 hash of the canonical
text (``canonical_text``): the header, the count, the directory cell and one ``shard K
ADDRESS`` line per shard in index order, newline-terminated. Client and server compare fingerprints at
connect, so a client holding a different file is refused before it routes a call.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from pathlib import Path

from ._errors import InputError
from ._textfile import write_whole

FNV64_OFFSET_BASIS = 0xCBF29CE484222325
FNV64_PRIME = 0x100000001B3
_MASK64 = (1 << 64) - 1
JUMP_LCG_MULTIPLIER = 2862933555777941757  # Lamping & Veach 2014, figure 1
MAX_SHARDS = 1 << 16  # far past any farm; keeps a topology file's size sane
DEFAULT_DIRECTORY_CELL = 50_000  # DBU: 50 um at 1,000 DBU/um, a few dozen tracks
MAX_DIRECTORY_CELL = 999_999_999  # DBU; nine digits, as the C++ reader takes them

TOPOLOGY_HEADER = "etchguard-topology"
TOPOLOGY_FORMAT = 1


def fnv1a_64(data: bytes) -> int:
    """The 64-bit FNV-1a hash of ``data``."""
    h = FNV64_OFFSET_BASIS
    for byte in data:
        h = ((h ^ byte) * FNV64_PRIME) & _MASK64
    return h


def jump_hash(key: int, buckets: int) -> int:
    """Jump consistent hash of a 64-bit ``key`` into ``buckets`` buckets (>= 1)."""
    if buckets < 1:
        raise InputError(f"needs at least one bucket, got {buckets}", "shards")
    key &= _MASK64
    b, j = -1, 0
    while j < buckets:
        b = j
        key = (key * JUMP_LCG_MULTIPLIER + 1) & _MASK64
        j = int((b + 1) * (float(1 << 31) / float((key >> 33) + 1)))
    return b


@functools.lru_cache(maxsize=1 << 16)  # a router and a shard ask about the same nets again and again
def shard_of(net: str, shards: int) -> int:
    """The shard (0 .. shards - 1) that holds ``net``."""
    return jump_hash(fnv1a_64(net.encode("utf-8")), shards)


# -- the topology -------------------------------------------------------------------------

@dataclass(frozen=True)
class Topology:
    """Shard k listens at ``addresses[k]``."""

    addresses: tuple[str, ...]
    directory_cell: int = DEFAULT_DIRECTORY_CELL  # DBU, side of a metal directory cell

    def __post_init__(self) -> None:
        if not 1 <= len(self.addresses) <= MAX_SHARDS:
            raise InputError(f"needs 1 to {MAX_SHARDS} shards, got {len(self.addresses)}", "shards")
        if not 1 <= self.directory_cell <= MAX_DIRECTORY_CELL:
            raise InputError(f"must be 1 to {MAX_DIRECTORY_CELL} DBU, got {self.directory_cell}",
                             "directory_cell")

    @property
    def shards(self) -> int:
        return len(self.addresses)

    def shard_of(self, net: str) -> int:
        return shard_of(net, len(self.addresses))

    def canonical_text(self) -> str:
        lines = [f"{TOPOLOGY_HEADER} {TOPOLOGY_FORMAT}", f"shards {self.shards}",
                 f"directory-cell {self.directory_cell}"]
        lines += [f"shard {k} {address}" for k, address in enumerate(self.addresses)]
        return "\n".join(lines) + "\n"

    @property
    def fingerprint(self) -> int:
        """FNV-1a 64 of the canonical text: equal files give equal fingerprints."""
        return fnv1a_64(self.canonical_text().encode("utf-8"))

    def write(self, path: Path) -> None:
        """Write the canonical text (through a temporary file, so a reader never
        sees half a topology)."""
        write_whole(path, self.canonical_text())


def parse_topology(text: str, source: str = "<topology>") -> Topology:
    """A topology from its text. Errors name ``source:line`` and the field: the header
    (``etchguard-topology 1``) first, then ``shards N``, then exactly one ``shard K
    ADDRESS`` per K in 0 .. N-1 (any order), and at most one ``directory-cell DBU``
    anywhere after the header; an address is ``host:port`` or ``unix:/path`` and holds
    no white space."""
    header_seen, count, count_line, cell = False, None, 0, None
    addresses: dict[int, str] = {}
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        where = f"{source}:{number}"
        words = line.split()
        if not header_seen:
            if len(words) != 2 or words[0] != TOPOLOGY_HEADER:
                raise InputError(f"the first line must be '{TOPOLOGY_HEADER} {TOPOLOGY_FORMAT}', "
                                 f"got {line!r}", f"{where}: header")
            if words[1] != str(TOPOLOGY_FORMAT):
                raise InputError(f"format {words[1]!r} is not known (this build reads "
                                 f"{TOPOLOGY_FORMAT})", f"{where}: header")
            header_seen = True
        elif words[0] == "shards":
            if count is not None:
                raise InputError(f"given twice (first on line {count_line})", f"{where}: shards")
            count = _count(words, where)
            count_line = number
        elif words[0] == "directory-cell":
            if cell is not None:
                raise InputError("given twice", f"{where}: directory-cell")
            if len(words) != 2 or not words[1].isdigit() or not 1 <= int(words[1]) <= MAX_DIRECTORY_CELL:
                raise InputError(f"must be 'directory-cell N' with N in 1 .. {MAX_DIRECTORY_CELL} DBU",
                                 f"{where}: directory-cell")
            cell = int(words[1])
        elif words[0] == "shard":
            if count is None:
                raise InputError("'shards N' must come before the first shard line", f"{where}: shard")
            k, address = _shard_line(words, count, where)
            if k in addresses:
                raise InputError(f"shard {k} is given twice", f"{where}: shard")
            addresses[k] = address
        else:
            raise InputError(f"unknown entry {words[0]!r} (expected 'shards', 'shard' or "
                             f"'directory-cell')",
                             f"{where}: entry")
    if not header_seen:
        raise InputError(f"empty: needs '{TOPOLOGY_HEADER} {TOPOLOGY_FORMAT}'", f"{source}: header")
    if count is None:
        raise InputError("no 'shards N' line", f"{source}: shards")
    missing = [k for k in range(count) if k not in addresses]
    if missing:
        raise InputError(f"no address for shard {missing[0]} ({len(missing)} missing)",
                         f"{source}: shard")
    return Topology(tuple(addresses[k] for k in range(count)),
                    DEFAULT_DIRECTORY_CELL if cell is None else cell)


def _count(words: list[str], where: str) -> int:
    if len(words) != 2 or not words[1].isdigit():
        raise InputError("must be 'shards N' with N a whole number", f"{where}: shards")
    count = int(words[1])
    if not 1 <= count <= MAX_SHARDS:
        raise InputError(f"must be 1 to {MAX_SHARDS}, got {count}", f"{where}: shards")
    return count


def _shard_line(words: list[str], count: int, where: str) -> tuple[int, str]:
    if len(words) != 3:
        raise InputError("must be 'shard K ADDRESS'", f"{where}: shard")
    if not words[1].isdigit() or int(words[1]) >= count:
        raise InputError(f"index {words[1]!r} is not in 0 .. {count - 1}", f"{where}: shard")
    address = words[2]
    if address.startswith("unix:"):
        if len(address) == len("unix:"):
            raise InputError("a unix address needs a path", f"{where}: address")
    else:
        host, sep, port = address.rpartition(":")
        if not sep or not host or not port.isdigit() or not 0 < int(port) < 65536:
            raise InputError(f"{address!r} is not host:port (port 1-65535) or unix:/path",
                             f"{where}: address")
    return int(words[1]), address


def load_topology(path: Path) -> Topology:
    """Read and parse a topology file (errors name the file, line and field)."""
    try:
        text = Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the topology: {getattr(exc, 'strerror', None) or exc}",
                         str(path)) from None
    return parse_topology(text, str(path))
