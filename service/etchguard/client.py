"""A typed Python client for the etchguard gRPC service (etchguard.v1).

    from etchguard.client import Client, pin, rect, run

    with Client("127.0.0.1:50051") as eg:
        eg.open_net("n1", [pin("u1.a", "M1", [(0, 0, 200, 200)], gate_area={"thin": 0.05})])
        ids = eg.commit("n1", [run("M1", 100, 100, 5000, 100)])
        reply = eg.score("n1", [run("M2", 4900, 100, 4900, 9000)])
        print(reply.cost, reply.legal)

        with eg.session() as s:          # one ordered stream per router thread
            s.commit("n1", [run("M1", 5000, 100, 8000, 100)])
            s.score("n1", [run("M2", 8000, 100, 8000, 12000)])

        scores = eg.score_batch("n1", rects, layers="M2")   # numpy in, numpy out

Replies are the generated protobuf messages (``etchguard.v1.etchguard_pb2``, typed
by its ``.pyi``); batch replies are numpy arrays. A refused call raises
``ServiceError`` with the status code, the message and the field it names.
All coordinates are int64 DBU; areas are um^2.
"""

from __future__ import annotations

import itertools
import queue
import threading
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import grpc
import numpy as np
from google.rpc import error_details_pb2
from grpc_health.v1 import health_pb2, health_pb2_grpc
from grpc_status import rpc_status

from ._budgetlocal import LocalBudget, LocalScore
from ._columns import BatchScores
from ._errors import ServiceError
from ._geometry import square
from .v1 import etchguard_pb2 as pb
from .v1 import etchguard_pb2_grpc as pb_grpc

__all__ = ["BatchScores", "Client", "LocalBudget", "LocalScore", "ServiceError", "Session",
           "budget_request", "candidate_columns", "path", "pb", "pin", "rect", "run", "runs_to_rects", "via"]

RectLike = Sequence[int]


def service_error(exc: grpc.RpcError) -> ServiceError:
    """The ``ServiceError`` of a failed call: its code, message and the field its
    ``BadRequest`` (else ``ErrorInfo``) detail names."""
    code = exc.code() if hasattr(exc, "code") else grpc.StatusCode.UNKNOWN
    message = exc.details() if hasattr(exc, "details") else str(exc)
    field_name = ""
    try:
        status = rpc_status.from_call(exc) if hasattr(exc, "trailing_metadata") else None
    except ValueError:  # details disagreeing with the code (a transport-level failure)
        status = None
    if status is not None:
        for detail in status.details:
            if detail.Is(error_details_pb2.BadRequest.DESCRIPTOR):
                bad = error_details_pb2.BadRequest()
                detail.Unpack(bad)
                if bad.field_violations:
                    field_name = bad.field_violations[0].field
            elif detail.Is(error_details_pb2.ErrorInfo.DESCRIPTOR) and not field_name:
                info = error_details_pb2.ErrorInfo()
                detail.Unpack(info)
                field_name = info.metadata.get("field", "")
    return ServiceError(code, message or "", field_name)


def session_error(error: pb.SessionError) -> ServiceError:
    """The ``ServiceError`` of a request a session stream refused."""
    return ServiceError(_CODES.get(error.code, grpc.StatusCode.UNKNOWN), error.message, error.field)


_CODES = {c.value[0]: c for c in grpc.StatusCode}
MAX_MESSAGE_BYTES = 64 * 1024 * 1024  # room for any server --max-message-bytes up to this (default 16 MiB)
_SIZE_OPTIONS = ("grpc.max_receive_message_length", "grpc.max_send_message_length")


# -- building requests ----------------------------------------------------------------

def rect(layer: str, xlo: int, ylo: int, xhi: int, yhi: int) -> pb.Shape:
    """A rectangle shape on ``layer`` (DBU, closed, xlo < xhi and ylo < yhi)."""
    return pb.Shape(layer=layer, rect=pb.Rect(xlo=xlo, ylo=ylo, xhi=xhi, yhi=yhi))


def run(layer: str, x1: int, y1: int, x2: int, y2: int, width: int = 0,
        extension: int | None = None) -> pb.Shape:
    """A straight run along its centre line (DBU), expanded by the server: ``width``
    0 takes the layer's default wire width; ``extension`` None extends width/2."""
    return pb.Shape(layer=layer, run=pb.Run(x1=x1, y1=y1, x2=x2, y2=y2, width=width,
                                            extension=extension))


