"""Protobuf <-> engine conversion: the only place that knows both shapes of a value.

Inbound, every value goes through the engine's own validators (``make_shape``,
``make_pin``, ``resolve_layer``, ...) with the proto field path as the field name, so
an InputError names e.g. ``candidate[2].rect`` or ``pins[0].gate_area.thin``. Before
that, a repeated field is held to its limit by its length alone (``at_most``), so an
oversize request costs nothing but its parse: converting costs hundreds of bytes a
shape, which the engine's own check would only see afterwards.
Outbound, the ``*_into`` functions fill a message the caller owns (a unary reply or
a session reply's oneof member), so no reply is built twice or copied.
"""

from __future__ import annotations

import re
from collections.abc import Sequence

import numpy as np

from .. import EtchguardError, InputError, LimitExceededError, Limits, make_pin, make_shape, resolve_layer, run_shapes
from .._columns import CommonShapes
from .._jobs import DEFAULT_JOB, JOB_FIELD, check_job_name
from .._kinds import LayerKind, LimitedBy, Measure, OptionStatus, RatioKind
from .._names import check_length
from .._nets import checked_layer_range
from .._rules import DEFAULT_OXIDE
from ..v1 import etchguard_pb2 as pb

_MEASURE = {Measure.AREA: pb.MEASURE_AREA, Measure.SIDE: pb.MEASURE_SIDE}
_KIND = {RatioKind.PARTIAL: pb.RATIO_KIND_PARTIAL, RatioKind.CUMULATIVE: pb.RATIO_KIND_CUMULATIVE}
_LAYER_KIND = {LayerKind.ROUTING: pb.LAYER_KIND_ROUTING, LayerKind.CUT: pb.LAYER_KIND_CUT}
_STATUS = {OptionStatus.LEGAL: pb.OPTION_STATUS_LEGAL, OptionStatus.ILLEGAL: pb.OPTION_STATUS_ILLEGAL,
           OptionStatus.BLOCKED: pb.OPTION_STATUS_BLOCKED}
_LIMITED_BY = {LimitedBy.NONE: pb.LIMITED_BY_UNSPECIFIED, LimitedBy.LIMIT: pb.LIMITED_BY_LIMIT,
               LimitedBy.HOP_ROOM: pb.LIMITED_BY_HOP_ROOM, LimitedBy.RUN: pb.LIMITED_BY_RUN}
_DIRECTION = {"horizontal": pb.DIRECTION_HORIZONTAL, "vertical": pb.DIRECTION_VERTICAL, None: 0}
# fields run_shapes / run_rect name, as paths under the Shape message
_RUN_FIELDS = {"layer": "layer", "run": "run", "width": "run.width", "extension": "run.extension"}


# -- inbound ----------------------------------------------------------------------------

def net_name_checked(request) -> None:
    """A request's ``net`` within the name limit, refused before the engine would look
    it up (and quote it back in a NOT_FOUND)."""
    if "net" in request.DESCRIPTOR.fields_by_name:
        check_length(request.net, "a net name", "net")


def job_of(context) -> str:
    """The job a call names in its metadata (``etchguard-job``), validated; the unnamed
    job when it names none. Named twice is refused: the two could disagree."""
    named = [value for key, value in (context.invocation_metadata() or ()) if key == JOB_FIELD]
    if len(named) > 1:
        raise InputError("a call names one job at most", JOB_FIELD)
    return check_job_name(named[0]) if named else DEFAULT_JOB


def at_most(count: int, limit: int | None, what: str, path: str) -> None:
    """Refuse a repeated field by its length, before any of it is converted."""
    if limit is not None and count > limit:
        raise LimitExceededError(f"{count} {what} exceed the limit of {limit}", path)


