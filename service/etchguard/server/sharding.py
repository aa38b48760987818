"""The gRPC side of a shard (``etchguard serve --topology FILE --shard-index K``).

* ``ShardServicer`` (etchguard.v1.ShardService) translates: GetTopology (refusing a
  caller whose topology fingerprint or shard index differs), FindObstacles (this
  shard's nets' metal near proposed rectangles), PublishMetal / GetMetal (the metal
  directory, see etchguard._shard_engine).
* ``GrpcPeers`` is how this shard reaches the others: one channel per peer, with the
  server's own token and, on TLS farms, ``--peer-tls-roots`` (and this server's own
  certificate as client certificate when peers require one). A push that fails marks
  the peer for a full resend, which a background thread retries every
  ``RESEND_EVERY_S``; the same thread fetches the grids of peers that were unknown.
* ``ShardRuntime`` starts it all once the server listens: publishing on, this
  shard's whole grid announced to every peer, every peer's grid fetched.
"""

from __future__ import annotations

import logging
import threading
from collections.abc import Sequence
from pathlib import Path

import grpc

from .. import EtchguardError
from .._errors import PeerUnavailableError
from .._geometry import Rect
from .._obstacles import Conflict
from .._shard_engine import NamedCell, ShardEngine
from .._shards import Topology
from ..v1 import etchguard_pb2 as pb
from ..v1 import shards_pb2 as spb
from ..v1 import shards_pb2_grpc as spb_grpc
from . import errors
from .convert import _conflicts_into

log = logging.getLogger("etchguard.server")

PUSH_TIMEOUT_S = 5.0  # a push to a live peer on a farm network takes milliseconds
QUERY_TIMEOUT_S = 10.0  # an obstacle query waits this long for a restarting peer
RESEND_EVERY_S = 0.5
SERVICE_NAME = spb.DESCRIPTOR.services_by_name["ShardService"].full_name


def _refuse(context, code: grpc.StatusCode, message: str, field: str) -> None:
    context.abort_with_status(errors.rich_status(code, f"{field}: {message}", field))


def topology_info(topology: Topology, me: int) -> spb.TopologyInfo:
    return spb.TopologyInfo(shard=me, shards=topology.shards, addresses=list(topology.addresses),
                            fingerprint=topology.fingerprint, directory_cell=topology.directory_cell,
                            canonical_text=topology.canonical_text())


def cells_message(me: int, topology: Topology, cells: Sequence[NamedCell],
                  complete: bool) -> spb.MetalCells:
    per_layer: dict[str, spb.LayerCells] = {}
    for layer, cx, cy in cells:
        entry = per_layer.get(layer)
        if entry is None:
            entry = per_layer[layer] = spb.LayerCells(layer=layer)
        if cx is None or cy is None:
            entry.whole_layer = True
        else:
            entry.cx.append(cx)
            entry.cy.append(cy)
    return spb.MetalCells(shard=me, fingerprint=topology.fingerprint,
                          layers=list(per_layer.values()), complete=complete)


def cells_of(message: spb.MetalCells) -> list[NamedCell]:
    out: list[NamedCell] = []
    for entry in message.layers:
        if entry.whole_layer:
            out.append((entry.layer, None, None))
        out.extend((entry.layer, cx, cy) for cx, cy in zip(entry.cx, entry.cy))
    return out


class ShardServicer(spb_grpc.ShardServiceServicer):
    """etchguard.v1.ShardService over one ShardEngine."""

    def __init__(self, engine: ShardEngine) -> None:
        self.engine = engine
        self.topology = engine.topology

    def GetTopology(self, request, context):
        fp = self.topology.fingerprint
        if request.expected_fingerprint and request.expected_fingerprint != fp:
            _refuse(context, grpc.StatusCode.FAILED_PRECONDITION,
                    f"the caller's topology (fingerprint {request.expected_fingerprint:016x}) is not "
                    f"this server's ({fp:016x}); every client and shard needs the same file",
                    "expected_fingerprint")
        if request.HasField("expected_shard") and request.expected_shard != self.engine.me:
            _refuse(context, grpc.StatusCode.FAILED_PRECONDITION,
                    f"this server is shard {self.engine.me}, not shard {request.expected_shard}",
                    "expected_shard")
        return topology_info(self.topology, self.engine.me)

    def _same_farm(self, fingerprint: int, context) -> None:
        if fingerprint != self.topology.fingerprint:
            _refuse(context, grpc.StatusCode.FAILED_PRECONDITION,
                    f"a peer with topology {fingerprint:016x} is not of this farm "
                    f"({self.topology.fingerprint:016x})", "fingerprint")

    def FindObstacles(self, request, context):
        engine = self.engine
        try:
            layer = engine.deck.layer_index.get(request.layer)
            if layer is None:
                raise EtchguardError(f"unknown layer {request.layer!r}", "layer")
            rects = [(r.xlo, r.ylo, r.xhi, r.yhi) for r in request.rects]
            found = engine.obstacles.own_conflicts(request.net, layer, rects, request.spacing)
        except EtchguardError as exc:
            code, message, field = errors.describe(exc)
            context.abort_with_status(errors.rich_status(code, message, field))
        reply = spb.FindObstaclesReply()
        names = [l.name for l in engine.deck.layers]
        for hits in found:
            _conflicts_into(reply.per_rect.add().conflicts, hits, names)
        return reply

    def PublishMetal(self, request, context):
        self._same_farm(request.fingerprint, context)
        self.engine.obstacles.directory.learn(request.shard, cells_of(request), request.complete)
        return spb.PublishMetalReply()

    def GetMetal(self, request, context):
        self._same_farm(request.expected_fingerprint, context)
        index = self.engine.obstacles
        return cells_message(self.engine.me, self.topology, index.named(index.grid.keys()), True)


