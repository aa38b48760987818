"""The format reference (docs/formats.md) against the tool: its worked example runs and
gives the figures derived by hand, and its key tables list exactly the keys the readers
accept.

The hand derivation follows the project's antenna model (partial ratio = conductor area
/ gate area, utilization = ratio / limit) with 1000 DBU to the um.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from etchguard import _nets, _rules, cli

DOC = Path(__file__).resolve().parents[1] / "docs" / "formats.md"
README = Path(__file__).resolve().parents[1] / "README.md"


def blocks(language: str) -> list[str]:
    example = DOC.read_text(encoding="utf-8").split("## A worked example")[1]
    return re.findall(rf"```{language}\n(.*?)```", example, re.S)


def table_keys(heading: str) -> set[str]:
    """First-column keys of the table under ``heading``."""
    text = DOC.read_text(encoding="utf-8").split(heading, 1)[1]
    rows = re.findall(r"^\| `([a-z_]+)`", text.split("\n### ")[0].split("\n## ")[0], re.M)
    return set(rows)


def test_worked_example(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    (deck_text,) = blocks("toml")
    nets_text = blocks("json")[0]
    deck, nets = tmp_path / "demo.toml", tmp_path / "nets.json"
    deck.write_text(deck_text, encoding="utf-8")
    nets.write_text(nets_text, encoding="utf-8")
    assert cli.main(["check", "--rules", str(deck), str(nets), "--json"]) == 1
    reports = {r["net"]: r for r in json.loads(capsys.readouterr().out)}
    # by hand: 150,000 x 140 DBU = 21 um^2 of M1 over 0.05 um^2 of gate
    ratio_n1 = 150_000 * 140 / 1000**2 / 0.05
    m1_partial = next(c for c in reports["blk_x/n1"]["checks"]
                      if c["layer"] == "M1" and c["kind"] == "partial")
    assert m1_partial["ratio"] == pytest.approx(ratio_n1) and m1_partial["limit"] == 400.0
    assert reports["blk_x/n1"]["worst_utilization"] == pytest.approx(ratio_n1 / 400.0)
    assert reports["blk_x/n1"]["legal"] is False
    # 10,000 x 140 DBU over 0.05 um^2; the M1 rule has no diode table: the plain 400
    assert reports["blk_x/n2"]["worst_utilization"] == pytest.approx(10_000 * 140 / 1000**2 / 0.05 / 400.0)
    # the table the page shows is what the tool prints
    assert cli.main(["check", "--rules", str(deck), str(nets), "--all"]) == 1
    printed = capsys.readouterr().out.strip().splitlines()
    doc = DOC.read_text(encoding="utf-8")
    for line in printed:
        assert f"    {line}" in doc, line


def test_key_tables_match_the_readers() -> None:
    assert table_keys("### `[process]`") == _rules._PROCESS_KEYS
    assert table_keys("### `[[layers]]`") == _rules._LAYER_KEYS
    assert table_keys("### `[[rules]]`") == _rules._RULE_KEYS
    net_table = DOC.read_text(encoding="utf-8").split("## The net file (JSON)")[1].split("\n## ")[0]
    rows = re.findall(r"^\| (net|pin|shape) \| `([a-z_]+)`(?:, `([a-z_]+)`)?", net_table, re.M)
    found: dict[str, set[str]] = {"net": set(), "pin": set(), "shape": set()}
    for where, key, second in rows:
        found[where] |= {key} | ({second} if second else set())
    assert found == {"net": _nets._NET_KEYS, "pin": _nets._PIN_KEYS, "shape": _nets._SHAPE_KEYS}


def test_readme_links_the_reference() -> None:
    assert "docs/formats.md" in README.read_text(encoding="utf-8")
