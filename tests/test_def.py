"""The DEF reader: placement, wiring to rectangles, binding to the deck, end to end.

Sources:
* orientations: the LEF/DEF 5.8 language reference, "Specifying Orientation" (quoted
  from memory): N as drawn, W rotated 90 degrees counterclockwise, S 180, E 90 degrees
  clockwise, FN mirrored about the y axis, FW/FS/FE = FN then the rotation of W/S/E; a
  placed component's bounding box has its lower-left corner on the placement point.
  The test builds these with shapely.affinity (rotate, scale) and compares;
* wiring: the contract's last paragraph (the antenna model): width from WIDTH or the
  non-default rule, half the width past each end unless an extension is given, RECT
  relative to the last point, a via switching the layer;
* figures: every pin and rectangle of the demo block (tests/data/lumen-block.def, with
  lumen-tech.lef and lumen-cells.lef, all invented demo data) is derived by hand in a
  comment; the check figures come from tests/reference.py (shapely + networkx) on the
  hand-derived deck and nets, and from the engine on the same design given as TOML and
  JSON;
* the standard's example complete.5.8.def (../shared/lefdef, Apache 2.0, not copied:
  see test_lef.py): read without error, section counts held to the file's own text.
"""

from __future__ import annotations

import gc
import json
import re
import subprocess
import sys
import tomllib
import tracemalloc
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import etchguard as eg
import pytest
from etchguard._def import DefReader
from etchguard._lefdef import open_design
from etchguard._lefdef_geometry import Orientation, place, placement_shift
from etchguard._lefdef_tokens import Notes
from reference import analyze, ref_deck, report_disagreements
from shapely import affinity
from shapely.geometry import Polygon, box
from test_lef import EXPECTED_DECK

REPO = Path(__file__).resolve().parents[1]
DATA = REPO / "tests" / "data"
LEFS = [DATA / "lumen-tech.lef", DATA / "lumen-cells.lef"]
BLOCK = DATA / "lumen-block.def"
COMPLETE_DEF = REPO.parent / "shared" / "lefdef" / "complete.5.8.def"

# -- orientations --------------------------------------------------------------------------


def by_definition(geom: Any, orient: str) -> Any:
    """The standard's wording, built with shapely.affinity about the origin."""
    mirrored = affinity.scale(geom, xfact=-1, yfact=1, origin=(0, 0))  # FN: about the y axis
    base = mirrored if orient.startswith("F") else geom
    angle = {"N": 0, "W": 90, "S": 180, "E": -90}[orient[-1]]  # shapely: counterclockwise degrees
    return affinity.rotate(base, angle, origin=(0, 0))


@pytest.mark.parametrize("orient", [o.name for o in Orientation])
def test_orientation_matches_the_standard(orient: str) -> None:
    width, height = 1400, 2800
    shapes = [(200, 600, 400, 1200), (1000, 600, 1200, 2000), (0, 2660, 1400, 2800)]  # no symmetry
    x, y = 5000, 7000
    cell = by_definition(box(0, 0, width, height), orient)
    moved = [affinity.translate(by_definition(box(*r), orient), x - cell.bounds[0], y - cell.bounds[1])
             for r in shapes]
    o = Orientation[orient]
    dx, dy = placement_shift(o, width, height, x, y)
    got = place(shapes, o, dx, dy)
    assert [tuple(round(v) for v in m.bounds) for m in moved] == got
    # DEF: the placed bounding box's lower-left corner is the placement point
    assert o.rect((0, 0, width, height))[:2] == (x - dx, y - dy)


def test_orientations_are_the_eight_symmetries_of_the_square() -> None:
    # The 8 maps are distinct and close under composition (the dihedral group of order 8).
    maps = {o: o.value for o in Orientation}
    assert len(set(maps.values())) == 8

    def compose(a: tuple[int, ...], b: tuple[int, ...]) -> tuple[int, ...]:
        return (a[0] * b[0] + a[1] * b[2], a[0] * b[1] + a[1] * b[3],
                a[2] * b[0] + a[3] * b[2], a[2] * b[1] + a[3] * b[3])
    assert {compose(a, b) for a in maps.values() for b in maps.values()} == set(maps.values())
    # FS is also the mirror about the x axis (shapely: yfact=-1), as the standard's figure shows
    l_shape = Polygon([(0, 0), (3, 0), (3, 1), (1, 1), (1, 2), (0, 2)])
    assert by_definition(l_shape, "FS").equals(affinity.scale(l_shape, xfact=1, yfact=-1, origin=(0, 0)))


