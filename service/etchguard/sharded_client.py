"""A Python client for a farm of etchguard shards: calls routed by net, no proxy.

    from etchguard.sharded_client import ShardedClient
    from etchguard.client import pin, run

    with ShardedClient("etchguard.topology") as farm:      # the farm's topology file
        farm.open_net("blk_r/n1", [pin("u1.a", "M1", [(0, 0, 200, 200)], gate_area=0.05)])
        farm.commit("blk_r/n1", [run("M1", 100, 100, 5000, 100)])
        with farm.session() as s:                            # one per router thread
            s.score("blk_r/n1", [run("M2", 4900, 100, 4900, 9000)])
        for report in farm.check_all(violations_only=True):  # every shard, merged
            ...

* One channel per shard (``etchguard.client.Client`` each); a call about a net goes to
  ``shard_of(net, shards)`` (``etchguard._shards``), the function every shard uses too.
* At connect, every shard is asked ``GetTopology`` with this client's fingerprint and
  the shard index it expects there; a shard holding another topology refuses
  (FAILED_PRECONDITION), and so does a shard at another index, so a client with a
  stale file fails before it routes anything.
* ``session()`` gives one ordered stream per shard, opened when first needed; use one
  per router thread. A read (score, batch, headroom, check, advise) whose shard
  became unreachable is retried on a fresh stream until ``retry_s`` passes, so a
  router rides out a shard's restart. A change (open, commit, remove, close) is not
  retried: its fate is unknown when the reply was lost (it may be journaled), so the
  ``ServiceError`` (UNAVAILABLE) goes to the caller, who may look with ``get_net``.
* ``load_deck`` goes to every shard; ``check_all`` and ``stats`` fan out and merge.
* ``declare_blockage`` declares the area on every shard (advice on any net then sees
  it) and returns one farm id, which ``remove_blockage`` takes; see there for ids and
  for a shard that refuses or cannot be reached part way.
"""

from __future__ import annotations

import functools
import queue
import threading
import time
from collections.abc import Iterator, Sequence
from pathlib import Path
from typing import Any

import grpc

from ._shards import Topology, load_topology, shard_of
from .client import Client, ServiceError, Session, advise_request, batch_scores, candidate_columns, pb
from .v1 import shards_pb2 as spb
from .v1 import shards_pb2_grpc as spb_grpc

__all__ = ["ShardedClient", "ShardedSession"]

# unary calls whose first argument is the net: routed to its shard
ROUTED_CALLS = ("open_net", "commit", "remove", "close_net", "score", "score_batch",
                "score_columns", "headroom", "check", "get_net", "advise")
# session calls that change nothing: safe to send again after a lost stream
READ_OPS = frozenset({"score", "score_batch", "headroom", "check", "advise"})
STATS_SUMS = ("nets", "shapes", "hot_nets", "scores", "commits", "removals", "checks", "violations_seen")
RETRY_PAUSE_S = 0.1