def path(layer: str, points: Sequence[tuple[int, int]], width: int = 0) -> list[pb.Shape]:
    """Runs along a rectilinear centre-line polyline, one per segment (DBU)."""
    if len(points) < 2:
        raise ValueError("a path needs at least two points")
    return [run(layer, x1, y1, x2, y2, width) for (x1, y1), (x2, y2) in zip(points, points[1:])]


def via(deck: pb.DeckInfo, cut_layer: str, x: int, y: int) -> list[pb.Shape]:
    """The deck's default via centred at (x, y): pad below, cut, pad above (DBU)."""
    names = [layer.name for layer in deck.layers]
    if cut_layer not in names:
        raise ValueError(f"unknown layer {cut_layer!r} (deck has {', '.join(names)})")
    i = names.index(cut_layer)
    info = deck.layers[i]
    if info.kind != pb.LAYER_KIND_CUT or not info.cut_size or not 0 < i < len(names) - 1:
        raise ValueError(f"{cut_layer} is not a cut layer with a cut_size")
    pad = info.cut_size + 2 * info.enclosure
    return [rect(names[i - 1], *square(x, y, pad)), rect(cut_layer, *square(x, y, info.cut_size)),
            rect(names[i + 1], *square(x, y, pad))]


def pin(name: str, layer: str, rects: Iterable[RectLike],
        gate_area: Mapping[str, float] | float | None = None, diff_area: float = 0.0,
        cell_area: Mapping[str, float] | None = None,
        cell_side_area: Mapping[str, float] | None = None,
        block_car: Iterable[tuple[str, str, str, float]] = (),
        other_rects: Iterable[tuple[str, RectLike]] = ()) -> pb.Pin:
    """A pin: gate area um^2 per oxide (a number means oxide "thin"), diffusion um^2,
    in-cell conductor um^2 per layer name (area measure; side-wall um^2 for the side
    measure); a block pin's accumulated cumulative ratios as (layer, "area" | "side", oxide,
    ratio); rectangles in DBU, on `layer`, and (layer, rectangle) on other layers for a
    pin with shapes on several layers."""
    gates = {"thin": float(gate_area)} if isinstance(gate_area, (int, float)) else dict(gate_area or {})
    return pb.Pin(name=name, layer=layer,
                  rects=[pb.Rect(xlo=r[0], ylo=r[1], xhi=r[2], yhi=r[3]) for r in rects],
                  gate_area=gates, diff_area=diff_area, cell_area=dict(cell_area or {}),
                  cell_side_area=dict(cell_side_area or {}),
                  block_car=[pb.BlockRatio(layer=layer, oxide=oxide, ratio=ratio,
                                           measure=pb.MEASURE_SIDE if measure == "side" else pb.MEASURE_AREA)
                             for layer, measure, oxide, ratio in block_car],
                  other_rects=[pb.LayerRect(layer=layer, rect=pb.Rect(xlo=r[0], ylo=r[1], xhi=r[2], yhi=r[3]))
                               for layer, r in other_rects])


def runs_to_rects(x1: Any, y1: Any, x2: Any, y2: Any, width: Any,
                  extension: Any = None) -> np.ndarray:
    """Rectangles (n, 4) int64 of straight runs given by centre lines, vectorised.

    The same expansion as the server's ``Run``: ``extension`` past each end (width // 2
    when None), ``width // 2`` below / left of the line. Every line must be horizontal
    or vertical and every width positive (ValueError otherwise).
    """
    x1, y1, x2, y2 = (np.asarray(v, dtype=np.int64) for v in (x1, y1, x2, y2))
    x1, y1, x2, y2, width = np.broadcast_arrays(x1, y1, x2, y2, np.asarray(width, dtype=np.int64))
    if np.any(width <= 0):
        raise ValueError("widths must be positive DBU")
    ext = width // 2 if extension is None else np.broadcast_to(np.asarray(extension, dtype=np.int64), width.shape)
    if np.any(ext < 0):
        raise ValueError("end extensions must be >= 0 DBU")
    horizontal = y1 == y2
    if np.any(~horizontal & (x1 != x2)):
        raise ValueError("a run's centre line must be horizontal or vertical")
    below = width // 2
    out = np.empty(x1.shape + (4,), dtype=np.int64)
    lo_x, hi_x = np.minimum(x1, x2), np.maximum(x1, x2)
    lo_y, hi_y = np.minimum(y1, y2), np.maximum(y1, y2)
    out[..., 0] = np.where(horizontal, lo_x - ext, x1 - below)
    out[..., 1] = np.where(horizontal, y1 - below, lo_y - ext)
    out[..., 2] = np.where(horizontal, hi_x + ext, x1 - below + width)
    out[..., 3] = np.where(horizontal, y1 - below + width, hi_y + ext)
    return out.reshape(-1, 4)