# -- the demo block, derived by hand ----------------------------------------------------------
# LINV: SIZE 1.4 x 2.8 um = 1400 x 2800 DBU; pin A RECT 0.2 0.6 0.4 1.2 (gate 0.05 thin,
# in-cell M1 0.02), Y RECT 1.0 0.6 1.2 2.0 (diffusion 0.3, in-cell M1 0.05).
# Placements (point, orientation): the box (0, 0, w, h) is oriented, then moved so its
# lower-left corner is on the point.

def pin(name: str, layer: str, rect: list[int], gate: dict[str, float] | None = None, diff: float = 0.0,
        cell: dict[str, float] | None = None, side: dict[str, float] | None = None,
        block: list[dict[str, Any]] | None = None, also: dict[str, list[int]] | None = None) -> dict[str, Any]:
    rects: list[Any] = [rect] + [{"layer": l, "rect": r} for l, r in (also or {}).items()]
    return {"name": name, "layer": layer, "rects": rects, "gate_area": gate or {}, "diff_area": diff,
            "cell_area": cell or {}, "cell_side_area": side or {}, "block_car": block or []}


def shape(layer: str, rect: list[int]) -> dict[str, Any]:
    return {"layer": layer, "rect": rect}


# Vias about their origin, DBU: V1_DEF M1 (-110 -70 110 70), V1 (-70 -70 70 70),
# M2 (-70 -110 70 110); V2_BAR M2 (-70 -120 70 120), V2 (-70 -70 70 70), M3 (-120 -100 120 100);
# DEF V1_WIDE M1 (-200 -70 200 70), V1 (-70 -70 70 70), M2 (-70 -200 70 200);
# DEF V2_G2 (generated): 1 x 2 cuts of 140 spaced 160: the array is 440 x 140 centred, cuts
# (-220 -70 -80 70) and (80 -70 220 70); M2 grown by 40, 0: (-260 -70 260 70); M3 by 50, 10:
# (-270 -80 270 80).
EXPECTED_NETS = [
    {"name": "n1", "pins": [
        # u1 LINV at (2000, 4000) N: shift (2000, 4000)
        pin("u1.Y", "M1", [3000, 4600, 3200, 6000], diff=0.3, cell={"M1": 0.05}),
        # u2 LINV at (8000, 4000) FS: (x, -y); box -> (0, -2800, 1400, 0), shift (8000, 6800);
        # A (200, 600, 400, 1200) -> (200, -1200, 400, -600) -> (8200, 5600, 8400, 6200)
        pin("u2.A", "M1", [8200, 5600, 8400, 6200], gate={"thin": 0.05}, cell={"M1": 0.02}),
        # d1 LDIODE (0.7 x 2.8) at (5000, 9000) FN: (-x, y); box -> (-700, 0, 0, 2800), shift
        # (5700, 9000); A RECT 0.2 0.2 0.5 0.6 -> (-500, 200, -200, 600) -> (5200, 9200, 5500, 9600)
        pin("d1.A", "M1", [5200, 9200, 5500, 9600], diff=0.5)],
     "shapes": [
        # M1 (3100 5800) to (8300 5800), width 140: 70 past each end, 70 either side
        shape("M1", [3030, 5730, 8370, 5870]),
        # V1_DEF at (5350 5800), then M2 up to (5350 9400), then V1_DEF back to M1
        shape("M1", [5240, 5730, 5460, 5870]), shape("V1", [5280, 5730, 5420, 5870]),
        shape("M2", [5280, 5690, 5420, 5910]),
        shape("M2", [5280, 5730, 5420, 9470]),
        shape("M2", [5280, 9290, 5420, 9510]), shape("V1", [5280, 9330, 5420, 9470]),
        shape("M1", [5240, 9330, 5460, 9470])]},
    {"name": "n2", "pins": [
        # u2.Y: (1000, 600, 1200, 2000) FS -> (1000, -2000, 1200, -600) + (8000, 6800)
        pin("u2.Y", "M1", [9000, 4800, 9200, 6200], diff=0.3, cell={"M1": 0.05}),
        # u3 LNAND2X (2.0 x 2.8, ORIGIN 0.1 0 adds 100 to x) at (14000, 4000) E: (y, -x);
        # box -> (0, -2000, 2800, 0), shift (14000, 6000).
        # A RECT 0.1 0.4 0.3 1.0 -> (200, 400, 400, 1000) -> (400, -400, 1000, -200)
        pin("u3.A", "M1", [14400, 5600, 15000, 5800], gate={"thin": 0.04}),
        # B PATH 0.7 0.5 0.7 1.1 at width 0.14 -> (0.63 0.43 0.77 1.17) -> (730, 430, 870, 1170)
        # -> (430, -870, 1170, -730); ANTENNAPARTIALMETALSIDEAREA 0.01 LAYER M1 is its
        # in-cell side wall on M1, as given
        pin("u3.B", "M1", [14430, 5130, 15170, 5270], gate={"thin": 0.04}, side={"M1": 0.01})],
     "shapes": [
        # (9100 5700) to (14700 5700) with extension 0 at the end
        shape("M1", [9030, 5630, 14700, 5770]),
        # RECT ( -100 -500 100 0 ) from the last point (14700 5700)
        shape("M1", [14600, 5200, 14800, 5700]),
        # V1_WIDE at (12000 5700), M2 up to 7000, V2_G2 there, M3 (width 200) to 13000
        shape("M1", [11800, 5630, 12200, 5770]), shape("V1", [11930, 5630, 12070, 5770]),
        shape("M2", [11930, 5500, 12070, 5900]),
        shape("M2", [11930, 5630, 12070, 7070]),
        shape("M2", [11740, 6930, 12260, 7070]), shape("V2", [11780, 6930, 11920, 7070]),
        shape("V2", [12080, 6930, 12220, 7070]), shape("M3", [11730, 6920, 12270, 7080]),
        shape("M3", [11900, 6900, 13100, 7100]),
        # (9100 5000) VIRTUAL (9100 4500): no wire; then (9100 4500) to (10000 4500)
        shape("M1", [9030, 4430, 10070, 4570])]},
    {"name": "n3", "pins": [
        # u3.Y RECT 1.5 0.4 1.7 2.2 -> (1600, 400, 1800, 2200) -> E (400, -1800, 2200, -1600)
        pin("u3.Y", "M1", [14400, 4200, 16200, 4400], diff=0.4),
        # u4 LTHICKIN at (20000, 4000) W: (-y, x); box -> (-2800, 0, 0, 1400), shift (22800, 4000);
        # A on M2 RECT 0.6 1.0 0.8 1.6 -> (-1600, 600, -1000, 800); OXIDE2 -> "oxide2"
        pin("u4.A", "M2", [21200, 4600, 21800, 4800], gate={"oxide2": 0.2})],
     "shapes": [
        # NONDEFAULTRULE WIDE2X: M1 and M2 0.28 um = 280 DBU, 140 past the ends
        shape("M1", [15860, 4160, 21140, 4440]),
        shape("M1", [20890, 4230, 21110, 4370]), shape("V1", [20930, 4230, 21070, 4370]),
        shape("M2", [20930, 4190, 21070, 4410]),
        shape("M2", [20860, 4160, 21140, 4840]), shape("M2", [20860, 4560, 21640, 4840]),
        # NEW M1 TAPER: back to M1's own 140
        shape("M1", [15930, 2930, 16070, 4370])]},
    {"name": "n4", "pins": [
        # DEF PIN IN1: LAYER M3 (-100 -200) (100 200) FIXED (30000 1000) E: (y, -x) about the
        # placement point -> (-200, -100, 200, 100) + (30000, 1000); ANTENNAPINDIFFAREA 0.1
        pin("PIN IN1", "M3", [29800, 900, 30200, 1100], diff=0.1),
        # u5 LINV at (26000, 4000) FE: (y, x); box -> (0, 0, 2800, 1400), shift (26000, 4000);
        # A -> (600, 200, 1200, 400)
        pin("u5.A", "M1", [26600, 4200, 27200, 4400], gate={"thin": 0.05}, cell={"M1": 0.02})],
     "shapes": [
        shape("M3", [29900, 900, 30100, 3100]),
        shape("M2", [29930, 2880, 30070, 3120]), shape("V2", [29930, 2930, 30070, 3070]),
        shape("M3", [29880, 2900, 30120, 3100]),
        shape("M2", [26830, 2930, 30070, 3070]),
        # V1_DEF W at (26900 3000): (-y, x) turns M1 (-110 -70 110 70) into (-70 -110 70 110)
        # and M2 (-70 -110 70 110) into (-110 -70 110 70)
        shape("M1", [26830, 2890, 26970, 3110]), shape("V1", [26830, 2930, 26970, 3070]),
        shape("M2", [26790, 2930, 27010, 3070]),
        shape("M1", [26830, 2930, 26970, 4370])]},
    {"name": "n5", "pins": [
        # u6 LINV at (32000, 4000) S: (-x, -y); box -> (-1400, -2800, 0, 0), shift (33400, 6800);
        # A -> (-400, -1200, -200, -600)
        pin("u6.A", "M1", [33000, 5600, 33200, 6200], gate={"thin": 0.05}, cell={"M1": 0.02}),
        # u7 LINV at (36000, 4000) FW: (-y, -x); box -> (-2800, -1400, 0, 0), shift (38800, 5400);
        # Y -> (-2000, -1200, -600, -1000); u8 is UNPLACED: left out (a warning)
        pin("u7.Y", "M1", [36800, 4200, 38200, 4400], diff=0.3, cell={"M1": 0.05})],
     "shapes": [
        shape("M1", [33070, 5830, 37570, 5970]),  # extension 30 at the first point
        shape("M1", [37430, 4230, 37570, 5970])]},
    {"name": "n6", "pins": [
        # LBLOCK pin IN has per-LAYER gate areas only (M1 0.8, M2 0.6): the smallest, 0.6; its
        # port has RECT 0.0 1.0 0.4 1.4 on M1 and on M2: both are the pin's, which joins at
        # M1, the lowest; at (2000, 12000) N.
        # ANTENNAMAXAREACAR 50 LAYER M1 (no ANTENNAMODEL: OXIDE1, "thin") is its block ratio.
        pin("b1.IN", "M1", [2000, 13000, 2400, 13400], gate={"thin": 0.6},
            block=[{"layer": "M1", "measure": "area", "oxide": "thin", "ratio": 50.0}],
            also={"M2": [2000, 13000, 2400, 13400]})],
     "shapes": [shape("M1", [2130, 13130, 6070, 13270])]},
    {"name": "n7", "pins": [
        pin("u9.A", "M1", [40200, 4600, 40400, 5200], gate={"thin": 0.05}, cell={"M1": 0.02})],
     "shapes": [
        shape("M1", [40190, 4830, 40410, 4970]), shape("V1", [40230, 4830, 40370, 4970]),
        shape("M2", [40230, 4790, 40370, 5010]),
        shape("M2", [40230, 4830, 40370, 7570]),
        shape("M2", [40230, 7380, 40370, 7620]), shape("V2", [40230, 7430, 40370, 7570]),
        shape("M3", [40180, 7400, 40420, 7600]),
        shape("M3", [40200, 7400, 190100, 7600])]},  # a long M3 run: over its limits
    {"name": "n8", "pins": [
        # u10, u11, u12 LINV at (50000 | 54000 | 58000, 4000) N; u12 joins through the subnet
        pin("u10.A", "M1", [50200, 4600, 50400, 5200], gate={"thin": 0.05}, cell={"M1": 0.02}),
        pin("u11.Y", "M1", [55000, 4600, 55200, 6000], diff=0.3, cell={"M1": 0.05}),
        pin("u12.A", "M1", [58200, 4600, 58400, 5200], gate={"thin": 0.05}, cell={"M1": 0.02})],
     "shapes": [
        shape("M1", [50230, 4930, 55170, 5070]),  # NOSHIELD wiring: M1's own 140
        shape("M1", [54960, 4860, 58440, 5140])]},  # the subnet's TAPERRULE WIDE2X: 280
]