class ShardedClient:
    """Every shard of a farm, one Client each. ``topology`` is a Topology or its file;
    the other arguments go to each shard's Client (see ``etchguard.client.Client``)."""

    def __init__(self, topology: Topology | Path | str, *, connect: bool = True,
                 retry_s: float = 30.0, **client_options: Any) -> None:
        self.topology = topology if isinstance(topology, Topology) else load_topology(Path(topology))
        self.retry_s = retry_s
        self.shards = [Client(address, **client_options) for address in self.topology.addresses]
        self._count = self.topology.shards
        self._blockages: dict[int, dict[int, int]] = {}  # farm id -> {shard: that shard's id}
        self._blockage_lock = threading.Lock()  # one fan-out at a time keeps the shards' ids in step
        if connect:
            try:
                self.connect()
            except BaseException:
                self.close()
                raise

    def shard_of(self, net: str) -> int:
        return shard_of(net, self._count)

    def connect(self) -> list[spb.TopologyInfo]:
        """Ask every shard for its topology with ours; a mismatch is refused there."""
        infos = []
        for k, client in enumerate(self.shards):
            stub = spb_grpc.ShardServiceStub(client.channel)
            request = spb.GetTopologyRequest(expected_fingerprint=self.topology.fingerprint, expected_shard=k)
            infos.append(client._call(stub.GetTopology, request))
        return infos

    def __enter__(self) -> ShardedClient:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        for client in self.shards:
            client.close()

    def client_for(self, net: str) -> Client:
        """The Client of the shard that holds ``net``."""
        return self.shards[shard_of(net, self._count)]

    def wait_ready(self, timeout: float = 10.0) -> None:
        for client in self.shards:
            client.wait_ready(timeout)

    def health(self, service: str = "") -> list[str]:
        """Each shard's standard health status, by shard index."""
        return [client.health(service) for client in self.shards]

    # deck: the same on every shard
    def load_deck(self, toml: str | Path) -> pb.DeckInfo:
        infos = [client.load_deck(toml) for client in self.shards]
        return infos[0]

    def load_deck_lef(self, lef: Sequence[str | Path | tuple[str, str]], process_name: str = "",
                      dbu_per_micron: int = 0) -> pb.DeckInfo:
        infos = [client.load_deck_lef(lef, process_name, dbu_per_micron) for client in self.shards]
        return infos[0]

    # blockages: declared on every shard, one farm id
    def declare_blockage(self, area: pb.Shape) -> int:
        """Declare ``area`` (``rect(layer, ...)``) on every shard, in shard order, so that
        advice on any net treats it as blocked; returns its farm id, which is shard 0's
        id for it. Advice's conflicts name the id of the shard that answered, which is
        the farm id too while every blockage of the farm goes through one ShardedClient.

        When a shard fails part way, the shards before it remove it again and that
        shard's ``ServiceError`` is raised unchanged: so a bad area is refused by shard
        0 with the single server's status and field, before any shard holds it. When a
        shard may still hold it (one unreachable: its reply was lost; or an undo that
        failed), the ``ServiceError`` (the failing shard's code, field "blockage_id")
        names those shards and, for undos that failed, the farm id that
        ``remove_blockage`` takes to finish the clean-up."""
        with self._blockage_lock:
            held: dict[int, int] = {}
            for k, client in enumerate(self.shards):
                try:
                    held[k] = client.declare_blockage(area)
                except ServiceError as exc:
                    self._undo_declare(held, k, exc)
                    raise
            farm_id = held[0]
            self._blockages[farm_id] = held
            return farm_id

    def _undo_declare(self, held: dict[int, int], failed: int, cause: ServiceError) -> None:
        """Remove a part-way declaration from the shards in ``held``; raises when some
        shard may still hold it (the caller raises ``cause`` otherwise)."""
        left, _ = self._remove_from_shards(held)
        lost = cause.code is grpc.StatusCode.UNAVAILABLE
        if not left and not lost:
            return
        where = [f"shard {k}" for k in sorted(left)] + ([f"shard {failed} (reply lost)"] if lost else [])
        again = ""
        if left:
            self._blockages[held[0]] = left
            again = f"; remove_blockage({held[0]}) removes it"
        raise ServiceError(cause.code, f"declaring the blockage failed on shard {failed} ({cause.message}) "
                                       f"and it may still be held by {', '.join(where)}{again}",
                           "blockage_id") from cause

    def remove_blockage(self, blockage_id: int) -> None:
        """Remove the blockage of farm id ``blockage_id`` from every shard that holds it
        (NOT_FOUND, field "blockage_id", for an id this client did not declare or has
        removed). A shard that answers NOT_FOUND has it removed already. When a shard
        refuses or cannot be reached, the shards removed from are forgotten and the
        ``ServiceError`` names the shards that still hold it; calling again retries them."""
        with self._blockage_lock:
            held = self._blockages.get(blockage_id)
            if held is None:
                raise ServiceError(grpc.StatusCode.NOT_FOUND, f"no blockage {blockage_id} declared through "
                                   "this farm client", "blockage_id")
            left, failure = self._remove_from_shards(held)
            if failure is None:
                del self._blockages[blockage_id]
                return
            self._blockages[blockage_id] = left
            raise ServiceError(failure.code, f"blockage {blockage_id} is still held by shard(s) "
                               f"{', '.join(str(k) for k in sorted(left))} ({failure.message})",
                               "blockage_id") from failure

    def _remove_from_shards(self, held: dict[int, int]) -> tuple[dict[int, int], ServiceError | None]:
        """Remove each shard's blockage (NOT_FOUND: gone already); returns the shards
        that still hold it ({shard: its id}) and the first failure."""
        left: dict[int, int] = {}
        failure = None
        for k, shard_id in held.items():
            try:
                self.shards[k].remove_blockage(shard_id)
            except ServiceError as exc:
                if exc.code is not grpc.StatusCode.NOT_FOUND:
                    left[k] = shard_id
                    failure = failure or exc
        return left, failure

    @property
    def deck(self) -> pb.DeckInfo:
        return self.shards[0].deck

    def via(self, cut_layer: str, x: int, y: int) -> list[pb.Shape]:
        return self.shards[0].via(cut_layer, x, y)

    # fan-out and merge
    def check_all(self, violations_only: bool = False) -> Iterator[pb.NetReport]:
        """Every shard's reports as they arrive (each shard in its own order; the
        interleaving between shards is not defined). A shard's failure raises
        ServiceError once the others' reports received so far are yielded."""
        out: queue.SimpleQueue = queue.SimpleQueue()
        done = object()

        def drain(client: Client) -> None:
            try:
                for report in client.check_all(violations_only):
                    out.put(report)
            except ServiceError as exc:
                out.put(exc)
            finally:
                out.put(done)

        for client in self.shards:
            threading.Thread(target=drain, args=(client,), daemon=True).start()
        running, failure = len(self.shards), None
        while running:
            item = out.get()
            if item is done:
                running -= 1
            elif isinstance(item, ServiceError):
                failure = failure or item
            else:
                yield item
        if failure is not None:
            raise failure

    def stats(self) -> pb.Stats:
        """The farm's figures: counts summed, the shortest uptime, shard 0's deck."""
        per_shard = self.stats_by_shard()
        total = pb.Stats(deck=per_shard[0].deck, version=per_shard[0].version,
                         uptime_s=min(s.uptime_s for s in per_shard))
        for name in STATS_SUMS:
            setattr(total, name, sum(getattr(s, name) for s in per_shard))
        return total

    def stats_by_shard(self) -> list[pb.Stats]:
        return [client.stats() for client in self.shards]

    def session(self) -> ShardedSession:
        return ShardedSession(self)


