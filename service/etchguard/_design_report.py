"""The design report: checked nets -> one self-contained HTML page, CSV rows, JSON.

The builder takes ``NetRecord`` values, a net's ``NetReport`` with, when known, its
``NetSpec`` (pins and shapes). It does not care where they came from: an offline
check of a net file, or a running server. Without a spec a net still counts in the
summary, the tables and the histograms; it only gets no drawing.

Page content:
* summary: nets, legal and illegal counts, worst utilization, deck name;
* worst nets: the nets with the highest utilization, with their binding check;
* per-layer histograms: for every layer with checks, each net's worst utilization
  on that layer (one value per net that has a gate-connected component there);
* violating nets: every check over its limit, and a drawing of the net's shapes,
  one panel per routing layer, with the offending component highlighted.

Figures are drawn with matplotlib (``Agg``, SVG output) and inlined as ``<svg>``
elements; the page loads no script, font or stylesheet from anywhere.

The offending components of a violating check (layer, measure, kind, oxide) are the
net's offences (``NetView.offences``, see ``_netview``) of that check: every component
whose figure for it is over its limit at that step, with its shapes and pins. The view
is opened on the net's spec (shapes in spec order); nothing held is changed.
"""

from __future__ import annotations

import csv
import html
import io
import math
import re
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass
from typing import Any, TextIO

from ._kinds import Verdict
from ._nets import NetSpec
from ._netview import NetView
from ._ratios import is_legal
from ._results import CHECK_FIELDS, CheckResult, NetReport, json_number
from ._rules import Deck

CAUTION = ("etchguard advises; the foundry's rule deck and sign-off verification decide. "
           "Numbers here follow the project's antenna model and the rule deck given; "
           "they are no substitute for sign-off.")

# Histogram bins: utilization 0 .. HIST_TOP in HIST_BINS steps; larger values go in
# the last bin, so one outlier does not squeeze every other bar into one column.
HIST_TOP = 1.5
HIST_BINS = 30


@dataclass(frozen=True)
class NetRecord:
    """One checked net: the engine's report and, when known, what the net is made of."""

    report: NetReport
    spec: NetSpec | None = None


@dataclass(frozen=True)
class Offender(CheckResult):
    """A component over a limit: the check's figures for it (``gate``: the gate pin with
    the worst ratio in it) and the shapes and pins that form it at the check's step."""

    shape_indices: tuple[int, ...] = ()  # into NetSpec.shapes
    pin_indices: tuple[int, ...] = ()  # into NetSpec.pins


@dataclass(frozen=True)
class Summary:
    deck: str
    nets: int
    legal: int
    illegal: int
    checks: int
    illegal_checks: int
    worst_utilization: float
    worst_net: str  # "" when no net has a check


# -- offending components -------------------------------------------------------------


class OffenderFinder:
    """Finds, for a net spec, the components that break limits. One per deck.

    ``open_view`` opens a ``NetView`` on a spec (shape indices in spec order); by
    default the core's view (``_coreview``)."""

    def __init__(self, deck: Deck, open_view: Callable[[NetSpec], NetView] | None = None) -> None:
        self.deck = deck
        if open_view is None:
            from ._coreview import spec_views
            open_view = spec_views(deck)
        self.open_view = open_view

    def find(self, spec: NetSpec, check: CheckResult | None = None) -> list[Offender]:
        """Components over a limit: of one check (same step, measure, kind, oxide), or of
        every check when ``check`` is None. Ordered by step, then worst first (ties by
        shapes and pins, so the order does not depend on how the view holds the net)."""
        layers = self.deck.layers
        out = []
        for o in self.open_view(spec).offences():
            if check is not None and (o.step, o.measure, o.kind, o.oxide) != (
                    check.step, check.measure, check.kind, check.oxide):
                continue
            out.append(Offender(layers[o.step].name, o.step, o.measure, o.kind, o.oxide, o.ratio, o.limit,
                                o.utilization, False, spec.pins[o.gate].name, o.shapes, o.pins))
        out.sort(key=lambda o: (o.step, -o.utilization, o.measure, o.kind, o.oxide,
                                o.shape_indices, o.pin_indices))
        return out