def _layer_rows(layers: str | Sequence[str] | np.ndarray, n: int) -> np.ndarray:
    """One layer name per row, as a numpy array of str."""
    if isinstance(layers, str):
        return np.full(n, layers, dtype=object)
    names = np.asarray(layers, dtype=object)
    if names.shape != (n,):
        raise ValueError(f"{names.shape[0] if names.ndim else 1} layer names for {n} shapes")
    return names


def candidate_columns(rects: Any, layers: str | Sequence[str] | np.ndarray,
                      counts: Any = None, *, common: Sequence[tuple[Any, Any]] = (),
                      common_part: Any = None) -> pb.CandidateColumns:
    """Columnar candidates from numpy: ``rects`` (n, 4) int64 DBU, one row per shape;
    ``layers`` one name for all shapes or a name per shape; ``counts`` shapes per
    candidate (default: every shape is a candidate of its own).

    ``common`` lists shared parts, each ``(rects, layers)`` as above, sent once;
    ``common_part[j]`` is the part candidate j starts with (-1: none; default: every
    candidate starts with part 0 when parts are given)."""
    rects = np.asarray(rects, dtype=np.int64).reshape(-1, 4)
    n = len(rects)
    parts = [(np.asarray(r, dtype=np.int64).reshape(-1, 4), l) for r, l in common]
    part_names = [_layer_rows(l, len(r)) for r, l in parts]
    if isinstance(layers, str) and all(isinstance(l, str) and l == layers for _, l in parts):
        table, index = [layers], np.zeros(n, dtype=np.uint32)
        common_index = np.zeros(sum(len(r) for r, _ in parts), dtype=np.uint32)
    else:
        names = np.concatenate([_layer_rows(layers, n), *part_names]).astype(str)
        table_arr, inverse = np.unique(names, return_inverse=True)
        every = inverse.astype(np.uint32)
        table = [str(t) for t in table_arr]
        index, common_index = every[:n], every[n:]
    counts_arr = np.ones(n, dtype=np.uint32) if counts is None else np.asarray(counts, dtype=np.uint32)
    cols = pb.CandidateColumns(layers=table)
    cols.shape_count.extend(counts_arr.tolist())
    cols.layer.extend(np.asarray(index).tolist())
    cols.xlo.extend(rects[:, 0].tolist())
    cols.ylo.extend(rects[:, 1].tolist())
    cols.xhi.extend(rects[:, 2].tolist())
    cols.yhi.extend(rects[:, 3].tolist())
    if parts:
        shared = np.concatenate([r for r, _ in parts])
        cols.common_count.extend([len(r) for r, _ in parts])
        cols.common_layer.extend(np.asarray(common_index).tolist())
        cols.common_xlo.extend(shared[:, 0].tolist())
        cols.common_ylo.extend(shared[:, 1].tolist())
        cols.common_xhi.extend(shared[:, 2].tolist())
        cols.common_yhi.extend(shared[:, 3].tolist())
        if common_part is not None:
            cols.common_part.extend((np.asarray(common_part, dtype=np.int64) + 1).tolist())
    return cols


def batch_scores(reply: pb.ScoreBatchReply) -> BatchScores:
    """A ScoreBatchReply as the engine's ``BatchScores`` (numpy columns, ``details`` kept)."""
    return BatchScores(worst_change_utilization=np.array(reply.worst_change_utilization, dtype=np.float64),
                       worst_utilization=np.array(reply.worst_utilization, dtype=np.float64),
                       legal=np.array(reply.legal, dtype=bool), breaks_limit=np.array(reply.breaks_limit, dtype=bool),
                       cost=np.array(reply.cost, dtype=np.float64),
                       added_area_um2=np.array(reply.added_area_um2, dtype=np.float64), details=tuple(reply.details))

    def __len__(self) -> int:
        return len(self.cost)


# -- the client -------------------------------------------------------------------------

def _ids(reply: pb.ShapeIds) -> list[int]:
    return list(reply.shape_ids)