def _routed(name: str):
    method = getattr(Client, name)

    @functools.wraps(method)
    def call(self: ShardedClient, net: str, *args: Any, **kwargs: Any):
        return method(self.shards[shard_of(net, self._count)], net, *args, **kwargs)
    return call


for _name in ROUTED_CALLS:
    setattr(ShardedClient, _name, _routed(_name))


class ShardedSession:
    """One ordered stream per shard, opened on first use (use one per router thread).
    Requests on one shard keep their order; across shards there is no order."""

    def __init__(self, farm: ShardedClient) -> None:
        self._farm = farm
        self._streams: dict[int, Session] = {}

    def __enter__(self) -> ShardedSession:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        for stream in self._streams.values():
            stream.close()
        self._streams.clear()

    def stream(self, shard: int) -> Session:
        stream = self._streams.get(shard)
        if stream is None:
            stream = self._streams[shard] = self._farm.shards[shard].session()
        return stream

    def ask(self, net: str, op: str, message: Any):
        """Send one request to the net's shard and return its result."""
        shard = self._farm.shard_of(net)
        deadline = time.monotonic() + self._farm.retry_s
        while True:
            try:
                return self.stream(shard).ask(op, message)
            except ServiceError as exc:
                if exc.code is not grpc.StatusCode.UNAVAILABLE or exc.field:
                    raise  # an answer (a refusal naming a field), not a lost stream
                self._streams.pop(shard).close()  # the stream is gone; the next call opens one
                if op not in READ_OPS or time.monotonic() >= deadline:
                    raise
                time.sleep(RETRY_PAUSE_S)

    def open_net(self, net: str, pins: Sequence[pb.Pin], shapes: Sequence[pb.Shape] = ()) -> list[int]:
        return list(self.ask(net, "open_net", pb.OpenNetRequest(net=net, pins=pins, shapes=shapes)).shape_ids)

    def commit(self, net: str, shapes: Sequence[pb.Shape]) -> list[int]:
        return list(self.ask(net, "commit", pb.CommitRequest(net=net, shapes=shapes)).shape_ids)

    def remove(self, net: str, shape_ids: Sequence[int]) -> int:
        return self.ask(net, "remove", pb.RemoveRequest(net=net, shape_ids=shape_ids)).removed

    def close_net(self, net: str) -> None:
        self.ask(net, "close_net", pb.CloseNetRequest(net=net))

    def score(self, net: str, candidate: Sequence[pb.Shape], *, without_changes: bool = False) -> pb.ScoreReply:
        return self.ask(net, "score", pb.ScoreRequest(net=net, candidate=candidate,
                                                      without_changes=without_changes))

    def score_batch(self, net: str, rects: Any, layers: str | Sequence[str], counts: Any = None,
                    details: bool = False):
        request = pb.ScoreBatchRequest(net=net, candidates=candidate_columns(rects, layers, counts),
                                       details=details)
        return batch_scores(self.ask(net, "score_batch", request))

    def headroom(self, net: str, layer: str, x: int, y: int) -> pb.HeadroomReply:
        return self.ask(net, "headroom", pb.HeadroomRequest(net=net, layer=layer, x=x, y=y))

    def check(self, net: str) -> pb.NetReport:
        return self.ask(net, "check", pb.CheckNetRequest(net=net))

    def advise(self, net: str, layer: str, x1: int, y1: int, x2: int, y2: int, *, width: int = 0,
               allow_non_preferred: bool = False, want: Sequence[str] = ()) -> pb.AdviseReply:
        return self.ask(net, "advise", advise_request(net, layer, x1, y1, x2, y2, width,
                                                      allow_non_preferred, want))