# -- sources of records ---------------------------------------------------------------


def check_records(deck: Deck, specs: Iterable[NetSpec]) -> Iterable[NetRecord]:
    """The offline source: check each spec in an engine of its own and pair the
    report with the spec. Each net is closed again once checked, so memory stays
    flat however long the file is."""
    from ._engine import Engine

    engine = Engine(deck)
    for spec in specs:
        engine.open_net(spec.name, spec.pins, spec.layer_range, spec.shapes)
        try:
            yield NetRecord(engine.check(spec.name), spec)
        finally:
            engine.close_net(spec.name)


# -- figures of numbers ---------------------------------------------------------------


def summarize(records: Sequence[NetRecord], deck_name: str) -> Summary:
    reports = [r.report for r in records]
    worst = max(reports, key=lambda r: r.worst_utilization, default=None)
    has_checks = worst is not None and bool(worst.checks)
    return Summary(
        deck=deck_name,
        nets=len(reports),
        legal=sum(r.legal for r in reports),
        illegal=sum(not r.legal for r in reports),
        checks=sum(len(r.checks) for r in reports),
        illegal_checks=sum(not c.legal for r in reports for c in r.checks),
        worst_utilization=worst.worst_utilization if worst is not None else 0.0,
        worst_net=worst.name if has_checks and worst is not None else "",
    )


def binding_check(report: NetReport) -> CheckResult | None:
    """The check with the highest utilization (the first of equals, in check order)."""
    return max(report.checks, key=lambda c: c.utilization, default=None)


def layer_utilizations(records: Sequence[NetRecord], layer_order: Sequence[str]) -> dict[str, list[float]]:
    """Per layer, each net's worst utilization there (nets with no check there omitted).
    Layers come in ``layer_order`` (the deck's process order), then any others."""
    per_layer: dict[str, list[float]] = {}
    for record in records:
        worst_here: dict[str, float] = {}
        for c in record.report.checks:
            worst_here[c.layer] = max(worst_here.get(c.layer, 0.0), c.utilization)
        for layer, u in worst_here.items():
            per_layer.setdefault(layer, []).append(u)
    rank = {name: i for i, name in enumerate(layer_order)}
    return dict(sorted(per_layer.items(), key=lambda kv: (rank.get(kv[0], len(rank)), kv[0])))


def offender_dict(o: Offender, spec: NetSpec) -> dict[str, Any]:
    return {"layer": o.layer, "measure": o.measure, "kind": o.kind, "oxide": o.oxide,
            "utilization": json_number(o.utilization), "gate": o.gate,
            "shapes": list(o.shape_indices), "pins": [spec.pins[p].name for p in o.pin_indices]}


def report_json(records: Sequence[NetRecord], deck_name: str,
                finder: OffenderFinder | None = None) -> dict[str, Any]:
    """The report as JSON data. Each net entry carries the contract's offline check
    fields (name, legal, worst_utilization, checks) plus, per check, its step and gate
    pin, and, when the net's geometry is known, its offending components
    (``shapes`` index the net's shapes in the net file's order)."""
    s = summarize(records, deck_name)
    nets = []
    for record in records:
        r = record.report
        entry: dict[str, Any] = r.as_dict()
        if finder is not None and record.spec is not None and not r.legal:
            entry["offenders"] = [offender_dict(o, record.spec) for o in finder.find(record.spec)]
        nets.append(entry)
    return {"deck": deck_name,
            "summary": {"nets": s.nets, "legal": s.legal, "illegal": s.illegal,
                        "checks": s.checks, "illegal_checks": s.illegal_checks,
                        "worst_utilization": json_number(s.worst_utilization), "worst_net": s.worst_net},
            "nets": nets}


CSV_COLUMNS = ("net", "net_legal", "net_worst_utilization", *CHECK_FIELDS)


