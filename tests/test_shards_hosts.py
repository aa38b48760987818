"""Shards on several hosts: network namespaces with their own addresses (iproute2).

The test makes two network namespaces joined by a bridge in this one, with private
addresses (10.231.B.0/24, B from the test's pid) that exist only inside the test's
sandbox; each namespace runs one shard (``etchguard serve --topology FILE
--shard-index K``) on its own address over TLS (addresses beyond loopback need it),
the shards ask each other for obstacle answers across the bridge, and the sharding
client in this namespace routes by net. The reference is one plain server on
loopback given the same nets: checks, scores and advice must be equal, exactly.

Where namespaces cannot be made (no iproute2, no privilege), the test is skipped
saying so.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import threading

import pytest

from etchguard._shards import Topology, shard_of
from etchguard.client import run
from grpc_fixtures import DEMO_DECK, REPO, start_server
from shard_fixtures import crowded_nets
from test_shards_farm import _advice_runs

pytest.importorskip("cryptography")
from cryptography.hazmat.primitives import serialization  # noqa: E402
from cryptography.hazmat.primitives.asymmetric import ec  # noqa: E402
from cryptography.x509.oid import ExtendedKeyUsageOID  # noqa: E402

from test_security import _cert, _pem_key  # noqa: E402 - the same throwaway PKI

SUBNET = 10 + os.getpid() % 240  # the third octet: one subnet per test process
TAG = f"{os.getpid() % 100000}"
BRIDGE = f"egb{TAG}"
HOSTS = [f"egh{TAG}s{k}" for k in range(2)]
NETS = crowded_nets(16, seed=5, prefix="blk_h")


def _ip(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run(["ip", *args], capture_output=True, text=True, timeout=20)


def _teardown() -> None:
    for ns in HOSTS:
        _ip("netns", "del", ns)
    _ip("link", "del", BRIDGE)


def _make_hosts() -> str | None:
    """Namespaces on a bridge; returns why not, or None when they are up."""
    if shutil.which("ip") is None:
        return "iproute2's `ip` is not installed"
    steps = [["link", "add", BRIDGE, "type", "bridge"],
             ["addr", "add", f"10.231.{SUBNET}.1/24", "dev", BRIDGE], ["link", "set", BRIDGE, "up"]]
    for k, ns in enumerate(HOSTS):
        steps += [["netns", "add", ns],
                  ["link", "add", f"{ns}v", "type", "veth", "peer", "name", "eth0", "netns", ns],
                  ["link", "set", f"{ns}v", "master", BRIDGE, "up"],
                  ["-n", ns, "addr", "add", f"10.231.{SUBNET}.{k + 2}/24", "dev", "eth0"],
                  ["-n", ns, "link", "set", "eth0", "up"], ["-n", ns, "link", "set", "lo", "up"]]
    for step in steps:
        done = _ip(*step)
        if done.returncode != 0:
            _teardown()
            return f"`ip {' '.join(step)}` failed: {done.stderr.strip()}"
    return None


@pytest.fixture(scope="module")
def hosts():
    why = _make_hosts()
    if why is not None:
        pytest.skip(f"network namespaces cannot be made here ({why}); the several-hosts test needs them")
    yield [f"10.231.{SUBNET}.{k + 2}" for k in range(len(HOSTS))]
    _teardown()


@pytest.fixture(scope="module")
def pki(tmp_path_factory, hosts):
    d = tmp_path_factory.mktemp("farm-pki")
    ca_key = ec.generate_private_key(ec.SECP256R1())
    ca = _cert("etchguard farm test CA", ca_key, None, None, ca=True)
    (d / "ca.crt").write_bytes(ca.public_bytes(serialization.Encoding.PEM))
    for k, address in enumerate(hosts):
        key = ec.generate_private_key(ec.SECP256R1())
        cert = _cert(f"etchguard shard {k}", key, ca.subject, ca_key, ca=False,
                     usage=ExtendedKeyUsageOID.SERVER_AUTH, ip=address)
        (d / f"shard{k}.key").write_bytes(_pem_key(key))
        (d / f"shard{k}.crt").write_bytes(cert.public_bytes(serialization.Encoding.PEM))
    return d


@pytest.fixture(scope="module")
def farm(hosts, pki, tmp_path_factory):
    topology = Topology(tuple(f"{address}:50051" for address in hosts))
    path = tmp_path_factory.mktemp("farm") / "topology"
    topology.write(path)
    procs, listening = [], []
    for k, ns in enumerate(HOSTS):
        cmd = ["ip", "netns", "exec", ns, sys.executable, "-m", "etchguard.cli", "serve",
               "--topology", str(path), "--shard-index", str(k), "--listen", topology.addresses[k],
               "--tls-cert", str(pki / f"shard{k}.crt"), "--tls-key", str(pki / f"shard{k}.key"),
               "--peer-tls-roots", str(pki / "ca.crt"), "--rules", str(DEMO_DECK), "--grace", "5"]
        proc = subprocess.Popen(cmd, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                                text=True, cwd=REPO, env=dict(os.environ, PYTHONUNBUFFERED="1"))
        ready = threading.Event()
        lines: list[str] = []

        def read(proc=proc, ready=ready, lines=lines) -> None:
            for line in proc.stderr:
                lines.append(line)
                try:
                    if json.loads(line).get("msg") == "listening":
                        ready.set()
                except (json.JSONDecodeError, AttributeError):
                    pass
            ready.set()

        threading.Thread(target=read, daemon=True).start()
        procs.append(proc)
        listening.append((ready, lines))
    try:
        for k, (ready, lines) in enumerate(listening):
            assert ready.wait(40) and procs[k].poll() is None, f"shard {k} did not start: {lines[-5:]}"
        yield topology, (pki / "ca.crt").read_bytes()
    finally:
        for p in procs:
            p.terminate()
        for p in procs:
            p.wait(30)


def test_shards_on_two_hosts_answer_as_one_server(farm):
    from etchguard.sharded_client import ShardedClient
    topology, roots = farm
    single = start_server(metrics=False)
    try:
        with ShardedClient(topology, tls_roots=roots, timeout=30) as fc, single.client() as sc:
            assert fc.health() == ["SERVING", "SERVING"]
            for net in NETS:
                assert fc.open_net(net.name, net.pins, net.shapes) == sc.open_net(net.name, net.pins, net.shapes)
            assert {shard_of(n.name, 2) for n in NETS} == {0, 1}
            assert {r.net: r for r in fc.check_all()} == {r.net: r for r in sc.check_all()}
            crossed = 0
            for net in NETS:
                ox, oy = net.origin
                candidate = [run("M2", ox + 4100, oy + 100, ox + 4100, oy + 30_000)]
                assert fc.score(net.name, candidate) == sc.score(net.name, candidate)
                for layer, x1, y1, x2, y2, width in _advice_runs(net):
                    want = sc.advise(net.name, layer, x1, y1, x2, y2, width=width, allow_non_preferred=True)
                    assert fc.advise(net.name, layer, x1, y1, x2, y2, width=width, allow_non_preferred=True) == want
                    crossed += sum(shard_of(c.other_net, 2) != shard_of(net.name, 2)
                                   for o in want.options for c in o.conflicts if c.other_net)
            assert crossed > 0, "no advice met metal held on the other host"
    finally:
        single.stop()