def as_plain(spec: eg.NetSpec, deck: eg.Deck) -> dict[str, Any]:
    name = {l.index: l.name for l in deck.layers}
    return {"name": spec.name,
            "pins": sorted([{"name": p.name, "layer": name[p.layer],
                             "rects": [list(r) if l == p.layer else {"layer": name[l], "rect": list(r)}
                                       for l, r in p.layered_rects()],
                             "gate_area": dict(p.gate_area), "diff_area": p.diff_area,
                             "cell_area": {name[s]: a for s, a in p.cell_area.items()},
                             "cell_side_area": {name[s]: a for s, a in p.cell_side_area.items()},
                             "block_car": [{"layer": name[s], "measure": m, "oxide": ox, "ratio": r}
                                           for (m, s, ox), r in sorted(p.block_car.items())]}
                            for p in spec.pins],
                           key=lambda p: p["name"]),
            "shapes": sorted([name[s.layer], list(s.rect)] for s in spec.shapes)}


def expected_plain(net: dict[str, Any]) -> dict[str, Any]:
    return {"name": net["name"], "pins": sorted(net["pins"], key=lambda p: p["name"]),
            "shapes": sorted([s["layer"], s["rect"]] for s in net["shapes"])}


def test_demo_block_nets_are_the_hand_derived_ones() -> None:
    design = open_design(LEFS, BLOCK)
    got = [as_plain(spec, design.deck) for spec in design.nets]
    assert got == [expected_plain(net) for net in EXPECTED_NETS]
    unplaced = [n for n in design.notes.kept if n.keyword == "COMPONENTS" and "not placed" in n.message]
    assert [(n.subject, n.line) for n in unplaced] == [("u8", line_of(BLOCK.read_text(), "- u8 LINV"))]
    assert design.notes.count("ANTENNAPARTIALMETALSIDEAREA") == 0 and design.notes.count("ANTENNAMAXAREACAR") == 0
    assert design.header.special_nets == 1  # VDD, left out