def write_csv(records: Sequence[NetRecord], out: TextIO) -> None:
    """One row per check; a net without any check gets one row with empty check
    columns, so that every net appears. Booleans are written 1/0."""
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    for record in records:
        r = record.report
        head = [r.name, int(r.legal), repr(r.worst_utilization)]
        if not r.checks:
            writer.writerow(head + [""] * (len(CSV_COLUMNS) - len(head)))
        for c in r.checks:
            writer.writerow(head + [_csv_value(getattr(c, name)) for name in CHECK_FIELDS])


def _csv_value(value: Any) -> Any:
    """Floats as repr (round-trips exactly), booleans as 1/0."""
    return repr(value) if isinstance(value, float) else int(value) if isinstance(value, bool) else value


# -- SVG figures ----------------------------------------------------------------------

_ID = re.compile(r'\bid="([^"]+)"')
_REF = re.compile(r'(url\(#|href="#)([^")]+)')

# colours chosen for contrast on white and for readers with red-green weakness
C_LEGAL = "#4c78a8"
C_OVER = "#d62728"
C_WIRE = "#8c8c8c"
C_CUT = "#3b3b3b"
C_GATE = "#9467bd"
C_DRIVER = "#2ca02c"


def _matplotlib() -> Any:
    import matplotlib
    matplotlib.use("Agg")  # no display; the figures are only ever written to SVG
    return matplotlib


def svg_of(fig: Any, prefix: str, css_class: str, label: str) -> str:
    """The figure as an inline ``<svg>`` element. Ids are prefixed, so that several
    figures in one page never share an id (clip paths are referenced by id)."""
    mpl = _matplotlib()
    buf = io.StringIO()
    with mpl.rc_context({"svg.fonttype": "none", "svg.hashsalt": prefix}):
        fig.savefig(buf, format="svg", metadata={"Date": None})
    text = buf.getvalue()
    text = text[text.index("<svg"):]
    text = _ID.sub(lambda m: f'id="{prefix}-{m.group(1)}"', text)
    text = _REF.sub(lambda m: f"{m.group(1)}{prefix}-{m.group(2)}", text)
    attrs = f'<svg class="{css_class}" role="img" aria-label="{html.escape(label)}" '
    return attrs + text[len("<svg "):]


def histogram_svg(layer: str, values: Sequence[float], prefix: str) -> str:
    mpl = _matplotlib()
    from matplotlib.figure import Figure
    with mpl.rc_context({"font.size": 8, "font.family": "sans-serif"}):
        fig = Figure(figsize=(3.3, 2.1))
        ax = fig.add_subplot()
        width = HIST_TOP / HIST_BINS
        counts = [0] * HIST_BINS
        for v in values:
            counts[min(HIST_BINS - 1, int(v / width)) if v > 0 else 0] += 1
        lefts = [i * width for i in range(HIST_BINS)]
        # a bin is red when it holds values above 1 (bins left of 1.0 hold only legal ones)
        colours = [C_OVER if left + 1e-12 >= 1.0 else C_LEGAL for left in lefts]
        ax.bar(lefts, counts, width=width, align="edge", color=colours, edgecolor="white", linewidth=0.4)
        # counts are skewed (most nets far below their limit): a log axis keeps a
        # single net over the limit visible next to a bar of two hundred
        ax.set_yscale("log")
        from matplotlib.ticker import NullLocator
        ax.yaxis.set_minor_locator(NullLocator())  # decades suffice; minor ticks cost time
        ax.set_ylim(0.7, max(counts + [1]) * 1.6)
        ax.axvline(1.0, color=C_OVER, linewidth=0.9, linestyle="--")
        ax.set_xlim(0, HIST_TOP)
        ax.set_xticks([0, 0.25, 0.5, 0.75, 1.0, 1.25, 1.5])
        ax.set_xticklabels(["0", ".25", ".5", ".75", "1", "1.25", f"≥{HIST_TOP:g}"])
        ax.set_xlabel("utilization (ratio / limit)")
        ax.set_ylabel("nets (log scale)")
        over = sum(not is_legal(v) for v in values)
        ax.set_title(f"{layer}: {len(values)} nets, {over} {Verdict.ILLEGAL}", fontsize=9)
        ax.spines[["top", "right"]].set_visible(False)
        fig.subplots_adjust(left=0.19, right=0.94, bottom=0.2, top=0.88)
        return svg_of(fig, prefix, "eg-fig eg-hist", f"histogram of utilization on {layer}")


