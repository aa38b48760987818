"""The gRPC servicer: protobuf in, one engine call, protobuf out.

Each RPC is a *fill* function ``(servicer, request, out) -> None`` that converts the
request (``convert``), calls the engine once and writes the reply into ``out``. The
unary methods and the session stream share the same fill functions; the only thing
that differs is how a refusal travels: a unary call aborts with a rich status, a
session request gets a ``SessionError`` in its reply and the stream goes on.
"""

from __future__ import annotations

import logging
import time
from time import perf_counter

import grpc

from .. import EtchguardError, InputError, NoDeckError, __version__, loads_deck, resolve_layer
from ..v1 import etchguard_pb2 as pb
from ..v1 import etchguard_pb2_grpc as pb_grpc
from . import convert, errors

log = logging.getLogger("etchguard.server")


# -- fill functions: (servicer, request, out) -----------------------------------------

def _load_deck(self, req, out):
    deck = loads_deck(req.toml, "toml")
    self.engine.load_deck(deck, req.toml)  # the text: a journal replays it
    convert.deck_into(out, deck)
    out.toml = req.toml
    log.info("deck loaded", extra={"fields": {"deck": deck.name, "layers": len(deck.layers),
                                              "rules": len(deck.rules)}})


def _get_deck(self, req, out):
    convert.deck_into(out, self.engine.deck)
    out.toml = self.engine.deck_text or ""


def _open_net(self, req, out):
    deck = self.engine.deck
    pins = convert.pins(deck, req.pins)
    layer_range = convert.layer_range(deck, req.layer_range) if req.HasField("layer_range") else None
    shapes = convert.shapes(deck, req.shapes, "shapes")
    convert.ids_into(out, self.engine.open_net(req.net, pins, layer_range, shapes))


def _commit(self, req, out):
    shapes = convert.shapes(self.engine.deck, req.shapes, "shapes")
    convert.ids_into(out, self.engine.commit(req.net, shapes))


def _remove(self, req, out):
    ids = list(req.shape_ids)
    self.engine.remove(req.net, ids)
    out.removed = len(ids)


def _close_net(self, req, out):
    self.engine.close_net(req.net)


def _score(self, req, out):
    candidate = convert.shapes(self.engine.deck, req.candidate, "candidate")
    convert.score_into(out, self.engine.score(req.net, candidate, not req.without_changes))


def _score_batch(self, req, out):
    deck = self.engine.deck
    if not req.details:  # the columnar path
        counts, steps, rects = convert.candidate_arrays(deck, req.candidates)
        common = convert.common_shapes(deck, req.candidates)
        try:
            scores = self.engine.score_columns(req.net, steps, rects, counts, common)
        except EtchguardError as exc:
            raise convert.columns_error(exc) from None
        convert.columns_into(out, scores)
        return
    candidates = convert.candidate_columns(deck, req.candidates)
    convert.batch_into(out, self.engine.score_many(req.net, candidates, req.details), req.details)


def _headroom(self, req, out):
    deck = self.engine.deck
    layer = resolve_layer(deck, req.layer, "layer")
    convert.headroom_into(out, self.engine.headroom(req.net, layer, req.x, req.y))


def _budget(self, req, out):
    deck = self.engine.deck
    layer = resolve_layer(deck, req.layer, "layer")
    common = convert.shapes(deck, req.common, "common")
    window = convert.rect_tuple(req.window) if req.HasField("window") else None
    budget = self.engine.budget(req.net, layer, req.x, req.y, common, window)
    convert.budget_into(out, budget, deck)


def _budgets(self, req, out):
    for i, one in enumerate(req.requests):
        try:
            _budget(self, one, out.budgets.add())
        except EtchguardError as exc:
            raise type(exc)(exc.message, f"requests[{i}].{exc.field}" if exc.field else f"requests[{i}]") from None


def _get_net(self, req, out):
    spec, ids = self.engine.spec_with_ids(req.net)
    convert.net_into(out, spec, ids, self.engine.deck)


def _check(self, req, out):
    convert.report_into(out, self.engine.check(req.net))


def _advise(self, req, out):
    deck = self.engine.deck
    layer = resolve_layer(deck, req.layer, "layer")
    if req.width < 0:
        raise InputError(f"width must be >= 0 DBU (0 = the layer default), got {req.width}", "width")
    advice = self.engine.advise(req.net, layer, req.x1, req.y1, req.x2, req.y2, req.width or None,
                                req.allow_non_preferred, list(req.want) or None)
    convert.advice_into(out, advice, [l.name for l in deck.layers])


def _stats(self, req, out):
    try:
        deck_name = self.engine.deck.name
    except NoDeckError:
        deck_name = ""  # stats answer without a deck
    convert.stats_into(out, self.engine.stats(), deck_name, time.monotonic() - self.started,
                       __version__)


def _unary(name: str, fill, reply_type):
    def method(self, request, context):
        t0 = perf_counter()
        out = reply_type()
        try:
            fill(self, request, out)
        except EtchguardError as exc:
            self._abort(name, exc, context, t0)
        except Exception:  # a bug: answer INTERNAL, keep serving, log it
            self._internal(name, context, t0)
        self.metrics.observe(name, "OK", perf_counter() - t0)
        return out

    method.__name__ = name
    return method


