"""``etchguard check``: choosing nets by name or pattern, and progress on demand.

The selected set is held to what Python's ``fnmatch.fnmatchcase`` (standard library)
selects from the file's names, and each selected net's figures to the same net checked
alone in the whole-file run.
"""

from __future__ import annotations

import fnmatch
import re
import json
from pathlib import Path

import pytest

import etchguard as eg
from etchguard import cli

DATA = Path(eg.__file__).parent / "data"
DECK = DATA / "lumen-6m.toml"
NETS = DATA / "lumen-demo-nets.json"
NAMES = [n["name"] for n in json.loads(NETS.read_text(encoding="utf-8"))["nets"]]


def check_json(capsys: pytest.CaptureFixture[str], *extra: str) -> tuple[int, list[dict[str, object]]]:
    code = cli.main(["check", "--rules", str(DECK), str(NETS), "--json", *extra])
    return code, json.loads(capsys.readouterr().out)


def test_by_name_and_pattern(capsys: pytest.CaptureFixture[str]) -> None:
    _, everything = check_json(capsys)
    by_name = {r["net"]: r for r in everything}
    pattern = "blk_a/n1??"
    expected = [n for n in NAMES if fnmatch.fnmatchcase(n, pattern)] + [NAMES[-1]]
    assert 1 < len(expected) < len(NAMES)  # the pattern picks some, not all
    code, chosen = check_json(capsys, "--match", pattern, "--net", NAMES[-1])
    assert [r["net"] for r in chosen] == expected  # in file order
    assert chosen == [by_name[n] for n in expected]
    assert code == (0 if all(r["legal"] for r in chosen) else 1)


def test_one_legal_net_exits_0(capsys: pytest.CaptureFixture[str]) -> None:
    _, everything = check_json(capsys)
    legal = next(r["net"] for r in everything if r["legal"])
    illegal = next(r["net"] for r in everything if not r["legal"])
    assert check_json(capsys, "--net", str(legal))[0] == 0
    assert check_json(capsys, "--net", str(illegal))[0] == 1


@pytest.mark.parametrize(("args", "field"), [
    (["--net", "blk_a/absent"], "--net: the input has no net 'blk_a/absent'"),
    (["--match", "blk_z/*"], "--match: no net matches 'blk_z/*'"),
])
def test_selection_that_finds_nothing(capsys: pytest.CaptureFixture[str], args: list[str], field: str) -> None:
    assert cli.main(["check", "--rules", str(DECK), str(NETS), *args]) == 2
    out = capsys.readouterr()
    assert field in out.err and out.out == ""


def test_progress_on_demand(capsys: pytest.CaptureFixture[str]) -> None:
    assert cli.main(["check", "--rules", str(DECK), str(NETS), "--progress", "always"]) == 1
    err = capsys.readouterr().err
    assert err.replace("\r", "\n").split()[-1] == str(len(NAMES))  # the last count: every net
    assert cli.main(["check", "--rules", str(DECK), str(NETS), "--progress", "never"]) == 1
    assert capsys.readouterr().err == ""


def test_text_has_a_per_layer_summary_agreeing_with_the_json(capsys: pytest.CaptureFixture[str]) -> None:
    """One line per process step: the highest utilization of any net there and how many
    nets are illegal there, as the JSON's checks give them."""
    _, reports = check_json(capsys)
    assert cli.main(["check", "--rules", str(DECK), str(NETS)]) == 1
    lines = capsys.readouterr().out.splitlines()
    head = lines.index(next(line for line in lines if line.startswith("layer  step")))
    got = {}
    for line in lines[head + 1:]:
        if not line.strip():
            break
        layer, step, use, illegal, worst_net = line.split()
        got[int(step)] = (layer, use, int(illegal), worst_net)
    expected: dict[int, tuple[str, float, set[str], str]] = {}
    for r in reports:
        for c in r["checks"]:  # type: ignore[union-attr]
            layer, top, bad, net = expected.get(c["step"], (c["layer"], -1.0, set(), ""))
            if c["utilization"] > top:
                top, net = c["utilization"], r["net"]
            if not c["legal"]:
                bad = bad | {r["net"]}
            expected[c["step"]] = (layer, top, bad, net)
    assert got == {s: (layer, f"{top:.1%}", len(bad), net) for s, (layer, top, bad, net) in expected.items()}
    assert sum(n for _, _, n, _ in got.values()) >= 1


def test_one_verdict_vocabulary(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """check's table, report's page and summary, and advise's options say a verdict
    with the same words, ``legal`` / ``illegal`` (the JSON's ``legal`` field as a word)."""
    assert cli.main(["check", "--rules", str(DECK), str(NETS), "--all"]) == 1
    words = {line.split()[1] for line in capsys.readouterr().out.splitlines()[1:] if line.startswith("blk_a/")}
    assert words == {"legal", "illegal"}
    page = tmp_path / "r.html"
    assert cli.main(["report", "--rules", str(DECK), str(NETS), "-o", str(page), "--json",
                     "--max-drawings", "0", "--progress", "never"]) == 1
    summary = json.loads(capsys.readouterr().out)["summary"]
    assert {"legal", "illegal", "illegal_checks"} <= set(summary) and "violating" not in summary
    text = page.read_text(encoding="utf-8")
    states = set(re.findall(r'<span class="(?:ok|over)">([a-z]+)</span>', text))
    assert states == {"legal", "illegal"}
    for old in (">OVER<", ">ok<", ">over<", "violating</div>"):
        assert old not in text, old
