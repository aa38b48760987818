"""What a user meets at the command line: every bad input file ends in exit 2 with a
message naming the file, the line where there is one, and the field, never a
traceback; JSON output is JSON; the version and the exit codes are told.

External references: RFC 8259 (JSON) has no literal for infinity or NaN, and the
protobuf JSON mapping (protobuf.dev, "JSON Mapping", double) writes them as the strings
"Infinity", "-Infinity", "NaN"; RFC 3629 (UTF-8) makes 0xE9 alone an invalid byte;
RFC 1952 (gzip) starts a file with 0x1F 0x8B; the Unicode byte-order mark in UTF-8 is
EF BB BF (Unicode standard, ch. 23.8).
"""

from __future__ import annotations

import gzip
import json
from pathlib import Path
from typing import Any

import pytest

import etchguard as eg
from etchguard import cli

DATA = Path(eg.__file__).parent / "data"
DECK = DATA / "lumen-6m.toml"
NETS = DATA / "lumen-demo-nets.json"
LIMIT = 1 << 62  # the core's coordinate limit (core.hpp): strictly inside +-2^62


def run(argv: list[str], capsys: pytest.CaptureFixture[str]) -> tuple[int, str, str]:
    code = cli.main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


def refused(argv: list[str], capsys: pytest.CaptureFixture[str], *parts: str) -> str:
    code, _, err = run(argv, capsys)
    assert code == 2, err
    assert "Traceback" not in err
    for part in parts:
        assert part in err, (part, err)
    return err


def one_net(**pin: Any) -> dict[str, Any]:
    gate = {"name": "u1.a", "layer": "M1", "rects": [[0, 0, 140, 140]], "gate_area": 0.05} | pin
    return {"nets": [{"name": "n1", "pins": [gate], "shapes": [{"layer": "M1", "rect": [0, 0, 9000, 140]}]}]}


# -- encodings ---------------------------------------------------------------------------

def test_latin1_byte_in_a_deck_comment_names_its_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    deck = tmp_path / "deck.toml"
    deck.write_bytes(b"# demo deck\n# caf\xe9\n" + DECK.read_bytes())
    refused(["check", "--rules", deck, NETS], capsys, f"{deck}:2:", "not UTF-8", "0xe9")