# session request op (the SessionRequest oneof member) -> its fill function
_SESSION_OPS = {
    "commit": _commit, "remove": _remove, "score": _score, "score_batch": _score_batch,
    "headroom": _headroom, "check": _check, "open_net": _open_net, "close_net": _close_net,
    "advise": _advise, "budget": _budget, "budgets": _budgets,
}


class AntennaServicer(pb_grpc.AntennaServiceServicer):
    """etchguard.v1.AntennaService over one Engine."""

    SESSION_LABELS = {op: f"Session/{op}" for op in _SESSION_OPS}
    # metrics labels: every unary / server-streaming method, and each session op
    METHODS = ["LoadDeck", "GetDeck", "OpenNet", "Commit", "Remove", "CloseNet", "Score",
               "ScoreBatch", "Headroom", "Budget", "Budgets", "CheckNet", "GetNet", "CheckAll", "Advise", "GetStats",
               *SESSION_LABELS.values()]

    def __init__(self, engine, metrics) -> None:
        self.engine = engine
        self.metrics = metrics
        self.started = time.monotonic()

    LoadDeck = _unary("LoadDeck", _load_deck, pb.DeckInfo)
    GetDeck = _unary("GetDeck", _get_deck, pb.DeckInfo)
    OpenNet = _unary("OpenNet", _open_net, pb.ShapeIds)
    Commit = _unary("Commit", _commit, pb.ShapeIds)
    Remove = _unary("Remove", _remove, pb.RemoveReply)
    CloseNet = _unary("CloseNet", _close_net, pb.CloseNetReply)
    Score = _unary("Score", _score, pb.ScoreReply)
    ScoreBatch = _unary("ScoreBatch", _score_batch, pb.ScoreBatchReply)
    Headroom = _unary("Headroom", _headroom, pb.HeadroomReply)
    Budget = _unary("Budget", _budget, pb.BudgetReply)
    Budgets = _unary("Budgets", _budgets, pb.BudgetsReply)
    CheckNet = _unary("CheckNet", _check, pb.NetReport)
    GetNet = _unary("GetNet", _get_net, pb.NetContent)
    Advise = _unary("Advise", _advise, pb.AdviseReply)
    GetStats = _unary("GetStats", _stats, pb.Stats)

    def CheckAll(self, request, context):
        t0 = perf_counter()
        try:
            self.engine.deck  # noqa: B018 - FAILED_PRECONDITION without a deck
            for report in self.engine.check_all():
                if not context.is_active():
                    break
                if request.violations_only and report.legal:
                    continue
                out = pb.NetReport()
                convert.report_into(out, report)
                yield out
        except EtchguardError as exc:
            self._abort("CheckAll", exc, context, t0)
        except Exception:
            self._internal("CheckAll", context, t0)
        self.metrics.observe("CheckAll", "OK", perf_counter() - t0)

    def Session(self, request_iterator, context):
        labels = self.SESSION_LABELS
        observe = self.metrics.observe
        for req in request_iterator:
            t0 = perf_counter()
            reply = pb.SessionReply(seq=req.seq)
            op = req.WhichOneof("op")
            fill = _SESSION_OPS.get(op)  # type: ignore[arg-type]
            if fill is None:
                reply.error.code = grpc.StatusCode.INVALID_ARGUMENT.value[0]
                reply.error.message = "op: a session request needs an operation"
                reply.error.field = "op"
                observe("Session/none", "INVALID_ARGUMENT", perf_counter() - t0)
                yield reply
                continue
            out = getattr(reply, op)
            out.SetInParent()
            try:
                fill(self, getattr(req, op), out)
                code = "OK"
            except EtchguardError as exc:
                reply.ClearField(op)
                status, message, field = errors.describe(exc, op)
                reply.error.code = status.value[0]
                reply.error.message = message
                reply.error.field = field
                code = status.name
                log.debug("refused", extra={"fields": {"method": labels[op], "code": code,
                                                       "field": field, "seq": req.seq}})
            except Exception:
                reply.ClearField(op)
                log.exception("internal error", extra={"fields": {"method": labels[op]}})
                reply.error.code = grpc.StatusCode.INTERNAL.value[0]
                reply.error.message = "internal error; see the server log"
                code = "INTERNAL"
            observe(labels[op], code, perf_counter() - t0)
            yield reply

    # -- refusals -----------------------------------------------------------------------

    def _abort(self, method: str, exc: EtchguardError, context, t0: float) -> None:
        code, message, field = errors.describe(exc)
        self.metrics.observe(method, code.name, perf_counter() - t0)
        log.debug("refused", extra={"fields": {"method": method, "code": code.name, "field": field}})
        context.abort_with_status(errors.rich_status(code, message, field))

    def _internal(self, method: str, context, t0: float) -> None:
        log.exception("internal error", extra={"fields": {"method": method}})
        self.metrics.observe(method, "INTERNAL", perf_counter() - t0)
        context.abort(grpc.StatusCode.INTERNAL, "internal error; see the server log")
