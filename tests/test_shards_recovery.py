"""kill -9 of one shard while routers stream commits to every shard.

``etchguard serve --shards 3 --state-dir DIR``; four router threads, each with its own
sharded session and nets on every shard, stream commits and rip-ups. One shard is
killed with SIGKILL mid-stream. Then:

* the other shards keep answering: routers' changes on their nets are acknowledged
  between the kill and the moment the supervisor has the shard listening again;
* the supervisor restarts the shard on its own state folder, and the routers resume
  on the same session objects: a change whose reply was lost is looked up with
  GetNet (were its ids given out? are the removed shapes gone?), then they go on;
* at the end every net equals a serial replay of its acknowledged operations
  (tests/test_durability.py's reference: an in-process Engine, compared as protobuf
  NetReports and by the ids held), the restarted shard's nets included.
"""

from __future__ import annotations

import random
import threading
import time
from types import SimpleNamespace

import grpc

from etchguard._shards import shard_of
from etchguard.client import ServiceError
from grpc_fixtures import DRIVER, GATE
from shard_fixtures import start_farm
from test_durability import TRUNK, held_matches_a_replay, random_shape

SHARDS, VICTIM = 3, 1


class Router(threading.Thread):
    def __init__(self, farm, nets: list[str], seed: int) -> None:
        super().__init__(daemon=True)
        self.farm, self.nets = farm, nets
        self.rng = random.Random(seed)
        self.acked: dict[str, list[tuple]] = {n: [] for n in nets}
        self.pending: dict[str, tuple] = {}  # net -> the change whose reply was lost
        self.acked_at: list[tuple[float, int]] = []  # (time, shard) of each acknowledged change
        self.stop = threading.Event()
        self.failure: BaseException | None = None

    def run(self) -> None:
        try:
            with self.farm.client() as fc, fc.session() as s:
                live: dict[str, list[int]] = {}
                for net in self.nets:
                    s.open_net(net, [GATE, DRIVER])
                    live[net] = s.commit(net, [TRUNK])
                    self.acked[net].append(("commit", [TRUNK], list(live[net])))
                while not self.stop.is_set() or self.pending:
                    net = self.rng.choice(self.nets)
                    if net in self.pending and not self._resolve(fc, net, live):
                        time.sleep(0.01)
                        continue
                    if self.stop.is_set():
                        continue
                    self._change(s, net, live)
        except BaseException as exc:  # noqa: BLE001 - reported by the test
            self.failure = exc

    def _change(self, s, net: str, live: dict[str, list[int]]) -> None:
        rng = self.rng
        if live[net] and rng.random() < 0.25:
            op = ("remove", rng.sample(live[net], min(len(live[net]), rng.randint(1, 2))))
        else:
            op = ("commit", [random_shape(rng) for _ in range(rng.randint(1, 3))], ())
        try:
            if op[0] == "remove":
                s.remove(net, op[1])
                for v in op[1]:
                    live[net].remove(v)
            else:
                ids = s.commit(net, op[1])
                live[net].extend(ids)
                op = ("commit", op[1], ids)
        except ServiceError as exc:
            if exc.code is not grpc.StatusCode.UNAVAILABLE:
                raise
            self.pending[net] = op  # sent; whether it landed is unknown
            return
        self.acked[net].append(op)
        self.acked_at.append((time.monotonic(), shard_of(net, SHARDS)))

    def _resolve(self, fc, net: str, live: dict[str, list[int]]) -> bool:
        """Look up whether the change in flight landed; False while the shard is away."""
        try:
            held = {s.id for s in fc.get_net(net).shapes}
        except ServiceError as exc:
            if exc.code is grpc.StatusCode.UNAVAILABLE:
                return False
            raise
        op = self.pending.pop(net)
        if op[0] == "commit":
            last = max([i for o in self.acked[net] if o[0] == "commit" for i in o[2]], default=0)
            ids = list(range(last + 1, last + 1 + len(op[1])))
            if ids[0] in held:
                self.acked[net].append(("commit", op[1], ids))
                live[net].extend(ids)
        elif not set(op[1]) & held:
            self.acked[net].append(op)
            for v in op[1]:
                live[net].remove(v)
        assert sorted(held) == sorted(live[net]), f"{net}: held {sorted(held)} != acknowledged {sorted(live[net])}"
        return True


def _nets_on_every_shard(router: int, per_shard: int = 2) -> list[str]:
    out: dict[int, list[str]] = {k: [] for k in range(SHARDS)}
    for i in range(1000):
        name = f"r{router}/n{i}"
        k = shard_of(name, SHARDS)
        if len(out[k]) < per_shard:
            out[k].append(name)
        if all(len(v) == per_shard for v in out.values()):
            return [n for v in out.values() for n in v]
    raise AssertionError("names did not spread over the shards")


def test_kill_9_one_shard_the_others_answer_and_it_returns_with_every_acknowledged_change(tmp_path):
    farm = start_farm(SHARDS, "--state-dir", str(tmp_path / "state"), "--snapshot-every", "200",
                      metrics=False)
    routers = [Router(farm, _nets_on_every_shard(i), seed=i) for i in range(4)]
    try:
        for r in routers:
            r.start()
        deadline = time.monotonic() + 60
        while sum(len(r.acked_at) for r in routers) < 300 and time.monotonic() < deadline:
            time.sleep(0.02)
        assert sum(len(r.acked_at) for r in routers) >= 300, "the routers did not get going"
        old = farm.kill_shard(VICTIM)
        killed_at = time.monotonic()
        farm.wait_restarted(VICTIM, old)
        back_at = time.monotonic()
        # the routers resume on the restarted shard (waited for, not slept: a loaded
        # machine may take a while to reconnect)
        resume_by = time.monotonic() + 30
        while time.monotonic() < resume_by and not any(
                k == VICTIM for r in routers for t, k in list(r.acked_at) if t > back_at):
            time.sleep(0.05)
        for r in routers:
            r.stop.set()
        for r in routers:
            r.join(60)
            assert not r.is_alive()
            assert r.failure is None, repr(r.failure)
        # a reply the victim sent just before the kill may be read a moment after it
        in_flight = 0.2
        during = [k for r in routers for t, k in r.acked_at if killed_at + in_flight < t < back_at]
        assert during and VICTIM not in during, "the other shards did not answer during the outage"
        after = [k for r in routers for t, k in r.acked_at if t > back_at]
        assert VICTIM in after, "no router resumed on the restarted shard"
        assert any(e.get("msg") == "shard exited; restarting it" and e.get("shard") == VICTIM for e in farm.logs)
        with farm.client() as fc:
            per_net = [SimpleNamespace(nets=[net], acked=r.acked, pending=None) for r in routers for net in r.nets]
            held_matches_a_replay(fc, per_net)
    finally:
        for r in routers:
            r.stop.set()
        assert farm.stop() == 0
