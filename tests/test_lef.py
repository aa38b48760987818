"""The LEF reader and its mapping onto the rule deck.

Sources:
* the mapping table of the contract (the antenna model, "The same model from the open
  LEF/DEF standard"): every expected deck value below is derived by hand from the
  demo LEF's statements with that table, in a comment beside it;
* the open standard's own example file complete.5.8.lef (in ../shared/lefdef, Apache
  2.0): read without error, and the counts of what it declares are taken from the file
  text with plain regular expressions, independently of the reader. It is not copied
  into tests/data: its license notice and contents name a real company, which this
  project's files do not; the tests read it where the workplace lays it out and skip
  when it is absent.
"""

from __future__ import annotations

import re
import subprocess
import sys
import tomllib
from pathlib import Path

import etchguard as eg
import pytest
from etchguard._lef import read_lef
from etchguard._lef_deck import deck_from_lef, deck_toml
from etchguard._lef_model import Measure
from etchguard._lefdef_tokens import Notes

DATA = Path(__file__).resolve().parent / "data"
TECH = DATA / "lumen-tech.lef"
CELLS = DATA / "lumen-cells.lef"
STANDARD = Path(__file__).resolve().parents[2] / "shared" / "lefdef"
COMPLETE_LEF = STANDARD / "complete.5.8.lef"
needs_standard = pytest.mark.skipif(not COMPLETE_LEF.exists(), reason="the standard's example files are not here")

# The deck the demo tech LEF states, derived by hand with the contract's table.
EXPECTED_DECK = """
[process]
name = "lumen-3m"
dbu_per_micron = 1000            # UNITS DATABASE MICRONS 1000
cumulative_includes_cuts = false

# POLY (MASTERSLICE) is not a process step; CONT (CUT) lies below M1: dropped.
[[layers]]
name = "M1"
kind = "routing"
direction = "horizontal"         # DIRECTION HORIZONTAL
thickness_um = 0.13              # THICKNESS 0.13
wire_width = 140                 # WIDTH 0.14 um * 1000
spacing = 140                    # SPACING 0.14 (the RANGE form is skipped)

[[layers]]
name = "V1"
kind = "cut"
cut_size = 140                   # DEFAULT via V1_DEF: cut -0.07..0.07
enclosure = 40                   # V1_DEF pads: M1 overhangs 0.11 - 0.07 = 0.04 (the larger)

[[layers]]
name = "M2"
kind = "routing"
direction = "vertical"
thickness_um = 0.14
wire_width = 140
spacing = 140

[[layers]]
name = "V2"
kind = "cut"
cut_size = 140                   # no DEFAULT via: VIARULE V2_GEN GENERATE DEFAULT, RECT 0.14
enclosure = 50                   # its ENCLOSUREs: M2 0.04 0.0, M3 0.05 0.01 -> the larger 0.05

[[layers]]
name = "M3"
kind = "routing"
direction = "horizontal"
thickness_um = 0.2
wire_width = 200
spacing = 200

[[rules]]                        # M1 OXIDE1
layer = "M1"
oxide = "thin"
measure = "area"
partial_max = 400.0              # ANTENNAAREARATIO
cumulative_max = 1600.0          # ANTENNACUMAREARATIO
diode_partial_max = [[0.0, 400.0], [0.2, 1200.0], [1.0, 8000.0]]        # ANTENNADIFFAREARATIO PWL
diode_cumulative_max = [[0.0, 1600.0], [0.2, 4800.0], [1.0, 30000.0]]   # ANTENNACUMDIFFAREARATIO PWL

[[rules]]
layer = "M1"
oxide = "thin"
measure = "side"
partial_max = 450.0              # ANTENNASIDEAREARATIO (M1 has THICKNESS)

[[rules]]                        # M1 after ANTENNAMODEL OXIDE2
layer = "M1"
oxide = "oxide2"
measure = "area"
partial_max = 1000.0
cumulative_max = 4000.0

[[rules]]
layer = "V1"
oxide = "thin"
measure = "area"
partial_max = 20.0
diode_partial_max = [[0.0, 80.0]]  # ANTENNADIFFAREARATIO 80: a number v is the table [[0, v]]

[[rules]]
layer = "M2"
oxide = "thin"
measure = "area"
partial_max = 400.0
cumulative_max = 1600.0
area_factor = 1.5                # ANTENNAAREAFACTOR 1.5
diode_area_credit = 50.0         # ANTENNAAREAMINUSDIFF 50
diode_gate_factor = 2.0          # ANTENNAGATEPLUSDIFF 2.0, given in a LEF57 PROPERTY string

[[rules]]
layer = "M2"
oxide = "oxide2"
measure = "area"
partial_max = 900.0

[[rules]]
layer = "V2"
oxide = "thin"
measure = "area"
partial_max = 20.0

[[rules]]
layer = "M3"
oxide = "thin"
measure = "area"
partial_max = 500.0
cumulative_max = 2000.0

[[rules]]
layer = "M3"
oxide = "thin"
measure = "side"
partial_max = 600.0
area_factor = 2.0                # ANTENNASIDEAREAFACTOR 2.0 DIFFUSEONLY
factor_with_diode_only = true
"""