def _conflict(layer: int, msg: pb.Conflict) -> Conflict:
    rect = msg.rect
    proposed = msg.proposed
    return Conflict(layer, (proposed.xlo, proposed.ylo, proposed.xhi, proposed.yhi),
                    (rect.xlo, rect.ylo, rect.xhi, rect.yhi), msg.owner, msg.other_net or None,
                    msg.blockage_id if msg.HasField("blockage_id") else None, msg.distance_dbu,
                    msg.spacing_dbu)


def peer_channel(address: str, token: str | None, tls_roots: bytes | None,
                 client_cert: tuple[bytes, bytes] | None = None) -> grpc.Channel:
    """A channel to another shard (or, for the sharding client, to any shard)."""
    options = [("grpc.max_receive_message_length", 64 * 1024 * 1024),
               ("grpc.max_send_message_length", 64 * 1024 * 1024),
               # a shard that restarts is back in a second or two: reconnect soon after
               # (gRPC's default backoff grows to two minutes)
               ("grpc.initial_reconnect_backoff_ms", 100), ("grpc.min_reconnect_backoff_ms", 100),
               ("grpc.max_reconnect_backoff_ms", 1000)]
    if tls_roots is not None and not address.startswith("unix:"):
        key, chain = client_cert if client_cert else (None, None)
        channel = grpc.secure_channel(address, grpc.ssl_channel_credentials(tls_roots, key, chain), options)
    else:
        channel = grpc.insecure_channel(address, options)
    if token is not None:
        from ..client import _AddHeader  # the client's interceptor: one way to send a token
        channel = grpc.intercept_channel(channel, _AddHeader("authorization", f"Bearer {token}"))
    return channel