_LEGEND = ("net shapes", "over a limit at this layer's step", "part of a component over a limit higher up",
           "cuts to the layer above", "gate pin", "driver / diffusion pin")


def _legend_width(ncol: int) -> float:
    """Inches the drawing's legend takes in ``ncol`` columns (filled column by column,
    as matplotlib does), at its 6.5 pt: ~0.055 in a character (a generous mean for the
    sans-serif face), 0.45 in for the handle and the gap of each column."""
    per_col = math.ceil(len(_LEGEND) / ncol)
    columns = [_LEGEND[k:k + per_col] for k in range(0, len(_LEGEND), per_col)]
    return sum(0.055 * max(len(label) for label in col) + 0.45 for col in columns)


def net_drawing_svg(deck: Deck, spec: NetSpec, offenders: Sequence[Offender], prefix: str) -> str:
    """The net's shapes, one panel per routing layer it uses, offenders highlighted.

    A panel shows the shapes of its layer and, as dark squares, the cuts of the cut
    layer just above it. Shapes of a component over a limit at this panel's step are
    filled red; shapes that belong to a component over a limit at a higher step
    (they are part of it there) are outlined red. A violating cut step is shown on
    the panel of the metal below it, where its cuts land.
    """
    mpl = _matplotlib()
    from matplotlib.collections import PatchCollection
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch, Rectangle

    scale = 1.0 / deck.dbu_per_micron
    used = {s.layer for s in spec.shapes} | {p.layer for p in spec.pins}
    top = max(used | {o.step for o in offenders}, default=0)
    panels = [l.index for l in deck.layers if l.is_routing and l.index <= top
              and (l.index in used or l.index + 1 in used
                   or any(o.step in (l.index, l.index + 1) for o in offenders))]
    # every panel spans the whole net, so the panels line up with each other
    xs: list[float] = []
    ys: list[float] = []
    for s in spec.shapes:
        xs += [s.rect[0] * scale, s.rect[2] * scale]
        ys += [s.rect[1] * scale, s.rect[3] * scale]
    for p in spec.pins:
        for r in p.rects:
            xs += [r[0] * scale, r[2] * scale]
            ys += [r[1] * scale, r[3] * scale]
    pad = max(2.0, 0.04 * max(max(xs) - min(xs), max(ys) - min(ys))) if xs else 1.0
    xlim = (min(xs) - pad, max(xs) + pad) if xs else (0, 1)
    ylim = (min(ys) - pad, max(ys) + pad) if ys else (0, 1)

    at_step: dict[int, set[int]] = {}  # step -> offending shape indices at that step
    for o in offenders:
        at_step.setdefault(o.step, set()).update(o.shape_indices)
    over_pins = {p for o in offenders for p in o.pin_indices}

    def rects(layer: int, want: Callable[[int], bool]) -> list[Any]:
        return [Rectangle((s.rect[0] * scale, s.rect[1] * scale), (s.rect[2] - s.rect[0]) * scale,
                          (s.rect[3] - s.rect[1]) * scale)
                for i, s in enumerate(spec.shapes) if s.layer == layer and want(i)]

    # panel boxes follow the net's aspect (clamped, so a long thin net stays legible);
    # a fixed layout (no tight_layout) keeps drawing fast on a big report
    width_um, height_um = xlim[1] - xlim[0], ylim[1] - ylim[0]
    if width_um < 0.6 * height_um:
        grow = (0.6 * height_um - width_um) / 2
        xlim, width_um = (xlim[0] - grow, xlim[1] + grow), 0.6 * height_um
    elif height_um < 0.6 * width_um:
        grow = (0.6 * width_um - height_um) / 2
        ylim, height_um = (ylim[0] - grow, ylim[1] + grow), 0.6 * width_um
    if width_um >= height_um:
        pw, ph = 2.5, 2.5 * height_um / width_um
    else:
        pw, ph = 2.3 * width_um / height_um, 2.3
    left, right, gap_x, top_m, gap_y = 0.5, 0.15, 0.3, 0.42, 0.7  # inches
    cols = max(1, min(len(panels), int((11.0 - left - right + gap_x) // (pw + gap_x))))
    rows = max(1, math.ceil(len(panels) / cols))
    fig_w = left + right + cols * pw + (cols - 1) * gap_x
    # the legend's columns as many as the figure is wide enough for (a net on one or two
    # layers makes a narrow figure), its rows given the room they take
    ncol = next(n for n in (3, 2, 1) if _legend_width(n) <= fig_w - 0.1 or n == 1)
    fig_w = max(fig_w, _legend_width(ncol) + 0.1)
    legend = max(0.45, 0.16 * math.ceil(len(_LEGEND) / ncol) + 0.1)
    fig_h = top_m + rows * ph + (rows - 1) * gap_y + legend + 0.35
    with mpl.rc_context({"font.size": 7, "font.family": "sans-serif"}):
        fig = Figure(figsize=(fig_w, fig_h))
        fig.subplots_adjust(left=left / fig_w, right=1 - right / fig_w, top=1 - top_m / fig_h,
                            bottom=(legend + 0.35) / fig_h, wspace=gap_x / pw, hspace=gap_y / ph)
        grid = fig.add_gridspec(rows, cols)
        for k, layer in enumerate(panels):
            ax = fig.add_subplot(grid[k // cols, k % cols])
            name = deck.layers[layer].name
            here = at_step.get(layer, set())
            later = set().union(*(v for st, v in at_step.items() if st > layer)) if at_step else set()
            base = rects(layer, lambda i: i not in here and i not in later)
            # thin wires are far narrower than a pixel at this scale: the edge line
            # (in points) is what makes them visible at all
            ax.add_collection(PatchCollection(base, facecolor=C_WIRE, edgecolor=C_WIRE, linewidths=1.0))
            ax.add_collection(PatchCollection(rects(layer, lambda i: i in later and i not in here),
                                              facecolor="none", edgecolor=C_OVER, linewidths=1.0,
                                              linestyle="--"))
            ax.add_collection(PatchCollection(rects(layer, lambda i: i in here), facecolor=C_OVER,
                                              edgecolor=C_OVER, linewidths=2.2))
            cut = layer + 1
            if cut < len(deck.layers) and not deck.layers[cut].is_routing:
                cut_hot = at_step.get(cut, set())
                ax.add_collection(PatchCollection(rects(cut, lambda i: i not in cut_hot),
                                                  facecolor=C_CUT, edgecolor=C_CUT, linewidths=0.8))
                ax.add_collection(PatchCollection(rects(cut, lambda i: i in cut_hot),
                                                  facecolor=C_OVER, edgecolor="black", linewidths=1.2))
            for p_index, pin in enumerate(spec.pins):
                if pin.layer != layer:
                    continue
                cx = sum((r[0] + r[2]) / 2 for r in pin.rects) / len(pin.rects) * scale
                cy = sum((r[1] + r[3]) / 2 for r in pin.rects) / len(pin.rects) * scale
                is_gate = pin.total_gate_area > 0
                ax.plot([cx], [cy], marker="^" if is_gate else "s", markersize=6,
                        color=C_GATE if is_gate else C_DRIVER,
                        markeredgecolor=C_OVER if p_index in over_pins else "white", markeredgewidth=1.0)
                ax.annotate(pin.name, (cx, cy), xytext=(4, 3), textcoords="offset points", fontsize=6)
            title = name
            worst_here = [o for o in offenders if o.step == layer]
            worst_cut = [o for o in offenders if o.step == cut]
            if worst_here:
                o = worst_here[0]
                title += f"\n{o.kind} {o.measure} {o.oxide}: {o.utilization:.2f}× limit"
                ax.set_title(title, color=C_OVER, fontsize=8)
            else:
                ax.set_title(title, fontsize=8)
            if worst_cut:
                o = worst_cut[0]
                ax.text(0.01, 0.01, f"{o.layer} {o.kind} {o.oxide}: {o.utilization:.2f}×",
                        transform=ax.transAxes, color=C_OVER, fontsize=6)
            ax.set_xlim(*xlim)
            ax.set_ylim(*ylim)
            ax.set_aspect("equal", adjustable="box")
            ax.tick_params(labelsize=6)
            ax.locator_params(axis="both", nbins=4)
            if k // cols == rows - 1 or k + cols >= len(panels):
                ax.set_xlabel("x (µm)", fontsize=6)
            if k % cols == 0:
                ax.set_ylabel("y (µm)", fontsize=6)
            else:  # every panel has the same y range: its neighbour on the left labels it
                ax.tick_params(labelleft=False)
        handles = [Patch(color=C_WIRE, label=_LEGEND[0]), Patch(color=C_OVER, label=_LEGEND[1]),
                   Patch(facecolor="none", edgecolor=C_OVER, linestyle="--", label=_LEGEND[2]),
                   Patch(color=C_CUT, label=_LEGEND[3]),
                   Line2D([], [], marker="^", color=C_GATE, linestyle="none", label=_LEGEND[4]),
                   Line2D([], [], marker="s", color=C_DRIVER, linestyle="none", label=_LEGEND[5])]
        fig.legend(handles=handles, loc="lower center", ncol=ncol, fontsize=6.5, frameon=False)
        return svg_of(fig, prefix, "eg-fig eg-net", f"shapes of net {spec.name} per layer")


# -- the page -------------------------------------------------------------------------

_CSS = """
:root { --over: #d62728; --ok: #2b7a3d; --ink: #1d232a; --soft: #5b6670; --line: #d9dee3; }
* { box-sizing: border-box; }
body { margin: 0; font-family: system-ui, -apple-system, "Segoe UI", "DejaVu Sans", sans-serif;
       color: var(--ink); background: #f6f7f9; font-size: 14px; line-height: 1.4; }
header { background: #1d232a; color: #fff; padding: 18px 28px; }
header h1 { margin: 0; font-size: 20px; font-weight: 600; }
header p { margin: 4px 0 0; color: #c5ccd3; font-size: 13px; }
main { padding: 8px 28px 28px; max-width: 1280px; }
section { margin-top: 24px; }
h2 { font-size: 16px; margin: 0 0 10px; border-bottom: 1px solid var(--line); padding-bottom: 4px; }
h3 { font-size: 14px; margin: 18px 0 6px; font-family: ui-monospace, "DejaVu Sans Mono", monospace; }
.cards { display: flex; flex-wrap: wrap; gap: 12px; }
.card { background: #fff; border: 1px solid var(--line); border-radius: 6px; padding: 10px 14px;
        min-width: 150px; }
.card .v { font-size: 22px; font-weight: 600; }
.card .k { color: var(--soft); font-size: 12px; text-transform: uppercase; letter-spacing: .04em; }
.card.bad .v { color: var(--over); }
.card .w { color: var(--soft); font-size: 12px; font-family: ui-monospace, "DejaVu Sans Mono", monospace; }
.card.good .v { color: var(--ok); }
table { border-collapse: collapse; background: #fff; border: 1px solid var(--line); font-size: 13px; }
th, td { padding: 4px 10px; text-align: left; border-bottom: 1px solid var(--line); white-space: nowrap; }
th { background: #eef1f4; font-weight: 600; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
td.name { font-family: ui-monospace, "DejaVu Sans Mono", monospace; }
.over { color: var(--over); font-weight: 600; }
.ok { color: var(--ok); }
.meter { display: inline-block; width: 90px; height: 8px; background: #e6e9ec; border-radius: 4px;
         vertical-align: middle; margin-left: 6px; position: relative; overflow: hidden; }
.meter span { position: absolute; left: 0; top: 0; bottom: 0; background: #4c78a8; }
.meter span.hot { background: var(--over); }
.grid { display: flex; flex-wrap: wrap; gap: 10px; }
.grid .fig { background: #fff; border: 1px solid var(--line); border-radius: 6px; padding: 4px; }
svg.eg-fig { display: block; max-width: 100%; height: auto; }
.netbox { background: #fff; border: 1px solid var(--line); border-radius: 6px; padding: 10px 14px;
          margin-bottom: 16px; }
.note { color: var(--soft); font-size: 13px; }
footer { margin: 24px 28px; padding: 12px 14px; border-left: 4px solid #e0a000; background: #fff8e5;
         font-size: 13px; max-width: 1224px; }
"""


def _e(text: object) -> str:
    return html.escape(str(text), quote=True)


def _fmt(value: float, digits: int = 4) -> str:
    return f"{value:.{digits}g}" if math.isfinite(value) else "∞"


def _pct(value: float) -> str:
    return f"{value * 100:.1f}%" if math.isfinite(value) else "∞"


def _anchor(net: str) -> str:
    return "net-" + re.sub(r"[^A-Za-z0-9_-]", "_", net)


def _meter(u: float) -> str:
    width = 100.0 if not math.isfinite(u) else min(100.0, max(0.0, u * 100.0))
    hot = " hot" if not is_legal(u) else ""
    return f'<span class="meter"><span class="{hot.strip()}" style="width:{width:.1f}%"></span></span>'


def _check_cells(c: CheckResult) -> str:
    state = f'<span class="{"ok" if c.legal else "over"}">{Verdict.of(c.legal)}</span>'
    return (f"<td>{_e(c.layer)}</td><td>{_e(c.kind)}</td><td>{_e(c.measure)}</td><td>{_e(c.oxide)}</td>"
            f'<td class="num">{_fmt(c.ratio)}</td><td class="num">{_fmt(c.limit)}</td>'
            f'<td class="num">{_pct(c.utilization)}{_meter(c.utilization)}</td><td>{state}</td>'
            f'<td class="name">{_e(c.gate)}</td>')


def render_html(records: Sequence[NetRecord], deck_name: str, *, deck: Deck | None = None,
                layer_order: Sequence[str] = (), source: str = "", title: str = "", top: int = 25,
                max_drawings: int = 40,
                progress: Callable[[Iterable[Any], int, str], Iterable[Any]] | None = None) -> str:
    """The whole page as a string. ``deck`` is needed for drawings (geometry units,
    layers); without it, or for records without a spec, nets are not drawn.
    ``layer_order`` orders the histograms when there is no deck (the deck's process
    order otherwise). ``progress`` wraps the slow loop (drawing), e.g.
    ``etchguard._progress.progress``."""
    wrap = progress or (lambda items, total, label: items)
    summary = summarize(records, deck_name)
    title = title or f"Antenna report — {deck_name}"
    out: list[str] = []
    add = out.append
    add("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
        f"<title>{_e(title)}</title>\n<style>{_CSS}</style>\n</head>\n<body>\n")
    add(f"<header><h1>{_e(title)}</h1><p>etchguard process-antenna report · deck "
        f"<b>{_e(deck_name)}</b>{' · source ' + _e(source) if source else ''}</p></header>\n<main>\n")

    # summary
    worst_text = _pct(summary.worst_utilization) if summary.worst_net else "—"
    add('<section id="summary"><h2>Summary</h2><div class="cards">')
    add(f'<div class="card"><div class="v" data-key="nets">{summary.nets}</div><div class="k">nets</div></div>')
    add(f'<div class="card good"><div class="v" data-key="legal">{summary.legal}</div><div class="k">legal</div></div>')
    add(f'<div class="card {"bad" if summary.illegal else "good"}"><div class="v" data-key="illegal">'
        f'{summary.illegal}</div><div class="k">illegal</div></div>')
    worst_net = f'<div class="w">{_e(summary.worst_net)}</div>' if summary.worst_net else ""
    add(f'<div class="card {"bad" if summary.worst_utilization > 1 else ""}"><div class="v" '
        f'data-key="worst">{worst_text}</div><div class="k">worst utilization</div>'
        f'{worst_net}</div>')
    add(f'<div class="card"><div class="v" data-key="deck">{_e(deck_name)}</div><div class="k">rule deck</div></div>')
    add(f'<div class="card"><div class="v">{summary.checks}</div><div class="k">checks · '
        f'{summary.illegal_checks} illegal</div></div>')
    add("</div></section>\n")

    # worst nets
    ranked = sorted(records, key=lambda r: -r.report.worst_utilization)[:max(0, top)]
    ranked = [r for r in ranked if r.report.checks]
    add(f'<section id="worst"><h2>Worst nets</h2><p class="note">The {len(ranked)} nets with the '
        "highest utilization, with the check that binds each.</p>")
    if ranked:
        add('<table id="worst-table"><thead><tr><th>#</th><th>net</th><th>layer</th><th>kind</th>'
            "<th>measure</th><th>oxide</th><th>ratio</th><th>limit</th><th>utilization</th>"
            "<th>state</th><th>gate</th></tr></thead><tbody>")
        for i, record in enumerate(ranked, 1):
            c = binding_check(record.report)
            assert c is not None
            name = _e(record.report.name)
            if not record.report.legal:
                name = f'<a href="#{_anchor(record.report.name)}">{name}</a>'
            add(f'<tr><td class="num">{i}</td><td class="name">{name}</td>{_check_cells(c)}</tr>')
        add("</tbody></table>")
    else:
        add('<p class="note">No net has a gate-connected component under a rule.</p>')
    add("</section>\n")

    # histograms
    order = [l.name for l in deck.layers] if deck is not None else list(layer_order)
    per_layer = layer_utilizations(records, order)
    add('<section id="histograms"><h2>Utilization by layer</h2><p class="note">For each layer, '
        "each net's worst utilization there (every check of the layer's step: partial and "
        "cumulative, area and side, every oxide). The dashed line is the limit; the last bin holds "
        f"everything from {HIST_TOP:g} up.</p><div class=\"grid\">")
    for k, (layer, values) in enumerate(per_layer.items()):
        add(f'<div class="fig">{histogram_svg(layer, values, f"h{k}")}</div>')
    add("</div></section>\n")

    # violating nets
    violating = [r for r in records if not r.report.legal]
    violating.sort(key=lambda r: -r.report.worst_utilization)
    add(f'<section id="violations"><h2>Illegal nets ({len(violating)})</h2>')
    if not violating:
        add('<p class="note">Every net is within its limits.</p>')
    finder = OffenderFinder(deck) if deck is not None else None
    # The drawings first, under the bar: its total is what is drawn, not every violating net.
    drawable = [k for k, record in enumerate(violating) if finder is not None and record.spec is not None]
    drawings: dict[int, str] = {}
    for k in wrap(drawable[:max(0, max_drawings)], min(len(drawable), max(0, max_drawings)), "drawing"):
        spec = violating[k].spec
        assert finder is not None and spec is not None
        drawings[k] = net_drawing_svg(finder.deck, spec, finder.find(spec), f"n{k}")
    for k, record in enumerate(violating):
        r = record.report
        add(f'<div class="netbox" id="{_anchor(r.name)}"><h3>{_e(r.name)} · worst '
            f'<span class="over">{_pct(r.worst_utilization)}</span></h3>')
        add("<table><thead><tr><th>layer</th><th>kind</th><th>measure</th><th>oxide</th><th>ratio</th>"
            "<th>limit</th><th>utilization</th><th>state</th><th>gate</th></tr></thead><tbody>")
        for c in r.checks:
            if not c.legal:
                add(f"<tr>{_check_cells(c)}</tr>")
        add("</tbody></table>")
        if finder is None or record.spec is None:
            add('<p class="note">No geometry for this net: not drawn.</p>')
        elif k not in drawings:
            add(f'<p class="note">Not drawn: the page draws at most {max_drawings} nets.</p>')
        else:
            add(f'<div class="fig">{drawings[k]}</div>')
        add("</div>")
    add("</section>\n</main>\n")
    add(f'<footer id="caution"><b>Caution.</b> {_e(CAUTION)}</footer>\n</body>\n</html>\n')
    return "".join(out)