HEAD = """VERSION 5.8 ;
UNITS
  DATABASE MICRONS 1000 ;
END UNITS
"""


def lumen_deck(**kwargs: object) -> tuple[eg.Deck, Notes]:
    notes = Notes()
    deck = deck_from_lef(read_lef([TECH], notes), notes, name="lumen-3m", **kwargs)  # type: ignore[arg-type]
    return deck, notes


def write(tmp_path: Path, text: str, name: str = "lumen-test.lef") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_demo_tech_lef_is_the_hand_derived_deck() -> None:
    deck, _ = lumen_deck()
    expected = eg.loads_deck(EXPECTED_DECK, "expected")
    assert deck.name == expected.name and deck.dbu_per_micron == expected.dbu_per_micron
    assert deck.layers == expected.layers
    assert sorted(deck.rules, key=repr) == sorted(expected.rules, key=repr)


def test_deck_toml_loads_back_to_the_same_deck() -> None:
    deck, _ = lumen_deck()
    again = eg.loads_deck(deck_toml(deck), "round trip")
    assert again.layers == deck.layers and again.rules == deck.rules
    assert (again.name, again.dbu_per_micron) == (deck.name, deck.dbu_per_micron)


def test_deck_at_other_database_units_scales_the_widths() -> None:
    deck, _ = lumen_deck(dbu=2000)
    # WIDTH 0.14 um at 2000 DBU per micron is 280 DBU; the enclosure 0.04 um is 80.
    assert deck.layer("M1").wire_width == 280 and deck.layer("V1").enclosure == 80


def test_skipped_statements_are_warnings_with_file_and_line() -> None:
    _, notes = lumen_deck()
    text = TECH.read_text().splitlines()
    found = {(n.keyword, n.line) for n in notes.kept}
    # the RANGE spacing and the RESISTANCE of the demo LEF, at the lines the file has them
    assert ("SPACING", 1 + next(i for i, l in enumerate(text) if "SPACING 0.3 RANGE" in l)) in found
    assert ("RESISTANCE", 1 + next(i for i, l in enumerate(text) if "RESISTANCE RPERSQ" in l)) in found
    assert ("LAYER", 1 + next(i for i, l in enumerate(text) if l.startswith("LAYER CONT"))) in found


