"""The gRPC servicer: protobuf in, one engine call, protobuf out.

Each RPC is a *fill* function ``(call, request, out) -> None`` that converts the
request (``convert``), calls the engine once and writes the reply into ``out``. The
unary methods and the session stream share the same fill functions; the only thing
that differs is how a refusal travels: a unary call aborts with a rich status, a
session request gets a ``SessionError`` in its reply and the stream goes on.

``call`` (``_Call``) is what the adapter knows of the call beyond its request: the
engine of the caller's job (call metadata ``etchguard-job``; none: the unnamed job,
see ``etchguard._jobs``) and whether the caller still waits (its deadline and
cancellation, which long work such as advice asks between its steps).
"""

from __future__ import annotations

import logging
import time
from time import perf_counter

import grpc

from .. import EtchguardError, InputError, NoDeckError, __version__, loads_deck, resolve_layer
from .._errors import CancelledError, DeadlineExceededError, StoppedError
from .._jobs import Jobs
from .._lefdef import lef_text_rules
from ..v1 import etchguard_pb2 as pb
from ..v1 import etchguard_pb2_grpc as pb_grpc
from . import convert, errors

log = logging.getLogger("etchguard.server")


# -- fill functions: (servicer, request, out) -----------------------------------------

def _load_deck(call, req, out):
    warnings: list[str] = []
    if req.WhichOneof("rules") == "lef":
        # the deck the LEF states, held and journaled as its TOML text (replayed as any deck)
        deck, text, warnings = lef_text_rules([(f.name, f.text) for f in req.lef.files],
                                              req.lef.process_name or None, req.lef.dbu_per_micron or None)
    else:
        text = req.toml
        deck = loads_deck(text, "toml")
    call.own_engine().load_deck(deck, text)  # the text: a journal replays it
    convert.deck_into(out, deck)
    out.toml = text
    out.warnings.extend(warnings)
    log.info("deck loaded", extra={"fields": {"deck": deck.name, "layers": len(deck.layers),
                                              "rules": len(deck.rules), "from": req.WhichOneof("rules") or "toml",
                                              "warnings": len(warnings)}})


def _get_deck(call, req, out):
    convert.deck_into(out, call.engine.deck)
    out.toml = call.engine.deck_text or ""


def _open_net(call, req, out):
    deck, limits = call.engine.deck, call.engine.limits
    pins = convert.pins(deck, req.pins, "pins", limits)
    layer_range = convert.layer_range(deck, req.layer_range) if req.HasField("layer_range") else None
    shapes = convert.shapes(deck, req.shapes, "shapes", limits.max_shapes_per_net)
    convert.ids_into(out, call.own_engine().open_net(req.net, pins, layer_range, shapes))


def _commit(call, req, out):
    shapes = convert.shapes(call.engine.deck, req.shapes, "shapes", call.engine.limits.max_shapes_per_net)
    if not req.only_if_legal:
        convert.ids_into(out, call.engine.commit(req.net, shapes))
        return
    verdict, ids = call.engine.commit_if_legal(req.net, shapes)
    convert.score_into(out.verdict, verdict)
    convert.ids_into(out, ids)


def _remove(call, req, out):
    ids = convert.shape_ids(req.shape_ids, "shape_ids", call.engine.limits.max_shapes_per_net)
    call.engine.remove(req.net, ids)
    out.removed = len(ids)


def _close_net(call, req, out):
    call.engine.close_net(req.net)


def _declare_blockage(call, req, out):
    if not req.HasField("area"):
        raise InputError("a blockage needs its area (a layer and a rectangle)", "area")
    area = convert.shape(call.engine.deck, req.area, "area")
    out.id = call.engine.declare_blockage(area.layer, area.rect, req.blockage_id or None)  # 0: the server picks


def _remove_blockage(call, req, out):
    call.engine.remove_blockage(req.id)


def _score(call, req, out):
    limits = call.engine.limits
    candidate = convert.shapes(call.engine.deck, req.candidate, "candidate",
                               min(limits.max_candidates, limits.max_shapes_per_net))
    convert.score_into(out, call.engine.score(req.net, candidate, not req.without_changes))


def _score_batch(call, req, out):
    deck, limits = call.engine.deck, call.engine.limits
    if not req.details:  # the columnar path
        counts, steps, rects = convert.candidate_arrays(deck, req.candidates, "candidates",
                                                        limits.max_candidates)
        common = convert.common_shapes(deck, req.candidates)
        try:
            scores = call.engine.score_columns(req.net, steps, rects, counts, common)
        except EtchguardError as exc:
            raise convert.columns_error(exc) from None
        convert.columns_into(out, scores)
        return
    candidates = convert.candidate_columns(deck, req.candidates, "candidates",
                                           limits.max_candidates, limits.max_shapes_per_net)
    convert.batch_into(out, call.engine.score_many(req.net, candidates, req.details), req.details)


def _headroom(call, req, out):
    deck = call.engine.deck
    layer = resolve_layer(deck, req.layer, "layer")
    convert.headroom_into(out, call.engine.headroom(req.net, layer, req.x, req.y))