def run_cli(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "etchguard.cli", *args], capture_output=True, text=True, check=False,
                          timeout=300, cwd=cwd)


def lefdef_check_json() -> list[dict[str, Any]]:
    done = run_cli("check", "--lef", str(LEFS[0]), "--lef", str(LEFS[1]), "--def", str(BLOCK), "--json")
    assert done.returncode == 1, done.stderr  # n7 is over its limits
    return json.loads(done.stdout)


def test_check_agrees_with_the_reference_on_the_hand_derived_design() -> None:
    reports = {r["net"]: r for r in lefdef_check_json()}
    deck = ref_deck(tomllib.loads(EXPECTED_DECK))
    for net in EXPECTED_NETS:
        got = reports[net["name"]]
        as_report = SimpleNamespace(legal=got["legal"], worst_utilization=got["worst_utilization"],
                                    checks=[SimpleNamespace(**c) for c in got["checks"]])
        assert report_disagreements(as_report, analyze(deck, net)) == [], net["name"]
    assert [n for n, r in reports.items() if not r["legal"]] == ["n7"]


def test_check_equals_the_same_design_given_as_toml_and_json(tmp_path: Path) -> None:
    (tmp_path / "deck.toml").write_text(EXPECTED_DECK, encoding="utf-8")
    (tmp_path / "nets.json").write_text(json.dumps({"nets": EXPECTED_NETS}), encoding="utf-8")
    done = run_cli("check", "--rules", str(tmp_path / "deck.toml"), str(tmp_path / "nets.json"), "--json")
    assert json.loads(done.stdout) == lefdef_check_json()  # to the bit