def _commit_if_legal(net: str, shapes: Sequence[pb.Shape]) -> pb.CommitRequest:
    return pb.CommitRequest(net=net, shapes=shapes, only_if_legal=True)


def _verdict_ids(reply: pb.ShapeIds) -> tuple[pb.ScoreReply, list[int]]:
    return reply.verdict, list(reply.shape_ids)


def advise_request(net: str, layer: str, x1: int, y1: int, x2: int, y2: int, width: int = 0,
                   allow_non_preferred: bool = False, want: Sequence[str] = ()) -> pb.AdviseRequest:
    """An AdviseRequest for a run given by its centre line (width 0: the layer's)."""
    return pb.AdviseRequest(net=net, layer=layer, x1=x1, y1=y1, x2=x2, y2=y2, width=width,
                            allow_non_preferred=allow_non_preferred, want=list(want))


def budget_request(net: str, layer: str, x: int, y: int, common: Sequence[pb.Shape] = (),
                   window: RectLike | None = None) -> pb.BudgetRequest:
    """A BudgetRequest for the component at (x, y) on ``layer`` (DBU), ``common`` shapes
    taken as committed, rectangles listed within ``window`` (None: everywhere)."""
    request = pb.BudgetRequest(net=net, layer=layer, x=x, y=y, common=common)
    if window is not None:
        request.window.xlo, request.window.ylo, request.window.xhi, request.window.yhi = window
    return request