def _budget(call, req, out):
    deck = call.engine.deck
    layer = resolve_layer(deck, req.layer, "layer")
    common = convert.shapes(deck, req.common, "common")
    window = convert.rect_tuple(req.window) if req.HasField("window") else None
    budget = call.engine.budget(req.net, layer, req.x, req.y, common, window)
    convert.budget_into(out, budget, deck)


def _budgets(call, req, out):
    for i, one in enumerate(req.requests):
        try:
            _budget(call, one, out.budgets.add())
        except EtchguardError as exc:
            raise type(exc)(exc.message, f"requests[{i}].{exc.field}" if exc.field else f"requests[{i}]") from None


def _get_net(call, req, out):
    spec, ids = call.engine.spec_with_ids(req.net)
    convert.net_into(out, spec, ids, call.engine.deck)


def _check(call, req, out):
    convert.report_into(out, call.engine.check(req.net))


def _advise(call, req, out):
    deck = call.engine.deck
    layer = resolve_layer(deck, req.layer, "layer")
    if req.width < 0:
        raise InputError(f"width must be >= 0 DBU (0 = the layer default), got {req.width}", "width")
    advice = call.engine.advise(req.net, layer, req.x1, req.y1, req.x2, req.y2, req.width or None,
                                req.allow_non_preferred, list(req.want) or None, call.should_stop)
    convert.advice_into(out, advice, [l.name for l in deck.layers])


def _stats(call, req, out):
    try:
        deck_name = call.engine.deck.name
    except NoDeckError:
        deck_name = ""  # stats answer without a deck
    convert.stats_into(out, call.engine.stats(), deck_name, time.monotonic() - call.started,
                       __version__)


class _Call:
    """One call as its fill function sees it (module docstring)."""

    def __init__(self, jobs: Jobs, started: float, context) -> None:
        self.started = started  # the server's start (GetStats' uptime)
        self._jobs, self._context = jobs, context
        self.job = convert.job_of(context)

    @property
    def engine(self):
        """The job's engine, for a call that reads or changes what the job holds."""
        return self._jobs.find(self.job)

    def own_engine(self):
        """The job's engine, made if the job has none yet (OpenNet, LoadDeck)."""
        return self._jobs.open(self.job)

    def should_stop(self) -> StoppedError | None:
        """Why the caller no longer waits, or None (asked between steps of long work)."""
        remaining = self._context.time_remaining()
        if remaining is not None and remaining <= 0:
            return DeadlineExceededError("the call's deadline passed before its answer was ready; "
                                         "the work was stopped", "deadline")
        if not self._context.is_active():
            return CancelledError("the caller cancelled the call; the work was stopped", "call")
        return None


def _unary(name: str, fill, reply_type):
    def method(self, request, context):
        t0 = perf_counter()
        out = reply_type()
        try:
            convert.net_name_checked(request)
            fill(_Call(self.jobs, self.started, context), request, out)
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
    METHODS = ["LoadDeck", "GetDeck", "OpenNet", "Commit", "Remove", "CloseNet", "DeclareBlockage",
               "RemoveBlockage", "Score",
               "ScoreBatch", "Headroom", "Budget", "Budgets", "CheckNet", "GetNet", "CheckAll", "Advise", "GetStats",
               *SESSION_LABELS.values()]

    def __init__(self, jobs: Jobs, metrics) -> None:
        self.jobs = jobs
        self.metrics = metrics
        self.started = time.monotonic()

    @property
    def engine(self):
        """The unnamed job's engine (a single-tenant server's only one)."""
        return self.jobs.default

    LoadDeck = _unary("LoadDeck", _load_deck, pb.DeckInfo)
    GetDeck = _unary("GetDeck", _get_deck, pb.DeckInfo)
    OpenNet = _unary("OpenNet", _open_net, pb.ShapeIds)
    Commit = _unary("Commit", _commit, pb.ShapeIds)
    Remove = _unary("Remove", _remove, pb.RemoveReply)
    CloseNet = _unary("CloseNet", _close_net, pb.CloseNetReply)
    DeclareBlockage = _unary("DeclareBlockage", _declare_blockage, pb.BlockageId)
    RemoveBlockage = _unary("RemoveBlockage", _remove_blockage, pb.RemoveBlockageReply)
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
            engine = _Call(self.jobs, self.started, context).engine
            engine.deck  # noqa: B018 - FAILED_PRECONDITION without a deck
            for report in engine.check_all():
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
        try:
            call = _Call(self.jobs, self.started, context)
        except EtchguardError as exc:
            self._abort("Session", exc, context, perf_counter())
        for req in request_iterator:
            t0 = perf_counter()
            reply = pb.SessionReply(seq=req.seq)
            op = req.WhichOneof("op")
            fill = _SESSION_OPS.get(op or "")
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
                request = getattr(req, op)
                convert.net_name_checked(request)
                fill(call, request, out)
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
