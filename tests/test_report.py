"""The design report: its numbers against engine.check, its offending components
against an independent shapely/networkx reading of the contract, the page's content,
the progress bar, the CLI, and the demo block's generator."""

from __future__ import annotations

import csv
import importlib.util
import io
import json
import re
from pathlib import Path

import networkx as nx
import pytest
from shapely.geometry import box
from shapely.ops import unary_union

import etchguard as eg
from etchguard._progress import progress, render
from etchguard._design_report import (CAUTION, NetRecord, OffenderFinder, check_records, render_html,
                               report_json, summarize, write_csv)
from etchguard.cli import main

DATA = Path(__file__).resolve().parent.parent / "service" / "etchguard" / "data"
DECK_PATH = DATA / "lumen-6m.toml"
NETS_PATH = DATA / "lumen-demo-nets.json"


@pytest.fixture(scope="module")
def deck() -> eg.Deck:
    return eg.load_deck(DECK_PATH)


@pytest.fixture(scope="module")
def specs(deck: eg.Deck) -> list[eg.NetSpec]:
    return eg.load_net_file(deck, NETS_PATH)


@pytest.fixture(scope="module")
def engine_reports(deck: eg.Deck, specs: list[eg.NetSpec]) -> dict[str, eg.NetReport]:
    """engine.check on one engine holding every net: the numbers the report must carry."""
    engine = eg.Engine(deck)
    for s in specs:
        engine.open_net(s.name, s.pins, s.layer_range, s.shapes)
    return {s.name: engine.check(s.name) for s in specs}


@pytest.fixture(scope="module")
def records(deck: eg.Deck, specs: list[eg.NetSpec]) -> list[NetRecord]:
    return list(check_records(deck, specs))


# -- the demo block -------------------------------------------------------------------


def test_demo_block_has_a_handful_of_violations(engine_reports: dict[str, eg.NetReport]) -> None:
    violating = [r for r in engine_reports.values() if not r.legal]
    assert 180 <= len(engine_reports) <= 220
    assert 3 <= len(violating) <= 20, len(violating)