def shape(deck, msg, path: str):
    """One proto Shape (rect or run) as an engine Shape."""
    kind = msg.WhichOneof("geometry")
    if kind == "rect":
        r = msg.rect
        return make_shape(deck, msg.layer, (r.xlo, r.ylo, r.xhi, r.yhi), path)
    if kind == "run":
        step = resolve_layer(deck, msg.layer, f"{path}.layer")
        run = msg.run
        extension = run.extension if run.HasField("extension") else None
        try:
            (expanded,) = run_shapes(deck, step, run.x1, run.y1, run.x2, run.y2,
                                     run.width or None, extension)
        except InputError as exc:
            raise InputError(exc.message, f"{path}.{_RUN_FIELDS.get(exc.field or '', 'run')}") from None
        return make_shape(deck, msg.layer, expanded.rect, f"{path}.run")
    raise InputError("a shape needs a rect or a run", f"{path}.geometry")


def shapes(deck, msgs, path: str, limit: int | None = None) -> list:
    """Proto Shapes as engine Shapes; more than ``limit`` are refused unconverted."""
    at_most(len(msgs), limit, "shapes", path)
    return [shape(deck, m, f"{path}[{i}]") for i, m in enumerate(msgs)]


def shape_ids(ids, path: str = "shape_ids", limit: int | None = None) -> list[int]:
    at_most(len(ids), limit, "shape ids", path)
    return list(ids)


def pins(deck, msgs, path: str = "pins", limits: Limits | None = None) -> list:
    """Proto Pins as engine Pins; with ``limits``, more pins than a net may have, or
    more rectangles over all of them than a net may hold shapes, are refused unconverted."""
    if limits is not None:
        at_most(len(msgs), limits.max_pins_per_net, "pins", path)
        rects = 0
        for i, p in enumerate(msgs):
            rects += len(p.rects) + len(p.other_rects)
            at_most(rects, limits.max_shapes_per_net, "pin rectangles", f"{path}[{i}].rects")
    out = []
    for i, p in enumerate(msgs):
        where = f"{path}[{i}]"
        out.append(make_pin(deck, p.name, p.layer,
                            [(r.xlo, r.ylo, r.xhi, r.yhi) for r in p.rects]
                            + [{"layer": o.layer, "rect": rect_tuple(o.rect)} for o in p.other_rects],
                            dict(p.gate_area), p.diff_area, dict(p.cell_area), where,
                            dict(p.cell_side_area), [_block_ratio(b) for b in p.block_car]))
    return out


_MEASURE_NAME = {pb.MEASURE_UNSPECIFIED: "area", pb.MEASURE_AREA: "area", pb.MEASURE_SIDE: "side"}


def _block_ratio(msg) -> dict[str, object]:
    """A BlockRatio as the net file states one (make_pin validates it)."""
    return {"layer": msg.layer, "measure": _MEASURE_NAME.get(msg.measure, msg.measure),
            "oxide": msg.oxide or DEFAULT_OXIDE, "ratio": msg.ratio}


def layer_range(deck, msg, path: str = "layer_range"):
    return checked_layer_range(deck, msg.lowest, msg.highest, path)


def _checked_columns(deck, cols, path: str) -> tuple[np.ndarray, np.ndarray]:
    """Shape counts agree with the columns, no candidate is empty, the layer table
    resolves and every index is in it. Returns (counts, deck step per shape)."""
    n = len(cols.layer)
    for name in ("xlo", "ylo", "xhi", "yhi"):
        if len(getattr(cols, name)) != n:
            raise InputError(f"has {len(getattr(cols, name))} values, but `layer` has {n}",
                             f"{path}.{name}")
    counts = np.array(cols.shape_count, dtype=np.int64)
    if int(counts.sum()) != n:
        raise InputError(f"shape counts add up to {int(counts.sum())}, but there are {n} shapes",
                         f"{path}.shape_count")
    empty = np.flatnonzero(counts == 0)
    if len(empty):
        raise InputError("a candidate needs at least one shape", f"{path}.shape_count[{empty[0]}]")
    return counts, _steps(deck, cols, cols.layer, path, "layer")