def test_cell_library_pins_and_antenna_cells() -> None:
    lef = read_lef([TECH, CELLS])
    inv = lef.macros["LINV"]
    assert inv.size == (1.4, 2.8) and inv.pins["A"].shapes == [("M1", (0.2, 0.6, 0.4, 1.2))]
    assert inv.pins["A"].antenna.gate_area == {"thin": 0.05}
    assert inv.pins["A"].antenna.partial == {(Measure.AREA, "M1"): 0.02}
    assert inv.pins["Y"].antenna.diff_area == 0.3
    # PATH 0.7 0.5 0.7 1.1 at M1's WIDTH 0.14 reaches half the width past each end
    (layer, rect), = lef.macros["LNAND2X"].pins["B"].shapes
    assert layer == "M1" and rect == pytest.approx((0.63, 0.43, 0.77, 1.17))
    assert lef.macros["LNAND2X"].origin == (0.1, 0.0)
    assert lef.macros["LTHICKIN"].pins["A"].antenna.gate_area == {"oxide2": 0.2}  # ANTENNAMODEL OXIDE2
    assert [m.name for m in lef.antenna_cells] == ["LDIODE"]  # CLASS CORE ANTENNACELL


# -- the cumulative chain through cuts and the reduction table -------------------------------

EXTRAS = HEAD + """
LAYER M1
  TYPE ROUTING ;
  DIRECTION HORIZONTAL ;
  WIDTH 0.1 ;
  ANTENNAAREARATIO 400 ;
  ANTENNAAREADIFFREDUCEPWL ( ( 0 1 ) ( 0.2 0.5 ) ) ;
END M1
LAYER V1
  TYPE CUT ;
  ANTENNAAREARATIO 20 ;
  ANTENNACUMAREARATIO 60 ;
  ANTENNACUMROUTINGPLUSCUT ;
END V1
LAYER M2
  TYPE ROUTING ;
  DIRECTION VERTICAL ;
  WIDTH 0.1 ;
  ANTENNAAREARATIO 400 ;
END M2
END LIBRARY
"""


def test_plus_cut_and_reduction_table_reach_the_toml(tmp_path: Path) -> None:
    notes = Notes()
    deck = deck_from_lef(read_lef([write(tmp_path, EXTRAS)], notes), notes)
    data = tomllib.loads(deck_toml(deck))
    v1 = next(l for l in data["layers"] if l["name"] == "V1")
    assert v1["cumulative_plus_cut"] is True
    m1 = next(r for r in data["rules"] if r["layer"] == "M1")
    assert m1["diode_area_reduction"] == [[0.0, 1.0], [0.2, 0.5]]


def test_plus_cut_and_reduction_table_reach_the_deck(tmp_path: Path) -> None:
    notes = Notes()
    deck = deck_from_lef(read_lef([write(tmp_path, EXTRAS)], notes), notes)
    assert deck.layer("V1").cumulative_plus_cut is True
    assert deck.rule(0, "area", "thin").diode_area_reduction == ((0.0, 1.0), (0.2, 0.5))


# -- refusals name file:line and the keyword ------------------------------------------------

def refusal(tmp_path: Path, text: str, error: type[eg.EtchguardError] = eg.InputError) -> eg.EtchguardError:
    path = write(tmp_path, text)
    notes = Notes()
    with pytest.raises(error) as info:
        deck_from_lef(read_lef([path], notes), notes)
    return info.value


def line_of(text: str, needle: str) -> int:
    return 1 + next(i for i, l in enumerate(text.splitlines()) if needle in l)


def test_side_rule_without_thickness(tmp_path: Path) -> None:
    text = EXTRAS.replace("  ANTENNAAREARATIO 400 ;\n  ANTENNAAREADIFF", "  ANTENNASIDEAREARATIO 400 ;\n  ANTENNAAREADIFF")
    err = refusal(tmp_path, text, eg.DeckError)
    assert err.field == f"{tmp_path / 'lumen-test.lef'}:{line_of(text, 'ANTENNASIDEAREARATIO')}: ANTENNASIDEAREARATIO"
    assert "THICKNESS" in err.message