def test_demo_generator_reproduces_the_committed_file() -> None:
    spec = importlib.util.spec_from_file_location("make_demo_nets", DATA / "make_demo_nets.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    assert module.demo_text() == NETS_PATH.read_text(encoding="utf-8")


def test_demo_names_are_invented_pattern(specs: list[eg.NetSpec]) -> None:
    assert all(re.fullmatch(r"blk_a/n\d+", s.name) for s in specs)
    assert all(re.fullmatch(r"u\d+\.[a-z]", p.name) for s in specs for p in s.pins)


# -- CSV / JSON against engine.check ---------------------------------------------------


def test_csv_rows_equal_engine_check(records: list[NetRecord],
                                     engine_reports: dict[str, eg.NetReport]) -> None:
    buf = io.StringIO()
    write_csv(records, buf)
    rows = list(csv.DictReader(io.StringIO(buf.getvalue())))
    by_net: dict[str, list[dict[str, str]]] = {}
    for row in rows:
        by_net.setdefault(row["net"], []).append(row)
    assert set(by_net) == set(engine_reports)
    for name, report in engine_reports.items():
        got = by_net[name]
        assert all(int(r["net_legal"]) == report.legal for r in got)
        assert all(float(r["net_worst_utilization"]) == report.worst_utilization for r in got)
        if not report.checks:
            assert len(got) == 1 and got[0]["layer"] == ""
            continue
        assert len(got) == len(report.checks)
        for row, c in zip(got, report.checks):
            assert (row["layer"], int(row["step"]), row["measure"], row["kind"], row["oxide"], row["gate"]) == \
                (c.layer, c.step, c.measure, c.kind, c.oxide, c.gate)
            # repr() round-trips floats exactly: the file carries the engine's numbers
            assert float(row["ratio"]) == c.ratio
            assert float(row["limit"]) == c.limit
            assert float(row["utilization"]) == c.utilization
            assert int(row["legal"]) == c.legal


def test_json_nets_equal_engine_check(deck: eg.Deck, records: list[NetRecord],
                                      engine_reports: dict[str, eg.NetReport]) -> None:
    data = json.loads(json.dumps(report_json(records, deck.name, OffenderFinder(deck))))
    assert data["deck"] == "lumen-6m"
    assert [n["net"] for n in data["nets"]] == list(engine_reports)
    for entry in data["nets"]:
        expected = engine_reports[entry["net"]].as_dict()
        # the contract's offline-check fields, exactly
        assert entry["legal"] == expected["legal"]
        assert entry["worst_utilization"] == expected["worst_utilization"]
        got_checks = [{k: c[k] for k in expected["checks"][0]} for c in entry["checks"]] if entry["checks"] else []
        assert got_checks == expected["checks"]
        assert ("offenders" in entry) == (not entry["legal"])
    summary = data["summary"]
    reports = list(engine_reports.values())
    assert summary["nets"] == len(reports)
    assert summary["illegal"] == sum(not r.legal for r in reports)
    assert summary["legal"] == sum(r.legal for r in reports)
    assert summary["worst_utilization"] == max(r.worst_utilization for r in reports)


# -- offending components against an independent reading of the contract --------------


def reference_component(deck: eg.Deck, spec: eg.NetSpec, step: int, gate_pin: str) -> tuple[set[int], set[int]]:
    """(shape indices, pin indices) of the gate's component at ``step``, built from the
    contract's connectivity rules with shapely (contact geometry) and networkx
    (components), independently of the engine's incremental state."""
    g = nx.Graph()
    elements: list[tuple[str, int, int, object]] = []  # (kind, index, layer, geometry)
    for p_index, pin in enumerate(spec.pins):
        if pin.layer <= step:
            for r in pin.rects:
                elements.append(("pin", p_index, pin.layer, box(*r)))
    for s_index, shape in enumerate(spec.shapes):
        if shape.layer <= step:
            elements.append(("shape", s_index, shape.layer, box(*shape.rect)))
    for i, e in enumerate(elements):
        g.add_node(i)
    for i, (ki, ii, li, gi) in enumerate(elements):
        for j in range(i + 1, len(elements)):
            kj, ij, lj, gj = elements[j]
            if ki == kj == "pin" and ii == ij:
                g.add_edge(i, j)  # rectangles of one pin are one pin
            elif li == lj:
                inter = gi.intersection(gj)
                # contract: positive area, or a shared segment of positive length
                if inter.area > 0 or inter.length > 0:
                    g.add_edge(i, j)
            elif abs(li - lj) == 1 and gi.intersection(gj).area > 0:
                g.add_edge(i, j)  # a cut and the routing layer next to it
    gate_index = next(p for p, pin in enumerate(spec.pins) if pin.name == gate_pin)
    start = next(i for i, e in enumerate(elements) if e[0] == "pin" and e[1] == gate_index)
    comp = nx.node_connected_component(g, start)
    shapes = {elements[i][1] for i in comp if elements[i][0] == "shape"}
    pins = {elements[i][1] for i in comp if elements[i][0] == "pin"}
    return shapes, pins


def test_offenders_match_reference_components(deck: eg.Deck, records: list[NetRecord]) -> None:
    finder = OffenderFinder(deck)
    dbu2 = deck.dbu_per_micron ** 2
    checked = 0
    for record in records:
        if record.report.legal:
            continue
        assert record.spec is not None
        for check in record.report.checks:
            if check.legal:
                continue
            offenders = finder.find(record.spec, check)
            assert offenders, f"{record.report.name}: no offender for {check}"
            worst = offenders[0]
            assert worst.utilization == pytest.approx(check.utilization, rel=1e-12)
            for o in offenders:
                assert o.utilization > 1.0
                shapes, pins = reference_component(deck, record.spec, o.step, o.gate)
                assert set(o.shape_indices) == shapes
                assert set(o.pin_indices) == pins
            if check.kind != "partial" or check.measure != "area":
                continue
            rule = deck.rule(check.step, "area", check.oxide)
            # lumen-6m's rules have no factors: the partial ratio is plain A / G
            assert rule is not None and rule.area_factor == 1.0 and rule.diode_area_credit == 0.0
            assert rule.diode_gate_factor == 0.0
            union = unary_union([box(*record.spec.shapes[i].rect) for i in worst.shape_indices
                                 if record.spec.shapes[i].layer == check.step])
            cell = sum(record.spec.pins[p].cell_area.get(check.step, 0.0) for p in worst.pin_indices)
            gate = sum(record.spec.pins[p].total_gate_area for p in worst.pin_indices)
            assert (union.area / dbu2 + cell) / gate == pytest.approx(check.ratio, rel=1e-9)
            checked += 1
    assert checked >= 3  # the demo block has partial-area violations to compare


def test_offender_of_a_hand_made_net(deck: eg.Deck) -> None:
    """Two gates: one hangs alone on a long M2 run (over the limit), the other sits on
    the driver's side. Hand count (demo deck values): M2 run x 9930..10070, y -70..100070
    = 140 x 100140 DBU = 14.0196 um^2; its landing pad x 9890..10110, y -110..110 sticks
    out of the run by 220*220 - 140*180 = 23200 DBU^2 = 0.0232 um^2; A = 14.0428 um^2,
    gate 0.02 um^2 -> PAR 702.14, limit 400 (no diffusion) -> 1.755."""
    via = lambda x, y: eg.via_shapes(deck, deck.layer_index["V1"], x, y)  # noqa: E731
    m2 = deck.layer_index["M2"]
    pins = [eg.make_pin(deck, "u1.y", "M1", [[-70, -210, 70, 210]], diff_area=0.3),
            eg.make_pin(deck, "u2.a", "M1", [[4930, -210, 5070, 210]], gate_area={"thin": 0.05}),
            eg.make_pin(deck, "u3.a", "M1", [[9930, -210, 10070, 210]], gate_area={"thin": 0.02})]
    shapes = (via(0, 0) + via(5000, 0) + via(10000, 0)
              + eg.run_shapes(deck, m2, 0, 0, 0, 20000)  # the driver's M2 stub
              + eg.run_shapes(deck, m2, 5000, 0, 5000, 3000)  # short, gate u2.a alone
              + eg.run_shapes(deck, m2, 10000, 0, 10000, 100000))  # long, gate u3.a alone
    spec = eg.NetSpec("blk_t/n1", tuple(pins), tuple(shapes))
    offenders = OffenderFinder(deck).find(spec)
    over = [o for o in offenders if o.measure == "area" and o.kind == "partial"]
    assert len(over) == 1
    o = over[0]
    assert (o.layer, o.gate) == ("M2", "u3.a")
    assert o.ratio == pytest.approx(14.0428 / 0.02, rel=1e-12)
    assert o.utilization == pytest.approx(14.0428 / 0.02 / 400, rel=1e-12)
    # its shapes: the third via stack (pad, cut, pad) and the long run; pins: u3.a only
    assert {spec.shapes[i] for i in o.shape_indices} == set(via(10000, 0)) | {shapes[-1]}
    assert o.pin_indices == (2,)


@pytest.mark.parametrize("routing_layers", [1, 2, 3, 5])
def test_drawing_legend_lies_inside_the_figure(deck: eg.Deck, routing_layers: int,
                                               monkeypatch: pytest.MonkeyPatch) -> None:
    """The legend under a net's drawing is laid out for the figure's width: whole for a
    net on one routing layer, two (one panel each, the narrowest page) or more."""
    pytest.importorskip("matplotlib")
    from etchguard import _design_report

    figures = []
    real = _design_report.svg_of
    monkeypatch.setattr(_design_report, "svg_of", lambda fig, *a: figures.append(fig) or real(fig, *a))
    m1 = deck.layer_index["M1"]
    # over the limit on M1 only (60 um x 0.14 um over 0.02 um^2: 420 of 400)
    gate = eg.make_pin(deck, "u1.a", "M1", [[0, 0, 140, 140]], gate_area={"thin": 0.02})
    shapes = list(eg.run_shapes(deck, m1, 70, 70, 60000, 70))
    for k in range(1, routing_layers):  # climb one routing layer at a time, a wire on each
        shapes += eg.via_shapes(deck, 2 * k - 1, 1000 * k, 70)
        shapes += eg.run_shapes(deck, 2 * k, 1000 * k, 70, 1000 * k + 3000 if k % 2 == 0 else 1000 * k,
                                70 if k % 2 == 0 else 3070)
    spec = eg.NetSpec("blk_t/legend", (gate,), tuple(shapes))
    finder = OffenderFinder(deck)
    _design_report.net_drawing_svg(deck, spec, finder.find(spec), "t")
    (fig,) = figures
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = FigureCanvasAgg(fig)
    canvas.draw()  # the legend's extent is known once drawn
    box_ = fig.legends[0].get_window_extent(canvas.get_renderer())
    inside = fig.bbox
    assert inside.x0 - 0.5 <= box_.x0 and box_.x1 <= inside.x1 + 0.5, (routing_layers, box_, inside)
    assert inside.y0 - 0.5 <= box_.y0 and box_.y1 <= inside.y1 + 0.5, (routing_layers, box_, inside)


# -- the page --------------------------------------------------------------------------


@pytest.fixture(scope="module")
def page(deck: eg.Deck, records: list[NetRecord]) -> str:
    return render_html(records, deck.name, deck=deck, source="demo", top=25, max_drawings=40)


def test_page_summary_and_tables(page: str, records: list[NetRecord]) -> None:
    s = summarize(records, "lumen-6m")
    assert f'data-key="nets">{s.nets}<' in page
    assert f'data-key="legal">{s.legal}<' in page
    assert f'data-key="illegal">{s.illegal}<' in page
    assert 'data-key="deck">lumen-6m<' in page
    assert f"{s.worst_utilization * 100:.1f}%" in page
    table = page[page.index('id="worst-table"'):page.index("</table>", page.index('id="worst-table"'))]
    assert table.count("<tr>") == 1 + 25  # header + rows
    worst_first = max(records, key=lambda r: r.report.worst_utilization).report.name
    assert table.index(worst_first) < table.index("</tr>", table.index("<tbody>"))
    for r in records:
        if not r.report.legal:
            assert f'<h3>{r.report.name} · worst' in page
    assert CAUTION.replace("'", "&#x27;") in page


def test_page_figures_are_inline_and_self_contained(page: str, records: list[NetRecord]) -> None:
    layers_with_checks = {c.layer for r in records for c in r.report.checks}
    violating = sum(not r.report.legal for r in records)
    assert page.count('<svg class="eg-fig eg-hist"') == len(layers_with_checks)
    assert page.count('<svg class="eg-fig eg-net"') == violating
    # nothing fetched from elsewhere: no script, stylesheet link, image source or URL
    assert "<script" not in page and "<link" not in page and "<img" not in page
    assert re.search(r"""(src|href)=["'](https?:)?//""", page) is None
    assert "@import" not in page and "url(http" not in page
    ids = re.findall(r'\bid="([^"]+)"', page)
    assert len(ids) == len(set(ids)), "ids repeat across the inline figures"
    for ref in set(re.findall(r"url\(#([^)]+)\)", page)):
        assert ref in ids


def test_page_highlights_caps_and_missing_geometry(deck: eg.Deck, records: list[NetRecord]) -> None:
    """Red fill in a drawing of a violating net; past the cap a net is listed but not
    drawn; a record without a spec is listed and says it has no geometry."""
    bad = [r for r in records if not r.report.legal][:3]
    page = render_html([bad[0], bad[1], NetRecord(bad[2].report)], deck.name, deck=deck, max_drawings=1)
    drawings = page.split('<svg class="eg-fig eg-net"')
    assert len(drawings) == 2  # one drawing only
    assert "#d62728" in drawings[1].split("</svg>", 1)[0]
    assert page.count("Not drawn: the page draws at most 1 nets.") == 1
    assert page.count("No geometry for this net: not drawn.") == 1
    for r in bad:
        assert f"<h3>{r.report.name} · worst" in page


def test_drawing_progress_counts_the_drawings(deck: eg.Deck, records: list[NetRecord]) -> None:
    """The bar's total is the number of nets drawn (the cap, or fewer with geometry),
    not the number of violating nets."""
    bad = [r for r in records if not r.report.legal]
    assert len(bad) > 3
    seen: list[tuple[int, int]] = []

    def bar(items, total, label):  # type: ignore[no-untyped-def]
        items = list(items)
        seen.append((total, len(items)))
        return items
    page = render_html(bad[:-1] + [NetRecord(bad[-1].report)], deck.name, deck=deck, max_drawings=2,
                       progress=bar)
    assert seen == [(2, 2)]
    assert page.count('<svg class="eg-fig eg-net"') == 2
    seen.clear()
    render_html([NetRecord(r.report) for r in bad], deck.name, deck=deck, max_drawings=2, progress=bar)
    assert seen == [(0, 0)]  # no geometry: nothing to draw


# -- progress bar ----------------------------------------------------------------------


class _Tty(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_progress_draws_only_on_a_terminal_or_when_forced() -> None:
    quiet = io.StringIO()
    assert list(progress(range(5), 5, "x", stream=quiet)) == [0, 1, 2, 3, 4]
    assert quiet.getvalue() == ""
    forced = io.StringIO()
    assert list(progress(range(5), 5, "x", stream=forced, force=True, interval=0)) == list(range(5))
    assert forced.getvalue().endswith(render(5, 5, "x") + "\n")
    assert "\r" in forced.getvalue()
    tty = _Tty()
    list(progress(iter(range(3)), None, "n", stream=tty, interval=0))
    assert tty.getvalue().rstrip().endswith("n 3")


def test_progress_render() -> None:
    assert render(0, 4, "a") == "a [" + "." * 28 + "] 0/4   0%"
    assert render(2, 4, "a") == "a [" + "#" * 14 + "." * 14 + "] 2/4  50%"
    assert render(4, 4, "") == "[" + "#" * 28 + "] 4/4 100%"


# -- command line ----------------------------------------------------------------------


def test_cli_writes_all_three(tmp_path: Path, engine_reports: dict[str, eg.NetReport],
                              capsys: pytest.CaptureFixture[str]) -> None:
    out, csv_path = tmp_path / "r.html", tmp_path / "r.csv"
    rc = main(["report", "--rules", str(DECK_PATH), str(NETS_PATH), "-o", str(out),
               "--csv", str(csv_path), "--json", "--max-drawings", "0", "--progress", "never"])
    assert rc == 1  # the demo block has violations
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    printed = capsys.readouterr()
    data = json.loads(printed.out)  # --json prints, as in check and advise
    assert {n["net"]: n["legal"] for n in data["nets"]} == {k: v.legal for k, v in engine_reports.items()}
    assert csv_path.read_text(encoding="utf-8").splitlines()[0].startswith("net,net_legal,")
    assert "200 nets" in printed.err


def test_cli_json_is_a_flag_as_in_check_and_advise(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # the net file may follow the flag
    assert main(["report", "--rules", str(DECK_PATH), "--json", str(NETS_PATH), "--progress", "never"]) == 1
    assert len(json.loads(capsys.readouterr().out)["nets"]) == 200
    # the old form, a file after --json, is refused with the new one, before any work
    old = tmp_path / "r.json"
    assert main(["report", "--rules", str(DECK_PATH), str(NETS_PATH), "--json", str(old)]) == 2
    err = capsys.readouterr().err
    assert "--json takes no file: it prints the JSON on stdout" in err and f"> {old}" in err
    assert not old.exists()
    with pytest.raises(SystemExit):
        main(["report", "--help"])
    assert "[--json]" in capsys.readouterr().out.replace("\n", " ")


def test_cli_selects_nets_by_name_and_pattern(capsys: pytest.CaptureFixture[str]) -> None:
    """``report --net/--match``, as ``check`` takes them: only those nets are reported,
    with the figures of the whole file's report; a name the file lacks is refused."""
    assert main(["report", "--rules", str(DECK_PATH), str(NETS_PATH), "--json", "--progress", "never"]) == 1
    every = {n["net"]: n for n in json.loads(capsys.readouterr().out)["nets"]}
    illegal = sorted(n for n, r in every.items() if not r["legal"])
    pattern = "blk_a/n1*"
    wanted = {illegal[0]} | {n for n in every if re.fullmatch(r"blk_a/n1.*", n)}
    rc = main(["report", "--rules", str(DECK_PATH), str(NETS_PATH), "--json", "--progress", "never",
               "--net", illegal[0], "--match", pattern])
    got = {n["net"]: n for n in json.loads(capsys.readouterr().out)["nets"]}
    assert rc == 1 and set(got) == wanted and 1 < len(got) < len(every)
    assert all(got[n] == every[n] for n in got)
    assert main(["report", "--rules", str(DECK_PATH), str(NETS_PATH), "--json", "--net", "blk_a/none"]) == 2
    assert "the input has no net 'blk_a/none'" in capsys.readouterr().err


def test_cli_legal_nets_exit_zero(tmp_path: Path, deck: eg.Deck) -> None:
    data = json.loads(NETS_PATH.read_text(encoding="utf-8"))
    engine = eg.Engine(deck)
    legal = []
    for raw, spec in zip(data["nets"], eg.parse_net_file(deck, data)):
        engine.open_net(spec.name, spec.pins, spec.layer_range, spec.shapes)
        if engine.check(spec.name).legal:
            legal.append(raw)
    nets = tmp_path / "legal.json"
    nets.write_text(json.dumps({"nets": legal[:5]}), encoding="utf-8")
    rc = main(["report", "--rules", str(DECK_PATH), str(nets), "--json"])
    assert rc == 0


def test_cli_bad_input(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["report", "--rules", str(DECK_PATH), str(NETS_PATH)]) == 2
    assert "nothing to write" in capsys.readouterr().err
    missing = tmp_path / "none.json"
    assert main(["report", "--rules", str(DECK_PATH), str(missing), "--csv", str(tmp_path / "x.csv")]) == 2
    assert "cannot read the net file" in capsys.readouterr().err