def test_gzipped_net_file(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    nets = tmp_path / "nets.json"
    nets.write_bytes(gzip.compress(NETS.read_bytes()))
    refused(["check", "--rules", DECK, nets], capsys, f"{nets}:", "not UTF-8", "gzip")


def test_byte_order_mark_is_accepted(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    deck, nets = tmp_path / "deck.toml", tmp_path / "nets.json"
    deck.write_bytes(b"\xef\xbb\xbf" + DECK.read_bytes())
    nets.write_bytes(b"\xef\xbb\xbf" + NETS.read_bytes())
    plain = run(["check", "--rules", DECK, NETS, "--json"], capsys)
    marked = run(["check", "--rules", deck, nets, "--json"], capsys)
    assert marked == plain and plain[0] == 1  # the demo block has violations


# -- JSON structure ----------------------------------------------------------------------

@pytest.mark.parametrize(("text", "line", "words"), [
    ("", 1, "empty"),
    ("\n\n  ", 3, "empty"),
    ('{"nets": []}', 1, "nothing to check"),
    ('{\n "nets": [],\n "x": 1}', 2, "nothing to check"),
    ('{"nets": [{"name": "a"}],\n "colour": 1}', 2, "unknown key 'colour'"),
    ("[" * 100_000, 1, "nested"),
    ('{"nets": [{"name": "a", "shapes": [{"layer": "M1",\n "rect": [0, 0, 1' + "0" * 5000 + ", 1]}]}]}",
     2, "5001 digits"),
    ('{"nets": [{"name": "a"},\n {"name": }]}', 2, "not valid JSON"),
    ('{"nets": [{"name": "a"}]} {}', 1, "after the end"),
])
def test_malformed_net_file(tmp_path: Path, capsys: pytest.CaptureFixture[str], text: str, line: int,
                            words: str) -> None:
    nets = tmp_path / "nets.json"
    nets.write_text(text, encoding="utf-8")
    refused(["check", "--rules", DECK, nets], capsys, f"{nets}:{line}:", words)


def test_field_error_names_the_line_of_the_field(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    data = json.loads(NETS.read_text(encoding="utf-8"))
    data["nets"][3]["shapes"][2]["rect"][1] = 0.5
    nets = tmp_path / "nets.json"
    text = json.dumps(data, indent=1)
    nets.write_text(text, encoding="utf-8")
    line = next(i for i, l in enumerate(text.splitlines(), 1) if l.strip() == "0.5,")
    # the rectangle's list opens a few lines above its second coordinate
    err = refused(["check", "--rules", DECK, nets], capsys, "nets[3].shapes[2].rect", "0.5")
    shown_line = int(err.split(f"{nets}:")[1].split(":")[0])
    assert line - 2 <= shown_line <= line, (shown_line, line)


@pytest.mark.parametrize("oxide", ["thik", "Thin"])
def test_oxide_class_without_a_rule(tmp_path: Path, capsys: pytest.CaptureFixture[str], oxide: str) -> None:
    # lumen-6m has rules for "thin" and "thick" only: a gate of another class would never
    # be checked and a net far over its limits would read legal.
    nets = tmp_path / "nets.json"
    nets.write_text(json.dumps(one_net(gate_area={oxide: 0.05})), encoding="utf-8")
    refused(["check", "--rules", DECK, nets], capsys, f"gate_area.{oxide}", repr(oxide), "no rule")


# -- decks -------------------------------------------------------------------------------

def test_several_deck_errors_reported_together_with_lines(tmp_path: Path,
                                                         capsys: pytest.CaptureFixture[str]) -> None:
    lines = DECK.read_text(encoding="utf-8").splitlines()
    first = next(i for i, l in enumerate(lines) if l.startswith("partial_max"))
    second = next(i for i, l in enumerate(lines) if l.startswith("cumulative_max") and i > first + 5)
    lines[first] = "partial_max = -1.0"
    lines[second] = 'cumulative_max = "high"'
    deck = tmp_path / "deck.toml"
    deck.write_text("\n".join(lines) + "\n", encoding="utf-8")
    err = refused(["check", "--rules", deck, NETS], capsys)
    assert f"{deck}:{first + 1}: rules[" in err and "partial_max: must be positive" in err
    assert f"{deck}:{second + 1}: rules[" in err and "cumulative_max: must be a finite number" in err


# -- one coordinate limit ----------------------------------------------------------------

def test_net_files_and_advise_share_the_coordinate_limit(tmp_path: Path,
                                                         capsys: pytest.CaptureFixture[str]) -> None:
    near = LIMIT - 10_000
    data = one_net()
    data["nets"][0]["shapes"] = [{"layer": "M1", "rect": [near - 8000, 0, near, 140]}]
    data["nets"][0]["pins"][0]["rects"] = [[near - 8000, 0, near - 7860, 140]]
    nets = tmp_path / "nets.json"
    nets.write_text(json.dumps(data), encoding="utf-8")
    code, out, err = run(["check", "--rules", DECK, nets, "--all"], capsys)
    assert code in (0, 1) and "n1" in out, err
    # a run inside the limit with room for the shapes advice proposes: answered
    code, out, err = run(["advise", "--rules", DECK, nets, "--net", "n1", "--run", "M1",
                          near - 100, 70, near - 1100, 70], capsys)
    assert code in (0, 1) and "Traceback" not in err and "net n1" in out, err
    # 2^61 was the old advise limit; inside 2^62 both accept it now
    code, _, err = run(["advise", "--rules", DECK, nets, "--net", "n1", "--run", "M1",
                        near - 100, 70, 1 << 61, 70], capsys)
    assert code != 2, err
    # at the limit: both refuse, naming the field
    refused(["advise", "--rules", DECK, nets, "--net", "n1", "--run", "M1", near, 70, LIMIT, 70],
            capsys, "--run X2: ", "2^62")
    # a run whose proposals (via pads, other layers' widths) would pass the limit
    refused(["advise", "--rules", DECK, nets, "--net", "n1", "--run", "M1", near, 70, LIMIT - 80, 70],
            capsys, "error: --run: ", "2^62")
    data["nets"][0]["shapes"] = [{"layer": "M1", "rect": [near, 0, LIMIT, 140]}]
    nets.write_text(json.dumps(data), encoding="utf-8")
    refused(["check", "--rules", DECK, nets], capsys, "nets[0].shapes[0].rect", "2^62")


# -- output ------------------------------------------------------------------------------

def test_check_json_is_json_when_a_ratio_overflows(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # 5e-324 um^2 of gate (the smallest float above 0): the ratio overflows to infinity.
    nets = tmp_path / "nets.json"
    nets.write_text(json.dumps(one_net(gate_area=5e-324)), encoding="utf-8")
    code, out, err = run(["check", "--rules", DECK, nets, "--json"], capsys)
    assert code == 1, err

    def no_constants(name: str) -> None:
        raise AssertionError(f"{name} is not JSON (RFC 8259)")
    reports = json.loads(out, parse_constant=no_constants)
    assert reports[0]["net"] == "n1" and reports[0]["worst_utilization"] == "Infinity"
    check = next(c for c in reports[0]["checks"] if c["ratio"] == "Infinity")
    assert check["gate"] == "u1.a" and check["layer"] == "M1" and check["step"] == 0


def test_version(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as info:
        cli.main(["--version"])
    assert info.value.code == 0 and capsys.readouterr().out.strip() == f"etchguard {eg.__version__}"


@pytest.mark.parametrize("command", sorted(cli.EXIT_CODES))
def test_every_help_states_its_exit_codes(capsys: pytest.CaptureFixture[str], command: str) -> None:
    with pytest.raises(SystemExit):
        cli.main([command, "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "exit status: 0" in text and "2 bad input" in text