def test_side_rule_on_a_cut_layer(tmp_path: Path) -> None:
    text = EXTRAS.replace("  ANTENNACUMAREARATIO 60 ;", "  ANTENNASIDEAREARATIO 60 ;")
    err = refusal(tmp_path, text, eg.DeckError)
    assert f":{line_of(text, 'ANTENNASIDEAREARATIO 60')}: " in str(err.field) and "cut layer" in err.message


def test_pwl_with_decreasing_areas(tmp_path: Path) -> None:
    text = EXTRAS.replace("( ( 0 1 ) ( 0.2 0.5 ) )", "( ( 0.2 1 ) ( 0.1 0.5 ) )")
    err = refusal(tmp_path, text)
    assert err.field == f"{tmp_path / 'lumen-test.lef'}:{line_of(text, 'REDUCEPWL')}: ANTENNAAREADIFFREDUCEPWL"
    assert "increase" in err.message


def test_missing_end_of_a_layer(tmp_path: Path) -> None:
    text = EXTRAS.replace("END M1\n", "")
    err = refusal(tmp_path, text)
    # the next block's END closes the wrong layer; the error is where that END stands
    assert err.field == f"{tmp_path / 'lumen-test.lef'}:{line_of(text, 'END V1')}: END"


def test_truncated_file(tmp_path: Path) -> None:
    text = EXTRAS[:EXTRAS.index("END M2")]
    err = refusal(tmp_path, text)
    assert "ends here" in err.message and "LAYER M2" in str(err.field)
    assert str(err.field).startswith(f"{tmp_path / 'lumen-test.lef'}:{len(text.splitlines())}:")


def test_bad_number(tmp_path: Path) -> None:
    text = EXTRAS.replace("ANTENNAAREARATIO 20 ;", "ANTENNAAREARATIO 2O ;")
    err = refusal(tmp_path, text)
    assert err.field == f"{tmp_path / 'lumen-test.lef'}:{line_of(text, '2O')}: ANTENNAAREARATIO"


def test_byte_that_is_not_utf8(tmp_path: Path) -> None:
    path = tmp_path / "lumen-test.lef"
    path.write_bytes(EXTRAS.replace("LAYER M2", "LAYER M\xe92").encode("latin-1"))
    with pytest.raises(eg.InputError) as info:
        read_lef([path])
    assert info.value.field == f"{path}:{line_of(EXTRAS, 'LAYER M2')}: encoding"


def test_byte_that_is_not_utf8_inside_a_comment_is_a_warning(tmp_path: Path) -> None:
    path = tmp_path / "lumen-test.lef"
    path.write_bytes(EXTRAS.replace("LAYER M2", "LAYER M2 # M\xe9tal").encode("latin-1"))
    notes = Notes()
    assert read_lef([path], notes).layer("M2") is not None
    assert notes.count("encoding") == 1


def test_routing_layers_must_interleave_with_cuts(tmp_path: Path) -> None:
    text = EXTRAS.replace("  TYPE CUT ;", "  TYPE ROUTING ;\n  DIRECTION VERTICAL ;")
    text = text.replace("  ANTENNACUMROUTINGPLUSCUT ;\n", "")
    err = refusal(tmp_path, text, eg.DeckError)
    assert err.field == f"{tmp_path / 'lumen-test.lef'}:{line_of(text, 'LAYER V1')}: LAYER"


def test_diagonal_direction_has_no_term(tmp_path: Path) -> None:
    text = EXTRAS.replace("DIRECTION VERTICAL", "DIRECTION DIAG45")
    err = refusal(tmp_path, text, eg.DeckError)
    assert err.field == f"{tmp_path / 'lumen-test.lef'}:{line_of(text, 'DIAG45')}: DIRECTION"


# -- the command ------------------------------------------------------------------------------

def run_cli(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "etchguard.cli", *args], capture_output=True, text=True, check=False,
                          timeout=120)