def test_report_reads_lef_and_def(tmp_path: Path) -> None:
    done = run_cli("report", "--lef", str(LEFS[0]), "--lef", str(LEFS[1]), "--def", str(BLOCK),
                   "--json", "--progress", "never")
    assert done.returncode == 1, done.stderr
    assert "8 nets, 1 illegal" in done.stderr


# -- refusals name file:line and the keyword ----------------------------------------------------

def block_with(tmp_path: Path, old: str, new: str) -> tuple[Path, str]:
    text = BLOCK.read_text(encoding="utf-8")
    assert old in text
    text = text.replace(old, new, 1)
    path = tmp_path / "lumen-broken.def"
    path.write_text(text, encoding="utf-8")
    return path, text


def line_of(text: str, needle: str) -> int:
    return 1 + next(i for i, l in enumerate(text.splitlines()) if needle in l)


def read_error(path: Path) -> eg.InputError:
    with pytest.raises(eg.InputError) as info:
        for _ in open_design(LEFS, path).nets:
            pass
    return info.value


@pytest.mark.parametrize(("old", "new", "needle", "keyword", "words"), [
    ("+ ROUTED M3 ( 30000", "+ ROUTED M9 ( 30000", "ROUTED M9", "NETS", "unknown layer M9"),
    ("V2_BAR ( 26900", "V2_NOPE ( 26900", "V2_NOPE", "NETS", "unknown via V2_NOPE"),
    ("- u9 LINV", "- u9 LNOPE", "u9 LNOPE", "COMPONENTS", "macro LNOPE"),
    ("- n7 ( u9 A )", "- n7 ( u99 A )", "u99 A", "NETS", "unknown component u99"),
    ("- n7 ( u9 A )", "- n7 ( u9 Q )", "u9 Q", "NETS", "has no pin Q"),
    ("( 37500 * ) ( * 4300 )", "( 37500 4300 )", "37500 4300", "NETS", "neither horizontal nor vertical"),
    ("V2_BAR ( 26900 * )", "V1_DEF ( 26900 * )", "V1_DEF ( 26900", "NETS", "does not land on M3"),
    ("+ NONDEFAULTRULE WIDE2X", "+ NONDEFAULTRULE WIDE9X", "ROUTED M1 ( 16000", "NONDEFAULTRULE",
     "unknown non-default rule"),
    ("END NETS", "", "END DESIGN", "END", "END NETS"),
    ("  + RECT M1 ( -200 -70 )", "  RECT M1 ( -200 -70 )", "RECT M1 ( -200 -70 )", "VIAS", "expected '+'"),
    ("UNITS DISTANCE MICRONS 1000", "UNITS DISTANCE MICRONS 1OOO", "UNITS", "UNITS", "coordinate"),
])
def test_bad_design_is_refused_naming_file_and_line(tmp_path: Path, old: str, new: str, needle: str,
                                                    keyword: str, words: str) -> None:
    path, text = block_with(tmp_path, old, new)
    err = read_error(path)
    assert err.field == f"{path}:{line_of(text, needle)}: {keyword}", (err.field, err.message)
    assert words in err.message