class Client:
    """A connection to an etchguard server. Use as a context manager, or call close().

    ``target`` is ``host:port`` or ``unix:/path``; ``timeout`` (s) bounds each unary
    call (None: no deadline). Messages may be up to 64 MiB both ways unless ``options``
    say otherwise (the server's own limit, 16 MiB by default, is what it accepts). ``tls_roots`` (PEM bytes or a
    file) speaks TLS to a server with a certificate they sign; ``tls_client_cert`` and
    ``tls_client_key`` add a client certificate; ``token`` sends
    ``authorization: Bearer <token>`` on every call. ``job`` names the job every call
    works in (metadata ``etchguard-job``: its own deck and nets); None: the unnamed job.
    """

    def __init__(self, target: str = "127.0.0.1:50051", *, timeout: float | None = 30.0,
                 options: Sequence[tuple[str, Any]] = (), channel: grpc.Channel | None = None,
                 tls_roots: bytes | Path | None = None, tls_client_cert: bytes | Path | None = None,
                 tls_client_key: bytes | Path | None = None, token: str | None = None,
                 job: str | None = None) -> None:
        self.target = target
        self.timeout = timeout
        self._owns_channel = channel is None
        if channel is None:
            given = {name for name, _ in options}
            defaults = [(name, MAX_MESSAGE_BYTES) for name in _SIZE_OPTIONS if name not in given]
            if tls_roots is not None:
                creds = grpc.ssl_channel_credentials(_pem(tls_roots), _pem(tls_client_key),
                                                     _pem(tls_client_cert))
                channel = grpc.secure_channel(target, creds, options=[*defaults, *options])
            else:
                channel = grpc.insecure_channel(target, options=[*defaults, *options])
        if token is not None:
            channel = grpc.intercept_channel(channel, _AddHeader("authorization", f"Bearer {token}"))
        if job is not None:
            channel = grpc.intercept_channel(channel, _AddHeader("etchguard-job", job))
        self.channel = channel
        self.stub = pb_grpc.AntennaServiceStub(self.channel)
        self._deck: pb.DeckInfo | None = None

    def __enter__(self) -> Client:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        if self._owns_channel:
            self.channel.close()

    def _call(self, method, request):
        try:
            return method(request, timeout=self.timeout)
        except grpc.RpcError as exc:
            raise service_error(exc) from None

    def wait_ready(self, timeout: float = 10.0) -> None:
        """Block until the channel is connected (grpc.FutureTimeoutError otherwise)."""
        grpc.channel_ready_future(self.channel).result(timeout=timeout)

    def health(self, service: str = "") -> str:
        """The standard health status name ("SERVING", "NOT_SERVING", ...)."""
        stub = health_pb2_grpc.HealthStub(self.channel)
        reply = self._call(stub.Check, health_pb2.HealthCheckRequest(service=service))
        return health_pb2.HealthCheckResponse.ServingStatus.Name(reply.status)

    # deck
    def load_deck(self, toml: str | Path) -> pb.DeckInfo:
        """Load or replace the rule deck: TOML text, or a local file read here."""
        text = toml.read_text(encoding="utf-8") if isinstance(toml, Path) else toml
        self._deck = self._call(self.stub.LoadDeck, pb.LoadDeckRequest(toml=text))
        return self._deck

    def load_deck_lef(self, lef: Sequence[str | Path | tuple[str, str]], process_name: str = "",
                      dbu_per_micron: int = 0) -> pb.DeckInfo:
        """Load or replace the rule deck with the rules technology LEF states (mapped as
        ``etchguard deck-from-lef`` maps them): local files read here, or (name, text)
        pairs, the technology LEF first; the name (a file's own) is what errors and the
        reply's ``warnings`` cite. The reply's ``toml`` is the deck the server keeps."""
        files = []
        for item in lef:
            if isinstance(item, tuple):
                files.append(pb.LefText(name=item[0], text=item[1]))
            else:
                files.append(pb.LefText(name=Path(item).name, text=Path(item).read_text(encoding="utf-8")))
        request = pb.LoadDeckRequest(lef=pb.LefRules(files=files, process_name=process_name,
                                                     dbu_per_micron=dbu_per_micron))
        self._deck = self._call(self.stub.LoadDeck, request)
        return self._deck

    @property
    def deck(self) -> pb.DeckInfo:
        """The server's deck (fetched once, refreshed by load_deck and load_deck_lef)."""
        if self._deck is None:
            self._deck = self._call(self.stub.GetDeck, pb.GetDeckRequest())
        return self._deck

    def via(self, cut_layer: str, x: int, y: int) -> list[pb.Shape]:
        return via(self.deck, cut_layer, x, y)

    # nets and shapes
    def open_net(self, net: str, pins: Sequence[pb.Pin], shapes: Sequence[pb.Shape] = (),
                 layer_range: tuple[str, str] | None = None) -> list[int]:
        request = pb.OpenNetRequest(net=net, pins=pins, shapes=shapes)
        if layer_range is not None:
            request.layer_range.lowest, request.layer_range.highest = layer_range
        return _ids(self._call(self.stub.OpenNet, request))

    def commit(self, net: str, shapes: Sequence[pb.Shape]) -> list[int]:
        return _ids(self._call(self.stub.Commit, pb.CommitRequest(net=net, shapes=shapes)))

    def commit_if_legal(self, net: str, shapes: Sequence[pb.Shape]) -> tuple[pb.ScoreReply, list[int]]:
        """Score and, when legal, commit in one call: the score and the ids (empty: not
        committed)."""
        return _verdict_ids(self._call(self.stub.Commit, _commit_if_legal(net, shapes)))

    def remove(self, net: str, shape_ids: Sequence[int]) -> int:
        return self._call(self.stub.Remove, pb.RemoveRequest(net=net, shape_ids=shape_ids)).removed

    def close_net(self, net: str) -> None:
        self._call(self.stub.CloseNet, pb.CloseNetRequest(net=net))

    def declare_blockage(self, area: pb.Shape, *, blockage_id: int = 0) -> int:
        """An area no new shape may use (``rect(layer, ...)``); returns its id, which is
        ``blockage_id`` when given (ALREADY_EXISTS when the server holds it already)."""
        request = pb.DeclareBlockageRequest(area=area, blockage_id=blockage_id)
        return self._call(self.stub.DeclareBlockage, request).id

    def remove_blockage(self, blockage_id: int) -> None:
        self._call(self.stub.RemoveBlockage, pb.RemoveBlockageRequest(id=blockage_id))

    # questions
    def score(self, net: str, candidate: Sequence[pb.Shape], *,
              without_changes: bool = False) -> pb.ScoreReply:
        """What the candidate would do; ``without_changes`` leaves out per-ratio detail."""
        return self._call(self.stub.Score, pb.ScoreRequest(net=net, candidate=candidate,
                                                           without_changes=without_changes))

    def score_batch(self, net: str, rects: Any, layers: str | Sequence[str] | np.ndarray,
                    counts: Any = None, details: bool = False, *,
                    common: Sequence[tuple[Any, Any]] = (), common_part: Any = None) -> BatchScores:
        """Score candidates given as numpy rectangles, optionally starting with shared
        parts sent once (see ``candidate_columns``)."""
        columns = candidate_columns(rects, layers, counts, common=common, common_part=common_part)
        return self.score_columns(net, columns, details)

    def score_columns(self, net: str, columns: pb.CandidateColumns, details: bool = False) -> BatchScores:
        request = pb.ScoreBatchRequest(net=net, candidates=columns, details=details)
        return batch_scores(self._call(self.stub.ScoreBatch, request))

    def headroom(self, net: str, layer: str, x: int, y: int) -> pb.HeadroomReply:
        return self._call(self.stub.Headroom, pb.HeadroomRequest(net=net, layer=layer, x=x, y=y))

    def budget(self, net: str, layer: str, x: int, y: int, common: Sequence[pb.Shape] = (),
               window: RectLike | None = None) -> pb.BudgetReply:
        """The budget of the component at a point; ``LocalBudget(reply)`` evaluates it."""
        return self._call(self.stub.Budget, budget_request(net, layer, x, y, common, window))

    def budgets(self, requests: Sequence[pb.BudgetRequest]) -> list[pb.BudgetReply]:
        """Several budgets in one message (see ``budget_request``), in order."""
        return list(self._call(self.stub.Budgets, pb.BudgetsRequest(requests=requests)).budgets)

    def check(self, net: str) -> pb.NetReport:
        return self._call(self.stub.CheckNet, pb.CheckNetRequest(net=net))

    def get_net(self, net: str) -> pb.NetContent:
        """The net's pins and committed shapes with their ids (DBU)."""
        return self._call(self.stub.GetNet, pb.GetNetRequest(net=net))

    def advise(self, net: str, layer: str, x1: int, y1: int, x2: int, y2: int, *, width: int = 0,
               allow_non_preferred: bool = False, want: Sequence[str] = ()) -> pb.AdviseReply:
        """Repair advice for a run (layer hop, jumper point, diode); ``want`` picks some."""
        return self._call(self.stub.Advise, advise_request(net, layer, x1, y1, x2, y2, width,
                                                           allow_non_preferred, want))

    def check_all(self, violations_only: bool = False) -> Iterator[pb.NetReport]:
        """Reports of every open net, streamed as the server computes them."""
        try:
            yield from self.stub.CheckAll(pb.CheckAllRequest(violations_only=violations_only))
        except grpc.RpcError as exc:
            raise service_error(exc) from None

    def stats(self) -> pb.Stats:
        return self._call(self.stub.GetStats, pb.GetStatsRequest())

    def session(self) -> Session:
        return Session(self.stub)