def test_deck_from_lef_command(tmp_path: Path) -> None:
    out = tmp_path / "lumen.toml"
    done = run_cli("deck-from-lef", str(TECH), "--name", "lumen-3m", "-o", str(out))
    assert done.returncode == 0, done.stderr
    assert eg.load_deck(out).layers == eg.loads_deck(EXPECTED_DECK).layers
    assert "lumen-tech.lef:" in done.stderr  # the warnings name the file


def test_deck_from_lef_command_refuses_with_file_line(tmp_path: Path) -> None:
    text = EXTRAS.replace("( ( 0 1 ) ( 0.2 0.5 ) )", "( ( 0.2 1 ) ( 0.1 0.5 ) )")
    path = write(tmp_path, text)
    done = run_cli("deck-from-lef", str(path))
    assert done.returncode == 2 and done.stdout == ""
    assert f"{path}:{line_of(text, 'REDUCEPWL')}: ANTENNAAREADIFFREDUCEPWL" in done.stderr


# -- the standard's example file ---------------------------------------------------------------

@needs_standard
def test_standard_example_lef_reads_with_its_declared_counts() -> None:
    text = COMPLETE_LEF.read_text(encoding="utf-8", errors="replace")
    notes = Notes()
    lef = read_lef([COMPLETE_LEF], notes)
    # Independent counts from the text: blocks open at the start of a line.
    layer_blocks = re.findall(r"^layer (\S+)\s*(?:#.*)?$", text, re.MULTILINE | re.IGNORECASE)
    typed = dict(re.findall(r"^layer (\S+)\s*(?:#.*)?\n\s*TYPE (\w+)", text, re.MULTILINE | re.IGNORECASE))
    assert len(layer_blocks) == len(lef.layers) + len(lef.other_layers)
    assert [l.name for l in lef.layers] == [n for n in layer_blocks if typed[n] in ("ROUTING", "CUT")]
    vias = re.findall(r"^\s*VIA (\S+)\s*(?:DEFAULT|GENERATED)?\s*$", text, re.MULTILINE)
    assert sorted(lef.vias) == sorted(vias)
    assert len(lef.via_rules) == len(re.findall(r"^VIARULE \S+ GENERATE", text, re.MULTILINE))
    assert sorted(lef.macros) == sorted(re.findall(r"^MACRO (\S+)", text, re.MULTILINE))
    assert [m.name for m in lef.antenna_cells] == ["DFF3"]  # its one CLASS CORE ANTENNACELL
    # values as written: the later of two statements wins, with a warning naming it
    rx = lef.layer("RX")
    assert rx is not None and rx.antenna["oxide2"].ratio[Measure.AREA] == 7.6  # 4.6, then 7.6
    assert rx.antenna["oxide2"].diff_reduce[1] == (0.0999, 1.0)  # the LEF57 PROPERTY form comes last
    assert rx.thickness == 1.0 and rx.direction == "HORIZONTAL"
    again = [n for n in notes.kept if n.keyword == "ANTENNAAREARATIO" and "again" in n.message]
    assert again and again[0].line == 1 + text.splitlines().index("   ANTENNAAREARATIO 7.6 ;")
    vdd = lef.macros["CHK3A"].pins["VDD"].antenna
    assert vdd.gate_area_by_layer == {"thin": {"M2": 297.013, "M3": 297.214}, "oxide3": {"M2": 162.48}}


@needs_standard
def test_standard_example_lef_is_not_a_deck_and_says_where() -> None:
    notes = Notes()
    lef = read_lef([COMPLETE_LEF], notes)
    text = COMPLETE_LEF.read_text(encoding="utf-8", errors="replace").splitlines()
    with pytest.raises(eg.DeckError) as info:
        deck_from_lef(lef, notes)
    # M3 and M4 follow each other with no cut layer between them
    assert info.value.field == f"{COMPLETE_LEF}:{1 + text.index('LAYER M4')}: LAYER"