def test_truncated_design(tmp_path: Path) -> None:
    text = BLOCK.read_text(encoding="utf-8")
    cut = text[:text.index("- n5")]
    path = tmp_path / "lumen-cut.def"
    path.write_text(cut, encoding="utf-8")
    err = read_error(path)
    assert "ends" in err.message and str(err.field).startswith(f"{path}:{len(cut.splitlines())}: NETS")


@pytest.mark.parametrize("newline", ["\n", "\r\n"])
def test_lines_are_counted_right_far_into_a_big_file(tmp_path: Path, newline: str) -> None:
    """The reader decodes blocks of lines at once; a refusal past several blocks (and a
    comment and a quoted string read line by line among them) still names its line."""
    lines = ["VERSION 5.8 ;", "DESIGN lumen_far ;", "UNITS DISTANCE MICRONS 1000 ;", "COMPONENTS 2 ;",
             "- c0 LINV + PLACED ( 0 0 ) N ;", "- c1 LINV + PLACED ( 2800 0 ) N ;", "END COMPONENTS",
             "NETS 6001 ;"]
    for n in range(6000):
        lines += [f"- net_{n} ( c0 A ) ( c1 Y )", f"  + ROUTED M1 ( 300 900 ) ( {4000 + n} * ) V1_DEF ( * 5000 )"]
        if n == 3000:
            lines += ['# a comment, "quoted"', '  + PROPERTY "a b"']
        lines.append("  + USE SIGNAL ;")
    lines += ["- far ( c0 A )", "  + ROUTED M1 ( 300 900 ) V9_NOPE ( * 5000 ) ;", "END NETS", "END DESIGN"]
    path = tmp_path / "far.def"
    path.write_bytes(newline.join(lines).encode("utf-8") + newline.encode())
    assert path.stat().st_size > 2 * (1 << 18)  # more than two of the reader's blocks
    err = read_error(path)
    assert err.field == f"{path}:{lines.index('  + ROUTED M1 ( 300 900 ) V9_NOPE ( * 5000 ) ;') + 1}: NETS", err.field
    assert "unknown via V9_NOPE" in err.message


def test_byte_that_is_not_utf8(tmp_path: Path) -> None:
    path = tmp_path / "lumen-latin.def"
    text = BLOCK.read_text(encoding="utf-8").replace("- n6 ( b1 IN )", "- n\xe96 ( b1 IN )")
    path.write_bytes(text.encode("latin-1"))
    assert read_error(path).field == f"{path}:{line_of(text, '( b1 IN )')}: encoding"


def test_cli_refusal_exits_2_with_file_and_line(tmp_path: Path) -> None:
    path, text = block_with(tmp_path, "V2_BAR ( 26900", "V2_NOPE ( 26900")
    done = run_cli("check", "--lef", str(LEFS[0]), "--lef", str(LEFS[1]), "--def", str(path))
    assert done.returncode == 2
    assert f"{path}:{line_of(text, 'V2_NOPE')}: NETS" in done.stderr


def test_cli_refuses_mixed_inputs() -> None:
    done = run_cli("check", "--lef", str(LEFS[0]), "--def", str(BLOCK), "--rules", "deck.toml")
    assert done.returncode == 2 and "not both" in done.stderr


