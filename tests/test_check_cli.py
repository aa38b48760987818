"""``etchguard check``: choosing nets by name or pattern, and progress on demand.

The selected set is held to what Python's ``fnmatch.fnmatchcase`` (standard library)
selects from the file's names, and each selected net's figures to the same net checked
alone in the whole-file run.
"""

from __future__ import annotations

import fnmatch
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