def _steps(deck, cols, indices, path: str, field: str) -> np.ndarray:
    """Deck steps of shapes given as indices into the message's `layers` names."""
    table = np.array([resolve_layer(deck, name, f"{path}.layers[{j}]")
                      for j, name in enumerate(cols.layers)], dtype=np.int64)
    index = np.array(indices, dtype=np.int64)
    past = np.flatnonzero(index >= len(table))
    if len(past):
        k = past[0]
        raise InputError(f"index {index[k]} is past the {len(table)} entries of `layers`",
                         f"{path}.{field}[{k}]")
    return table[index] if len(index) else index


def _rect_columns(cols, names: tuple[str, str, str, str]) -> np.ndarray:
    """(N, 4) int64 DBU rectangles from four coordinate columns."""
    return np.column_stack([np.array(getattr(cols, name), dtype=np.int64) for name in names]).reshape(-1, 4)


def candidate_arrays(deck, cols, path: str = "candidates", max_candidates: int | None = None
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Candidates as (shapes per candidate, deck step per shape, (N, 4) int64 DBU rects),
    the engine's columnar form (Engine.score_columns validates the rectangles)."""
    at_most(len(cols.shape_count), max_candidates, "candidates", path)
    counts, steps = _checked_columns(deck, cols, path)
    return counts, steps, _rect_columns(cols, ("xlo", "ylo", "xhi", "yhi"))


def common_shapes(deck, cols, path: str = "candidates") -> CommonShapes | None:
    """The shared parts of columnar candidates (None when there are none), in the
    engine's form: rows, shapes per part, and part index per candidate (-1: none)."""
    n = len(cols.common_layer)
    if not (n or len(cols.common_count) or any(cols.common_part)):
        return None
    for name in ("common_xlo", "common_ylo", "common_xhi", "common_yhi"):
        if len(getattr(cols, name)) != n:
            raise InputError(f"has {len(getattr(cols, name))} values, but `common_layer` has {n}",
                             f"{path}.{name}")
    steps = _steps(deck, cols, cols.common_layer, path, "common_layer")
    rects = _rect_columns(cols, ("common_xlo", "common_ylo", "common_xhi", "common_yhi"))
    part = np.array(cols.common_part, dtype=np.int64) - 1 if len(cols.common_part) else None
    if part is not None:
        past = np.flatnonzero(part >= len(cols.common_count))
        if len(past):
            j = past[0]
            raise InputError(f"part {part[j] + 1} is past the {len(cols.common_count)} shared parts "
                             "(1-based; 0 = none)", f"{path}.common_part[{j}]")
    return CommonShapes(steps, rects, np.array(cols.common_count, dtype=np.int64), part)


# engine field -> CandidateColumns field, for Engine.score_columns' refusals
_COLUMN_FIELDS = {"rects": "[{}].rect", "layers": ".layer[{}]", "shape_count": ".shape_count[{}]",
                  "common.rects": ".common[{}].rect", "common.layers": ".common_layer[{}]",
                  "common.shape_count": ".common_count[{}]", "common.part": ".common_part[{}]"}


def columns_error(exc: EtchguardError, path: str = "candidates") -> EtchguardError:
    """An error of Engine.score_columns (fields ``rects[i]``, ``layers[i]``, ``rects``,
    ``common.part[i]``, ...) renamed to the CandidateColumns field paths."""
    field = exc.field or ""
    m = re.fullmatch(r"((?:common\.)?(?:rects|layers|shape_count|part))(?:\[(\d+)\])?", field)
    if m is None:
        return exc  # about the request, not the columns ("net", "deck")
    field = path if m[2] is None else path + _COLUMN_FIELDS[m[1]].format(m[2])
    return type(exc)(exc.message, field)


def candidate_columns(deck, cols, path: str = "candidates", max_candidates: int | None = None,
                      max_shapes: int | None = None) -> list[list]:
    """Columnar candidates (CandidateColumns) as a list of engine shape lists; more than
    ``max_candidates`` candidates or ``max_shapes`` shapes are refused unconverted."""
    at_most(len(cols.shape_count), max_candidates, "candidates", path)
    at_most(len(cols.layer), max_shapes, "shapes", path)
    counts, steps = _checked_columns(deck, cols, path)
    names = [layer.name for layer in deck.layers]
    layer = steps.tolist()
    xlo, ylo, xhi, yhi = list(cols.xlo), list(cols.ylo), list(cols.xhi), list(cols.yhi)
    out: list[list] = []
    i = 0
    for count in counts.tolist():
        out.append([make_shape(deck, names[layer[k]], (xlo[k], ylo[k], xhi[k], yhi[k]), f"{path}[{k}]")
                    for k in range(i, i + count)])
        i += count
    common = common_shapes(deck, cols, path)
    if common is None:
        return out
    parts, at = [], 0
    for k, count in enumerate(np.asarray(common.shape_count).tolist()):
        if count < 1:
            raise InputError("a shared part needs at least one shape", f"{path}.common_count[{k}]")
        parts.append([make_shape(deck, names[int(common.layers[j])], tuple(common.rects[j].tolist()),
                                 f"{path}.common[{j}]") for j in range(at, at + count)])
        at += count
    if at != len(common.rects):
        raise InputError(f"shared part counts add up to {at}, but there are {len(common.rects)} shared "
                         "shapes", f"{path}.common_count")
    chosen = [0] * len(out) if common.part is None else np.asarray(common.part).tolist()
    if len(chosen) != len(out):
        raise InputError(f"has {len(chosen)} values for {len(out)} candidates", f"{path}.common_part")
    for j, k in enumerate(chosen):
        if not -1 <= k < len(parts):
            raise InputError(f"no shared part {k + 1} (there are {len(parts)}; 0 = none)", f"{path}.common_part[{j}]")
        if k >= 0:
            out[j] = parts[k] + out[j]
    return out


# -- outbound ---------------------------------------------------------------------------

def deck_into(out, deck) -> None:
    out.name = deck.name
    out.dbu_per_micron = deck.dbu_per_micron
    out.cumulative_includes_cuts = deck.cumulative_includes_cuts
    for layer in deck.layers:
        out.layers.add(name=layer.name, step=layer.index, kind=_LAYER_KIND[layer.kind],
                       direction=_DIRECTION[layer.direction],
                       thickness_um=layer.thickness_um or 0.0, wire_width=layer.wire_width or 0,
                       spacing=layer.spacing or 0, cut_size=layer.cut_size or 0,
                       enclosure=layer.enclosure or 0)
    out.oxides.extend(deck.oxides)
    out.rule_count = len(deck.rules)


def net_into(out, spec, shape_ids, deck) -> None:
    """Fill a NetContent from an engine NetSpec (and its shapes' ids)."""
    names = [l.name for l in deck.layers]
    out.net = spec.name
    for pin in spec.pins:
        msg = out.pins.add(name=pin.name, layer=names[pin.layer], diff_area=pin.diff_area)
        for step, r in pin.layered_rects():
            _rect_into(msg.rects.add() if step == pin.layer else msg.other_rects.add(layer=names[step]).rect, r)
        msg.gate_area.update(pin.gate_area)
        msg.cell_area.update({names[step]: area for step, area in pin.cell_area.items()})
        msg.cell_side_area.update({names[step]: area for step, area in pin.cell_side_area.items()})
        for (measure, step, oxide), ratio in pin.block_car.items():
            msg.block_car.add(layer=names[step], measure=_MEASURE[measure], oxide=oxide, ratio=ratio)
    for sid, shape in zip(shape_ids, spec.shapes):
        held = out.shapes.add(id=sid)
        held.shape.layer = names[shape.layer]
        r = shape.rect
        held.shape.rect.xlo, held.shape.rect.ylo, held.shape.rect.xhi, held.shape.rect.yhi = r
    if spec.layer_range is not None:
        out.layer_range.lowest, out.layer_range.highest = (names[i] for i in spec.layer_range)


def ids_into(out, ids: Sequence[int]) -> None:
    out.shape_ids.extend(ids)


def score_into(out, score) -> None:
    """Fill a ScoreReply from an engine Score."""
    out.worst_change_utilization = score.worst_change_utilization
    out.worst_utilization = score.worst_utilization
    out.legal = score.legal
    out.breaks_limit = score.breaks_limit
    out.cost = score.cost
    added = out.added_area
    for name, area in score.added_area_um2.items():
        added.add(layer=name, area_um2=area)
    add = out.changes.add
    for c in score.changes:
        add(layer=c.layer, step=c.step, measure=_MEASURE[c.measure], kind=_KIND[c.kind],
            oxide=c.oxide, gate=c.gate, before_ratio=c.before_ratio,
            before_utilization=c.before_utilization, ratio=c.ratio, limit=c.limit,
            utilization=c.utilization, headroom_um2=c.headroom_um2,
            headroom_length_um=c.headroom_length_um)


def columns_into(out, scores) -> None:
    """Fill a ScoreBatchReply from the engine's columnar BatchScores (numpy arrays)."""
    out.cost.extend(scores.cost.tolist())
    out.worst_change_utilization.extend(scores.worst_change_utilization.tolist())
    out.worst_utilization.extend(scores.worst_utilization.tolist())
    out.legal.extend(scores.legal.tolist())
    out.breaks_limit.extend(scores.breaks_limit.tolist())
    out.added_area_um2.extend(scores.added_area_um2.tolist())


def batch_into(out, scores, details: bool) -> None:
    """Fill a ScoreBatchReply's columns (and, if asked, details) from engine Scores."""
    out.cost.extend([s.cost for s in scores])
    out.worst_change_utilization.extend([s.worst_change_utilization for s in scores])
    out.worst_utilization.extend([s.worst_utilization for s in scores])
    out.legal.extend([s.legal for s in scores])
    out.breaks_limit.extend([s.breaks_limit for s in scores])
    out.added_area_um2.extend([sum(s.added_area_um2.values()) for s in scores])
    if details:
        for s in scores:
            score_into(out.details.add(), s)


def headroom_into(out, h) -> None:
    out.layer = h.layer
    out.found = h.found
    out.area_um2 = h.area_um2
    out.side_um2 = h.side_um2
    out.length_um = h.length_um
    out.binding = h.binding


def budget_into(out, budget, deck) -> None:
    """Fill a BudgetReply from an engine Budget."""
    layer_names = [layer.name for layer in deck.layers]
    out.dbu_per_micron = deck.dbu_per_micron
    out.found = budget.found
    out.layer = budget.layer
    out.step = budget.step
    for t in budget.terms:
        out.terms.add(measure=_MEASURE[t.measure], oxide=t.oxide, conductor_um2=t.conductor_um2,
                      per_area=t.per_area, per_perimeter_um=t.per_perimeter_um, factor=t.factor,
                      credit_um2=t.credit_um2, gate_um2=t.gate_um2)
    for r in budget.ratios:
        out.ratios.add(layer=r.layer, step=r.step, measure=_MEASURE[r.measure], kind=_KIND[r.kind],
                       oxide=r.oxide, gate=r.gate, limit=r.limit, term=r.term, spent=r.spent,
                       floor=r.floor, always=r.always)
    for w in budget.watches:
        out.watches.add(step=w.step, term=w.term, spent=w.spent, floor=w.floor, held=w.held)
    out.rest_worst_utilization = budget.rest_worst_utilization
    out.fixed_change_utilization = budget.fixed_change_utilization
    out.common_added_area_um2 = budget.common_added_area_um2
    for r in budget.own:
        _rect_into(out.own.add(), r)
    for r in budget.own_pins:
        _rect_into(out.own_pins.add(), r)
    for step, r in budget.foreign:
        _rect_into(out.foreign.add(layer=layer_names[step]).rect, r)
    _rect_into(out.window, budget.window)
    c = budget.costs
    out.cost.knee, out.cost.exponent, out.cost.scale = c.knee, c.exponent, c.scale
    out.cost.violation, out.cost.over_slope = c.violation, c.over_slope


def report_into(out, report) -> None:
    out.net = report.name
    out.legal = report.legal
    out.worst_utilization = report.worst_utilization
    add = out.checks.add
    for c in report.checks:
        add(layer=c.layer, step=c.step, measure=_MEASURE[c.measure], kind=_KIND[c.kind],
            oxide=c.oxide, ratio=c.ratio, limit=c.limit, utilization=c.utilization,
            legal=c.legal, gate=c.gate)


def stats_into(out, stats: dict, deck_name: str, uptime_s: float, version: str) -> None:
    for key in ("nets", "shapes", "hot_nets", "scores", "commits", "removals", "checks",
                "violations_seen"):
        setattr(out, key, int(stats.get(key, 0)))
    out.deck = deck_name
    out.uptime_s = uptime_s
    out.version = version


def rect_tuple(msg) -> tuple[int, int, int, int]:
    return (msg.xlo, msg.ylo, msg.xhi, msg.yhi)


def _rect_into(out, r) -> None:
    out.xlo, out.ylo, out.xhi, out.yhi = r


def _placed_into(container, shapes) -> None:
    for placed in shapes:
        _rect_into(container.add(layer=placed.layer).rect, placed.rect)


def _conflicts_into(container, conflicts, layer_names) -> None:
    for c in conflicts:
        msg = container.add(layer=layer_names[c.layer], owner=c.owner, other_net=c.net or "", distance_dbu=c.distance,
                            spacing_dbu=c.spacing)
        _rect_into(msg.proposed, c.proposed)
        _rect_into(msg.rect, c.rect)
        if c.blockage_id is not None:
            msg.blockage_id = c.blockage_id


def advice_into(out, advice, layer_names) -> None:
    """Fill an AdviseReply from an engine Advice (``layer_names``: step -> name)."""
    score_into(out.score, advice.score)
    out.legal_as_is = advice.legal_as_is
    out.found = advice.found
    _rect_into(out.rect, advice.rect)
    out.width = advice.width
    if advice.join_end is not None:
        out.join_end.x, out.join_end.y = advice.join_end
    if advice.far_end is not None:
        out.far_end.x, out.far_end.y = advice.far_end
    for i, option in enumerate(advice.options):
        msg = out.options.add(layer=option.layer, preferred=option.preferred, status=_STATUS[option.status],
                              legal=option.legal, blocked=option.blocked, cuts=option.cuts)
        _placed_into(msg.shapes, option.shapes)
        score_into(msg.score, option.score)
        _conflicts_into(msg.conflicts, option.conflicts, layer_names)
        if option is advice.best:
            out.best_option = i
    j = advice.jumper
    if j is not None:
        msg = out.jumper
        msg.applicable, msg.reason = j.applicable, j.reason
        msg.run_length_dbu, msg.hop_room_dbu, msg.limited_by = (j.run_length, j.hop_room,
                                                                 _LIMITED_BY[j.limited_by])
        if j.kept_length is not None:
            msg.kept_length_dbu = j.kept_length
        if j.hop_point is not None:
            msg.hop_point.x, msg.hop_point.y = j.hop_point
        msg.hop_layer = j.hop_layer or ""
        _placed_into(msg.shapes, j.shapes)
        if j.score is not None:
            score_into(msg.score, j.score)
        msg.legal, msg.blocked = j.legal, j.blocked
        _conflicts_into(msg.conflicts, j.conflicts, layer_names)
    d = advice.diode
    if d is not None:
        msg = out.diode
        msg.found, msg.reason = d.found, d.reason
        msg.gate, msg.layer = d.gate or "", d.layer or ""
        for r in d.rects:
            _rect_into(msg.rects.add(), r)
        if d.diff_area_um2 is not None:
            msg.diff_area_um2 = d.diff_area_um2
        if d.worst_utilization is not None:
            msg.worst_utilization = d.worst_utilization
    out.explanation.extend(advice.explanation)
    out.exact_scores = advice.exact_scores
    out.warnings.extend(advice.warnings)