class GrpcPeers:
    """The other shards, over gRPC (implements _shard_engine.Peers)."""

    def __init__(self, engine: ShardEngine, token: str | None = None, tls_roots: bytes | None = None,
                 client_cert: tuple[bytes, bytes] | None = None) -> None:
        self.engine = engine
        self.topology = engine.topology
        self.me = engine.me
        self._channels = {k: peer_channel(address, token, tls_roots, client_cert)
                          for k, address in enumerate(self.topology.addresses) if k != self.me}
        self._stubs = {k: spb_grpc.ShardServiceStub(ch) for k, ch in self._channels.items()}
        self._dirty: set[int] = set()  # peers owed a full resend of this shard's grid
        self._lock = threading.Lock()
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._background, name="etchguard-peers", daemon=True)

    # -- publishing ---------------------------------------------------------------------

    def publish(self, cells: Sequence[NamedCell]) -> None:
        message = cells_message(self.me, self.topology, cells, complete=False)
        with self._lock:
            targets = [k for k in self._stubs if k not in self._dirty]
        calls = [(k, self._stubs[k].PublishMetal.future(message, timeout=PUSH_TIMEOUT_S)) for k in targets]
        for k, call in calls:
            try:
                call.result()
            except grpc.RpcError as exc:
                self._mark_dirty(k, exc)

    def _mark_dirty(self, k: int, exc: grpc.RpcError) -> None:
        with self._lock:
            fresh = k not in self._dirty
            self._dirty.add(k)
        if fresh:
            log.warning("peer shard unreachable; its directory will be resent", extra={"fields": {
                "peer": k, "address": self.topology.addresses[k], "code": exc.code().name}})

    def announce(self, cells: Sequence[NamedCell]) -> None:
        """Send the whole grid to every peer (start-up); failures are resent later."""
        with self._lock:
            self._dirty |= set(self._stubs)
        self._resend(cells)

    def _resend(self, cells: Sequence[NamedCell] | None = None) -> None:
        with self._lock:
            targets = sorted(self._dirty)
        if not targets:
            return
        if cells is None:
            index = self.engine.obstacles
            cells = index.named(index.grid.keys())
        message = cells_message(self.me, self.topology, cells, complete=True)
        index = self.engine.obstacles
        for k in targets:
            try:
                self._stubs[k].PublishMetal(message, timeout=PUSH_TIMEOUT_S)
            except grpc.RpcError:
                continue
            with self._lock:
                self._dirty.discard(k)
            # Commits between the grid above and this instant skipped k (it was dirty):
            # the grid as it is now goes once more, after which every commit reaches k.
            latest = cells_message(self.me, self.topology, index.named(index.grid.keys()), complete=False)
            try:
                self._stubs[k].PublishMetal(latest, timeout=PUSH_TIMEOUT_S)
            except grpc.RpcError as exc:
                self._mark_dirty(k, exc)
                continue
            log.info("directory sent to peer shard", extra={"fields": {"peer": k}})

    def fetch(self) -> None:
        """Fetch the grid of every peer whose grid has not arrived. What is fetched is
        learnt but does not make the peer known: the peer may not yet push its commits
        here (this shard may still be owed its full resend), so until that resend
        arrives the peer stays one every question asks."""
        directory = self.engine.obstacles.directory
        request = spb.GetMetalRequest(expected_fingerprint=self.topology.fingerprint)
        for k in sorted(directory.unknown()):
            try:
                reply = self._stubs[k].GetMetal(request, timeout=PUSH_TIMEOUT_S)
            except grpc.RpcError:
                continue
            directory.learn(k, cells_of(reply), complete=False)

    # -- questions ------------------------------------------------------------------------

    def find_obstacles(self, shards: Sequence[int], net: str, layer: int, layer_name: str,
                       rects: Sequence[Rect], spacing: int) -> list[list[list[Conflict]]]:
        request = spb.FindObstaclesRequest(net=net, layer=layer_name, spacing=spacing,
                                           rects=[pb.Rect(xlo=r[0], ylo=r[1], xhi=r[2], yhi=r[3])
                                                  for r in rects])
        calls = [(k, self._stubs[k].FindObstacles.future(request, timeout=QUERY_TIMEOUT_S, wait_for_ready=True))
                 for k in shards]
        out = []
        for k, call in calls:
            try:
                reply = call.result()
            except grpc.RpcError as exc:
                raise PeerUnavailableError(
                    f"shard {k} at {self.topology.addresses[k]} holds metal near the run and cannot "
                    f"be asked ({exc.code().name}); advice would be incomplete", "shard") from None
            out.append([[_conflict(layer, c) for c in entry.conflicts] for entry in reply.per_rect])
        return out

    # -- life -------------------------------------------------------------------------------

    def _background(self) -> None:
        while not self._stop.wait(RESEND_EVERY_S):
            try:
                self._resend()
                self.fetch()
            except Exception:  # keep the thread alive; the next round retries
                log.exception("peer directory upkeep failed")

    def start(self) -> None:
        self._thread.start()

    def close(self) -> None:
        self._stop.set()
        if self._thread.is_alive():
            self._thread.join(5)
        for channel in self._channels.values():
            channel.close()


class ShardRuntime:
    """Starts a shard's peer traffic once its server listens, and ends it."""

    def __init__(self, engine: ShardEngine, peers: GrpcPeers) -> None:
        self.engine, self.peers = engine, peers

    def start(self) -> None:
        index = self.engine.obstacles
        index.peers = self.peers
        self.peers.announce(index.start_publishing())
        self.peers.fetch()
        self.peers.start()
        log.info("shard ready", extra={"fields": {
            "shard": self.engine.me, "shards": self.engine.topology.shards,
            "fingerprint": f"{self.engine.topology.fingerprint:016x}",
            "peers_unknown": sorted(index.directory.unknown())}})

    def stop(self) -> None:
        self.peers.close()


def _read(path: Path | None) -> bytes | None:
    return None if path is None else Path(path).read_bytes()


def attach(server: grpc.Server, engine: ShardEngine, config) -> ShardRuntime:
    """Register ShardService on ``server`` and build the runtime the server starts."""
    spb_grpc.add_ShardServiceServicer_to_server(ShardServicer(engine), server)
    token = None
    if config.token_file is not None:
        from .security import read_token
        token = read_token(config.token_file)
    client_cert = None
    if config.tls_client_ca is not None and config.tls_cert is not None:
        client_cert = (_read(config.tls_key), _read(config.tls_cert))
    peers = GrpcPeers(engine, token, _read(config.peer_tls_roots), client_cert)  # type: ignore[arg-type]
    return ShardRuntime(engine, peers)
