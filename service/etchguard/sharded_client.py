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
  it) under one id, the one shard 0 picks; ``remove_blockage`` takes it from any farm
  client. See there for a shard that refuses or cannot be reached part way.
"""

from __future__ import annotations

import functools
import queue
import threading
import time
from collections.abc import Iterable, Iterator, Sequence
from pathlib import Path
from typing import Any

import grpc

from ._shards import Topology, load_topology, shard_of
from .client import (
    Client,
    ServiceError,
    Session,
    _commit_if_legal,
    _verdict_ids,
    advise_request,
    batch_scores,
    candidate_columns,
    pb,
)
from .v1 import shards_pb2 as spb
from .v1 import shards_pb2_grpc as spb_grpc

__all__ = ["ShardedClient", "ShardedSession"]

# unary calls whose first argument is the net: routed to its shard
ROUTED_CALLS = ("open_net", "commit", "commit_if_legal", "remove", "close_net", "score", "score_batch",
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

    # blockages: declared on every shard under one id, shard 0's
    def declare_blockage(self, area: pb.Shape) -> int:
        """Declare ``area`` (``rect(layer, ...)``) on every shard, so that advice on any
        net treats it as blocked; returns its id. Shard 0 picks the id, every other
        shard is asked for that same id, so advice's conflicts name it on every shard
        and any farm client (another one, a restarted router) can ``remove_blockage`` it.

        When a shard refuses, the shards before it remove it again and that shard's
        ``ServiceError`` is raised unchanged: so a bad area is refused by shard 0 with
        the single server's status and field, before any shard holds it; a shard that
        holds the id already (a blockage declared on it directly) refuses with
        ALREADY_EXISTS, and a new call gets a new id. When a shard may still hold it (one
        unreachable: its reply was lost; or an undo that failed), the ``ServiceError``
        (the failing shard's code, field "blockage_id") names those shards and the id
        that ``remove_blockage`` takes to clear them later. Only a reply lost from
        shard 0 itself leaves its id unknown (shard 0 alone may hold it then)."""
        blockage_id = self.shards[0].declare_blockage(area)
        for k, client in enumerate(self.shards[1:], start=1):
            try:
                client.declare_blockage(area, blockage_id=blockage_id)
            except ServiceError as exc:
                self._undo_declare(blockage_id, k, exc)
                raise
        return blockage_id

    def _undo_declare(self, blockage_id: int, failed: int, cause: ServiceError) -> None:
        """Remove a part-way declaration from the shards before ``failed``; raises when
        some shard may still hold it (the caller raises ``cause`` otherwise)."""
        left, _, _ = self._remove_from_shards(blockage_id, range(failed))
        lost = cause.code is grpc.StatusCode.UNAVAILABLE
        if not left and not lost:
            return
        where = [f"shard {k}" for k in left] + ([f"shard {failed} (reply lost)"] if lost else [])
        raise ServiceError(cause.code, f"declaring blockage {blockage_id} failed on shard {failed} "
                                       f"({cause.message}) and it may still be held by {', '.join(where)}; "
                                       f"remove_blockage({blockage_id}) removes it", "blockage_id") from cause

    def remove_blockage(self, blockage_id: int) -> None:
        """Remove blockage ``blockage_id`` from every shard (it has the same id on each,
        so any farm client can). A shard that answers NOT_FOUND has it removed already;
        NOT_FOUND (field "blockage_id") when no shard held it (after a part-way failure:
        none was left holding it). When a shard refuses or cannot be reached, the
        ``ServiceError`` names it; calling again retries."""
        left, failure, found = self._remove_from_shards(blockage_id, range(len(self.shards)))
        if failure is not None:
            raise ServiceError(failure.code, f"blockage {blockage_id} may still be held by shard(s) "
                               f"{', '.join(str(k) for k in left)} ({failure.message})",
                               "blockage_id") from failure
        if not found:
            raise ServiceError(grpc.StatusCode.NOT_FOUND, f"no shard holds blockage {blockage_id}",
                               "blockage_id")

    def _remove_from_shards(self, blockage_id: int, shards: Iterable[int]
                            ) -> tuple[list[int], ServiceError | None, bool]:
        """Remove the blockage from each of ``shards`` (NOT_FOUND: gone already); returns
        the shards that may still hold it, the first failure, and whether any shard
        removed it."""
        left: list[int] = []
        failure = None
        found = False
        for k in shards:
            try:
                self.shards[k].remove_blockage(blockage_id)
                found = True
            except ServiceError as exc:
                if exc.code is not grpc.StatusCode.NOT_FOUND:
                    left.append(k)
                    failure = failure or exc
        return left, failure, found

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

    def commit_if_legal(self, net: str, shapes: Sequence[pb.Shape]) -> tuple[pb.ScoreReply, list[int]]:
        return _verdict_ids(self.ask(net, "commit", _commit_if_legal(net, shapes)))

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