def test_components_of_every_form_read_alike(tmp_path: Path) -> None:
    """The common one-line COMPONENTS statements are taken a line at a time, the others
    word by word: the same records either way, and a refusal after many one-line
    statements still names its line. The collector runs again after the header."""
    lines = ["VERSION 5.8 ;", "DESIGN lumen_forms ;", "UNITS DISTANCE MICRONS 1000 ;", "COMPONENTS 6 ;",
             "- c0 LINV + PLACED ( 0 0 ) N ;",
             "- c1 LINV", "  + FIXED ( 2800 0 ) FS ;",
             "- c2 LINV + PLACED ( 5.6e3 0 ) N ;",
             "- c3 LINV + SOURCE DIST + PLACED ( 8400 0 ) E ;",
             "- c4 LINV + UNPLACED ;",
             "- c5 LINV + COVER ( 11200 0 ) FW ;", "END COMPONENTS", "END DESIGN"]
    path = tmp_path / "forms.def"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    components = DefReader(path).read_header().components
    got = {name: (c.macro, c.line, c.placement) for name, c in components.items()}
    assert got == {"c0": ("LINV", 5, (0, 0, Orientation.N)), "c1": ("LINV", 6, (2800, 0, Orientation.FS)),
                   "c2": ("LINV", 8, (5600, 0, Orientation.N)), "c3": ("LINV", 9, (8400, 0, Orientation.E)),
                   "c4": ("LINV", 10, None), "c5": ("LINV", 11, (11200, 0, Orientation.FW))}
    assert gc.isenabled()
    twice = lines[:4] + [f"- c{i} LINV + PLACED ( {i * 2800} 0 ) N ;" for i in range(5)] + [
        "- c3 LINV + PLACED ( 0 0 ) N ;", "END COMPONENTS", "END DESIGN"]
    path.write_text("\n".join(twice) + "\n", encoding="utf-8")
    with pytest.raises(eg.InputError) as info:
        DefReader(path).read_header()
    assert info.value.field == f"{path}:10: COMPONENTS" and "defined twice" in info.value.message
    assert gc.isenabled()


# -- streaming ----------------------------------------------------------------------------------

def streaming_growth(tmp_path: Path, nets: int) -> int:
    """Python memory the net stream needs beyond what the header holds (tracemalloc),
    for a generated block whose 30 components stay the same whatever the net count."""
    lines = ["VERSION 5.8 ;", "DESIGN lumen_stream ;", "UNITS DISTANCE MICRONS 1000 ;", "COMPONENTS 30 ;"]
    lines += [f"- c{i} LINV + PLACED ( {i * 2800} 0 ) N ;" for i in range(30)]
    lines += ["END COMPONENTS", f"NETS {nets} ;"]
    for n in range(nets):
        x = (n % 30) * 2800
        lines.append(f"- net_{n} ( c{n % 30} A ) ( c{(n + 1) % 30} Y )\n  + ROUTED M1 ( {x + 300} 900 ) "
                     f"( {x + 4000} * ) V1_DEF ( * 5000 ) V2_BAR ( {x + 9000} * ) ;")
    lines += ["END NETS", "END DESIGN"]
    path = tmp_path / f"stream{nets}.def"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    tracemalloc.start()
    design = open_design(LEFS, path)
    tracemalloc.reset_peak()
    base = tracemalloc.get_traced_memory()[0]
    count = sum(1 for _ in design.nets)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert count == nets
    return peak - base


def test_nets_are_streamed(tmp_path: Path) -> None:
    small, large = streaming_growth(tmp_path, 300), streaming_growth(tmp_path, 1200)
    # Holding every NetSpec would cost kilobytes per net; the stream keeps only the names
    # of nets seen (duplicate check) and per-macro/per-via caches.
    assert (large - small) / 900 < 400, (small, large)


# -- the standard's example file ----------------------------------------------------------------