_DONE = object()


def _pem(value: bytes | Path | None) -> bytes | None:
    return value.read_bytes() if isinstance(value, Path) else value


class _AddHeader(grpc.UnaryUnaryClientInterceptor, grpc.UnaryStreamClientInterceptor,
                 grpc.StreamUnaryClientInterceptor, grpc.StreamStreamClientInterceptor):
    """Adds one metadata entry to every call (the bearer token, the job's name)."""

    def __init__(self, key: str, value: str) -> None:
        self._header = (key, value)

    def _with_token(self, details: grpc.ClientCallDetails) -> grpc.ClientCallDetails:
        return _CallDetails(details.method, details.timeout,
                            [*(details.metadata or ()), self._header], details.credentials,
                            getattr(details, "wait_for_ready", None),
                            getattr(details, "compression", None))

    def intercept_unary_unary(self, continuation, details, request):
        return continuation(self._with_token(details), request)

    def intercept_unary_stream(self, continuation, details, request):
        return continuation(self._with_token(details), request)

    def intercept_stream_unary(self, continuation, details, request_iterator):
        return continuation(self._with_token(details), request_iterator)

    def intercept_stream_stream(self, continuation, details, request_iterator):
        return continuation(self._with_token(details), request_iterator)


@dataclass(frozen=True)
class _CallDetails(grpc.ClientCallDetails):
    method: str
    timeout: float | None
    metadata: Any
    credentials: Any
    wait_for_ready: Any
    compression: Any


