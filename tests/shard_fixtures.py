"""A real ``etchguard serve --shards N`` farm on loopback, and nets that crowd each other.

``start_farm(n)`` runs the supervisor through the package's ``launch`` with ``--listen
127.0.0.1:0`` (a free port per shard) and reads its JSON log lines: the ``shards listening`` line
gives the addresses, the topology file and the metrics port; each shard's own
``listening`` line (relayed with ``"shard": k``) gives that shard's pid, so a test
can kill one shard and wait for the supervisor to bring it back.

``crowded_nets(count)`` makes nets of the demo deck whose metal interleaves on M1 to
M4 within a few tens of microns, so that advice for one net meets other nets' metal,
which the farm holds on other shards.
"""

from __future__ import annotations

import os
import random
import signal
import tempfile
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path

from etchguard.client import Client, pb, pin, rect, run
from etchguard.server.launch import Launched, launch
from etchguard.sharded_client import ShardedClient
from grpc_fixtures import DEMO_DECK, REPO

START_TIMEOUT_S = 40.0


@dataclass
class FarmProcess(Launched):
    """A supervised farm: ready on "shards listening"; each shard's relayed "listening"
    line gives its latest pid."""

    pids: dict[int, int] = field(default_factory=dict)  # shard -> pid of its latest start
    _changed: threading.Condition = field(default_factory=threading.Condition)

    @property
    def topology(self) -> Path | None:
        return Path(self.ready["topology"]) if self.ready else None

    @property
    def addresses(self) -> list[str]:
        return list(self.ready.get("addresses", []))

    def _seen(self, entry: dict) -> None:
        with self._changed:
            super()._seen(entry)
            if entry.get("msg") == "listening" and "shard" in entry:
                self.pids[entry["shard"]] = entry["pid"]
            self._changed.notify_all()

    def client(self, **kwargs) -> ShardedClient:
        assert self.topology is not None
        return ShardedClient(self.topology, timeout=kwargs.pop("timeout", 20.0), **kwargs)

    def shard_client(self, k: int, **kwargs) -> Client:
        return Client(self.addresses[k], timeout=kwargs.pop("timeout", 20.0), **kwargs)

    def kill_shard(self, k: int) -> int:
        """kill -9 shard k; returns the pid killed."""
        pid = self.pids[k]
        os.kill(pid, signal.SIGKILL)
        return pid

    def wait_restarted(self, k: int, old_pid: int, timeout: float = 30.0) -> int:
        deadline = time.monotonic() + timeout
        with self._changed:
            while self.pids.get(k) == old_pid:
                left = deadline - time.monotonic()
                if left <= 0:
                    raise TimeoutError(f"shard {k} was not restarted")
                self._changed.wait(left)
            return self.pids[k]

    def stop(self, timeout: float = 30.0) -> int:
        return super().stop(timeout)


def start_farm(shards: int, *extra: str, metrics: bool = True, rules: Path | None = DEMO_DECK,
               listen: str = "127.0.0.1:0") -> FarmProcess:
    args = ["--shards", str(shards), "--listen", listen,
            *(["--metrics-port", "0"] if metrics else []), "--grace", "5", *extra]
    if "--topology-out" not in extra and "--state-dir" not in extra:  # not into the work tree
        args += ["--topology-out", str(Path(tempfile.mkdtemp(prefix="etchguard-farm-")) / "topology")]
    if rules is not None:
        args += ["--rules", str(rules)]
    return launch(args, cwd=REPO, timeout_s=START_TIMEOUT_S, ready_message="shards listening", kind=FarmProcess)


# -- crowded nets ------------------------------------------------------------------------------

@dataclass(frozen=True)
class CrowdedNet:
    name: str
    pins: tuple[pb.Pin, ...]
    shapes: tuple[pb.Shape, ...]
    origin: tuple[int, int]


def crowded_nets(count: int, seed: int = 0, prefix: str = "blk_c") -> list[CrowdedNet]:
    """Nets on a 4-wide grid of 6 um pitch, each reaching 4-15 um on M1-M4: neighbours
    overlap in extent, so one net's hop or jumper lands near another's metal."""
    rng = random.Random(seed)
    out = []
    for i in range(count):
        ox, oy = (i % 4) * 6000, (i // 4) * 6000
        gate = pin(f"u{i}.a", "M1", [(ox, oy, ox + 200, oy + 200)], gate_area={"thin": 0.004 + 0.002 * (i % 5)},
                   cell_area={"M1": 0.01})
        driver = pin(f"u{i}.y", "M1", [(ox + 4000, oy, ox + 4200, oy + 200)], diff_area=0.1 + 0.05 * (i % 3))
        shapes = [rect("M1", ox, oy + 30, ox + 4200, oy + 170)]
        for _ in range(rng.randint(2, 5)):
            layer = rng.choice(["M2", "M3", "M4"])
            x, y = ox + rng.randrange(-2000, 8000, 20), oy + rng.randrange(-2000, 8000, 20)
            length = rng.randrange(2000, 15000, 20)
            horizontal = layer in ("M3",)  # lumen-6m: M1, M3, M5 horizontal
            shapes.append(run(layer, x, y, x + length, y) if horizontal else run(layer, x, y, x, y + length))
        out.append(CrowdedNet(f"{prefix}/n{i}", (gate, driver), tuple(shapes), (ox, oy)))
    return out