@pytest.mark.skipif(not COMPLETE_DEF.exists(), reason="the standard's example files are not here")
def test_standard_example_def_reads_with_its_section_counts() -> None:
    text = COMPLETE_DEF.read_text(encoding="utf-8", errors="replace")
    notes = Notes()
    reader = DefReader(COMPLETE_DEF, notes)
    header = reader.read_header()
    nets = list(reader.raw_nets())
    # Independent counts: the "- " statements between a section's head and its END.
    for section in ("VIAS", "COMPONENTS", "PINS", "SPECIALNETS", "NETS", "BLOCKAGES", "FILLS"):
        body = re.search(rf"^{section} (\d+) ;(.*?)^END {section}", text, re.MULTILINE | re.DOTALL)
        assert body is not None
        statements = re.findall(r"^\s*- ", re.sub(r"#.*", "", body.group(2)), re.MULTILINE)
        declared, found, _ = header.counts[section]
        assert (declared, found) == (int(body.group(1)), len(statements)), section
        if declared != found:  # the file's own counts disagree with what it holds: said so
            line = 1 + text[:body.start()].count("\n")
            assert any(n.keyword == section and n.line == line and "declares" in n.message for n in notes.kept)
    assert len(nets) == header.counts["NETS"][1]
    assert len(header.components) == header.counts["COMPONENTS"][1]
    assert header.dbu == int(re.search(r"UNITS DISTANCE MICRONS (\d+)", text).group(1))  # type: ignore[union-attr]
    points = [tuple(map(int, p)) for p in re.findall(r"\( (-?\d+) (-?\d+) \)",
                                                     re.search(r"^DIEAREA(.*?);", text, re.DOTALL | re.MULTILINE).group(1))]  # type: ignore[union-attr]
    assert header.die_area == tuple(int(v) for v in Polygon(points).bounds)  # shapely bounds
    stray = [i for i, raw in enumerate(COMPLETE_DEF.read_bytes().splitlines(), 1) if not _is_utf8(raw)]
    assert stray and notes.count("encoding") == len(stray)  # stray bytes in its comments: warnings


def _is_utf8(raw: bytes) -> bool:
    try:
        raw.decode("utf-8")
    except UnicodeDecodeError:
        return False
    return True


# -- the server ----------------------------------------------------------------------------------

def test_serve_takes_rules_from_lef_and_opens_the_def_nets() -> None:
    from grpc_fixtures import start_server

    offline = {r["net"]: r for r in lefdef_check_json()}
    server = start_server("--lef", str(LEFS[0]), "--lef", str(LEFS[1]), "--def", str(BLOCK),
                          rules=None, metrics=False)
    try:
        with server.client() as client:
            assert [l.name for l in client.deck.layers] == ["M1", "V1", "M2", "V2", "M3"]
            held = {r.net: r for r in client.check_all()}
        assert sorted(held) == sorted(offline)
        for name, report in held.items():
            assert report.legal == offline[name]["legal"]
            assert report.worst_utilization == offline[name]["worst_utilization"]
        skipped = [e for e in server.logs if e.get("msg") == "LEF/DEF statement not used"]
        pin_line = line_of(LEFS[1].read_text(encoding="utf-8"), "PIN IN")  # LBLOCK's pin: per-LAYER gates only
        assert any(e["keyword"] == "ANTENNAGATEAREA" and e["where"] == f"{LEFS[1]}:{pin_line}" for e in skipped)
    finally:
        assert server.stop() == 0


def test_serve_refuses_rules_twice() -> None:
    done = run_cli("serve", "--rules", "deck.toml", "--lef", str(LEFS[0]), "--listen", "127.0.0.1:0")
    assert done.returncode == 2 and "--lef" in done.stderr


# -- mangled input ----------------------------------------------------------------------------------

def test_mangled_demo_files_are_read_or_refused_naming_a_line(tmp_path: Path) -> None:
    """Cut, drop, insert or replace one word of one of the three demo files, 400 times: the
    readers either read the result or refuse it with the package's error naming file:line
    (never an IndexError or the like)."""
    import random

    texts = [LEFS[0].read_text(), LEFS[1].read_text(), BLOCK.read_text()]
    paths = [tmp_path / "tech.lef", tmp_path / "cells.lef", tmp_path / "block.def"]
    rng = random.Random(20261202)
    refused = 0
    for _ in range(400):
        mangled = list(texts)
        which = rng.randrange(3)
        words = mangled[which].split(" ")
        at = rng.randrange(len(words))
        match rng.randrange(4):
            case 0:
                words = words[:at]
            case 1:
                del words[at]
            case 2:
                words.insert(at, rng.choice([";", "(", ")", "+", "-", "END", "*", "1.5", "NEW", "RECT", '"']))
            case _:
                words[at] = rng.choice(["0", "-1", "1e400", "nan", "M9", "V1", "END", "(", "*"])
        mangled[which] = " ".join(words)
        for path, text in zip(paths, mangled, strict=True):
            path.write_text(text, encoding="utf-8")
        try:
            for _ in open_design(paths[:2], paths[2]).nets:
                pass
        except eg.EtchguardError as exc:
            refused += 1
            # every refusal names a file and a line, except a LEF without any routing layer
            assert re.search(r"\.(lef|def):\d+", str(exc.field)) or "no ROUTING" in exc.message, exc
    assert refused > 100  # most mangles break something