class Session:
    """One ordered bidirectional stream: requests are answered in order, one reply each.

    The blocking methods (``commit``, ``score``, ...) send one request and wait for its
    reply: one stream message per question. To pipeline, ``send(op, message)`` returns
    the request's seq without waiting and ``receive()`` returns the next reply (in the
    order sent). A refused request raises ``ServiceError`` (blocking methods) or comes
    back with ``reply.error`` set (``receive``); the stream stays open either way.
    """

    def __init__(self, stub: pb_grpc.AntennaServiceStub) -> None:
        self._outbox: queue.SimpleQueue = queue.SimpleQueue()
        self._seq = itertools.count(1)
        self._pending = 0
        self._lock = threading.Lock()
        self._replies = stub.Session(self._requests())

    def _requests(self) -> Iterator[pb.SessionRequest]:
        get = self._outbox.get
        while True:
            item = get()
            if item is _DONE:
                return
            yield item

    def __enter__(self) -> Session:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        """End the stream (replies not yet received are dropped)."""
        self._outbox.put(_DONE)
        self._replies.cancel()

    def send(self, op: str, message: Any) -> int:
        """Queue one request (``op`` a SessionRequest field: "score", "commit", ...)."""
        seq = next(self._seq)
        self.send_request(pb.SessionRequest(seq=seq, **{op: message}))
        return seq

    def send_request(self, request: pb.SessionRequest) -> None:
        """Queue a request built by the caller (its seq is the caller's to choose)."""
        self._outbox.put(request)
        self._pending += 1

    def receive(self) -> pb.SessionReply:
        """The next reply, in the order the requests were sent."""
        try:
            reply = next(self._replies)
        except grpc.RpcError as exc:
            raise service_error(exc) from None
        self._pending -= 1
        return reply

    def ask(self, op: str, message: Any):
        """Send one request and return its result (raises ServiceError if refused)."""
        with self._lock:
            if self._pending:
                raise RuntimeError(f"{self._pending} pipelined replies are not received yet")
            self.send(op, message)
            reply = self.receive()
        if reply.HasField("error"):
            raise session_error(reply.error)
        return getattr(reply, op)

    def open_net(self, net: str, pins: Sequence[pb.Pin], shapes: Sequence[pb.Shape] = ()) -> list[int]:
        return _ids(self.ask("open_net", pb.OpenNetRequest(net=net, pins=pins, shapes=shapes)))

    def commit(self, net: str, shapes: Sequence[pb.Shape]) -> list[int]:
        return _ids(self.ask("commit", pb.CommitRequest(net=net, shapes=shapes)))

    def commit_if_legal(self, net: str, shapes: Sequence[pb.Shape]) -> tuple[pb.ScoreReply, list[int]]:
        return _verdict_ids(self.ask("commit", _commit_if_legal(net, shapes)))

    def remove(self, net: str, shape_ids: Sequence[int]) -> int:
        return self.ask("remove", pb.RemoveRequest(net=net, shape_ids=shape_ids)).removed

    def score(self, net: str, candidate: Sequence[pb.Shape], *,
              without_changes: bool = False) -> pb.ScoreReply:
        return self.ask("score", pb.ScoreRequest(net=net, candidate=candidate,
                                                 without_changes=without_changes))

    def score_batch(self, net: str, rects: Any, layers: str | Sequence[str] | np.ndarray,
                    counts: Any = None, details: bool = False, *,
                    common: Sequence[tuple[Any, Any]] = (), common_part: Any = None) -> BatchScores:
        columns = candidate_columns(rects, layers, counts, common=common, common_part=common_part)
        request = pb.ScoreBatchRequest(net=net, candidates=columns, details=details)
        return batch_scores(self.ask("score_batch", request))

    def headroom(self, net: str, layer: str, x: int, y: int) -> pb.HeadroomReply:
        return self.ask("headroom", pb.HeadroomRequest(net=net, layer=layer, x=x, y=y))

    def budget(self, net: str, layer: str, x: int, y: int, common: Sequence[pb.Shape] = (),
               window: RectLike | None = None) -> pb.BudgetReply:
        return self.ask("budget", budget_request(net, layer, x, y, common, window))

    def budgets(self, requests: Sequence[pb.BudgetRequest]) -> list[pb.BudgetReply]:
        return list(self.ask("budgets", pb.BudgetsRequest(requests=requests)).budgets)

    def check(self, net: str) -> pb.NetReport:
        return self.ask("check", pb.CheckNetRequest(net=net))

    def advise(self, net: str, layer: str, x1: int, y1: int, x2: int, y2: int, *, width: int = 0,
               allow_non_preferred: bool = False, want: Sequence[str] = ()) -> pb.AdviseReply:
        return self.ask("advise", advise_request(net, layer, x1, y1, x2, y2, width,
                                                 allow_non_preferred, want))

    def close_net(self, net: str) -> None:
        self.ask("close_net", pb.CloseNetRequest(net=net))
