"""The shard function (FNV-1a 64 + jump consistent hashing) and the topology file.

References outside the project:
* FNV-1a 64 of "", "a" and "foobar": the FNV authors' published test values
  (from memory: 0xcbf29ce484222325 is the offset basis itself, "a" ->
  0xaf63dc4c8601ec8c, "foobar" -> 0x85944171f73967e8).
* Jump hash (Lamping & Veach 2014): keys 1, 42, 0xDEAD10CC, 256 into 1, 57, 666, 1024
  buckets -> 0, 43, 361, 520, the test vectors that open ports of the paper's code
  publish (from memory); and the paper's two defining properties, checked directly:
  going from n to n + 1 buckets moves a key only into the new bucket n, and the
  buckets fill evenly (chi-squared against the uniform distribution).
* tests/data/shard_vectors.tsv pins the function; the C++ client's check program
  (client_examples/cpp/shard_vectors_check.cpp) reads the same file.
"""

from __future__ import annotations

import subprocess
from pathlib import Path

import pytest

from etchguard import InputError
from etchguard._shards import (Topology, fnv1a_64, jump_hash, load_topology, parse_topology,
                               shard_of)
from grpc_fixtures import REPO
from native_build import CPP_BUILD as BUILD

VECTORS = REPO / "tests" / "data" / "shard_vectors.tsv"


def read_vectors() -> list[tuple[str, int, int, int]]:
    out = []
    for line in VECTORS.read_text(encoding="utf-8").splitlines():
        if not line or line.startswith("#"):
            continue
        cols = line.split("\t")
        out.append((bytes.fromhex(cols[0]).decode("utf-8"), int(cols[1], 16), int(cols[2]), int(cols[3])))
    return out


def test_fnv1a_64_published_values():
    assert fnv1a_64(b"") == 0xCBF29CE484222325
    assert fnv1a_64(b"a") == 0xAF63DC4C8601EC8C
    assert fnv1a_64(b"foobar") == 0x85944171F73967E8


def test_jump_hash_published_values():
    assert [jump_hash(k, n) for k, n in [(1, 1), (42, 57), (0xDEAD10CC, 1), (0xDEAD10CC, 666), (256, 1024)]] \
        == [0, 43, 0, 361, 520]


def test_jump_hash_moves_keys_only_into_the_new_bucket():
    keys = [fnv1a_64(f"blk_r/n{i}".encode()) for i in range(2000)]
    for n in range(1, 40):
        for key in keys:
            before, after = jump_hash(key, n), jump_hash(key, n + 1)
            assert after == before or after == n, (key, n, before, after)


def test_jump_hash_fills_buckets_evenly():
    buckets, names = 8, 40_000
    counts = [0] * buckets
    for i in range(names):
        counts[shard_of(f"lumen_top/u{i % 97}/n{i}", buckets)] += 1
    expected = names / buckets
    chi2 = sum((c - expected) ** 2 / expected for c in counts)
    assert chi2 < 24.32, counts  # chi-squared, 7 degrees of freedom, 0.999 quantile (tables)


def test_vector_file_agrees():
    vectors = read_vectors()
    assert len(vectors) > 800
    assert any(ord(ch) > 127 for name, *_ in vectors for ch in name)  # UTF-8 beyond ASCII
    for name, hashed, shards, shard in vectors:
        assert fnv1a_64(name.encode("utf-8")) == hashed, name
        assert shard_of(name, shards) == shard, (name, shards)


def test_cpp_shard_function_agrees_with_the_vector_file(example_binary):
    check = BUILD / "etchguard_shard_vectors_check"
    done = subprocess.run([str(check), str(VECTORS)], capture_output=True, text=True, timeout=60)
    assert done.returncode == 0, done.stdout[-3000:] + done.stderr[-2000:]
    rows = len(read_vectors())
    assert done.stdout.strip().splitlines()[-1] == f"vectors: {rows} agree, 0 differ"


def test_jump_hash_refuses_no_buckets():
    with pytest.raises(InputError):
        jump_hash(1, 0)


# -- the topology file -------------------------------------------------------------------

GOOD = """# three shards
etchguard-topology 1
shards 3
shard 1 10.1.0.12:50051
shard 0 10.1.0.11:50051

shard 2 unix:/run/eg/shard-2.sock
"""


def test_topology_parses_in_any_shard_order_and_round_trips(tmp_path: Path):
    t = parse_topology(GOOD)
    assert t.addresses == ("10.1.0.11:50051", "10.1.0.12:50051", "unix:/run/eg/shard-2.sock")
    path = tmp_path / "topology"
    t.write(path)
    again = load_topology(path)
    assert again == t and again.fingerprint == t.fingerprint
    assert Topology(t.addresses[:2]).fingerprint != t.fingerprint
    assert Topology((t.addresses[1], t.addresses[0], t.addresses[2])).fingerprint != t.fingerprint


@pytest.mark.parametrize("text, field", [
    ("", "<topology>: header"),
    ("etchguard-topology 2\nshards 1\nshard 0 a:1\n", "<topology>:1: header"),
    ("etchguard-topology 1\nshard 0 a:1\n", "<topology>:2: shard"),
    ("etchguard-topology 1\nshards 0\n", "<topology>:2: shards"),
    ("etchguard-topology 1\nshards two\n", "<topology>:2: shards"),
    ("etchguard-topology 1\nshards 2\nshard 0 a:1\n", "<topology>: shard"),
    ("etchguard-topology 1\nshards 2\nshard 0 a:1\nshard 0 b:1\n", "<topology>:4: shard"),
    ("etchguard-topology 1\nshards 2\nshard 2 a:1\n", "<topology>:3: shard"),
    ("etchguard-topology 1\nshards 1\nshard 0 nohostport\n", "<topology>:3: address"),
    ("etchguard-topology 1\nshards 1\nshard 0 h:70000\n", "<topology>:3: address"),
    ("etchguard-topology 1\nshards 1\nshard 0 unix:\n", "<topology>:3: address"),
    ("etchguard-topology 1\nshards 1\nhost 0 a:1\n", "<topology>:3: entry"),
])
def test_topology_errors_name_line_and_field(text: str, field: str):
    with pytest.raises(InputError) as info:
        parse_topology(text)
    assert info.value.field == field


def test_unreadable_topology_names_the_file(tmp_path: Path):
    with pytest.raises(InputError) as info:
        load_topology(tmp_path / "absent")
    assert info.value.field == str(tmp_path / "absent")
