"""``etchguard advise``: text and JSON output, exit codes 0 / 1 / 2."""

from __future__ import annotations

import json

import pytest

from etchguard import cli, loads_deck
from test_advice import deck_text, far_side_net, net_json  # noqa: F401  (shared scenario)
from etchguard import Engine


def write_case(tmp_path, top: float = 4000.0):
    deck = loads_deck(deck_text(top), "advice-test")
    engine = Engine(deck)
    pins, shapes = far_side_net(deck)
    engine.open_net("n", pins, None, shapes)
    deck_path = tmp_path / "deck.toml"
    deck_path.write_text(deck_text(top))
    nets_path = tmp_path / "nets.json"
    nets_path.write_text(json.dumps({"nets": [net_json(deck, engine, "n")]}))
    return str(deck_path), str(nets_path)


def test_text_output_and_exit_0(tmp_path, capsys):
    deck, nets = write_case(tmp_path)
    code = cli.main(["advise", "--rules", deck, nets, "--net", "n", "--run", "M1", "50", "50", "50050", "50"])
    out = capsys.readouterr().out
    assert code == 0
    assert "M1 would reach 501 of 400" in out
    assert "M3 is free and legal at 25%" in out
    assert "keep 39900 DBU" in out


def test_json_output(tmp_path, capsys):
    deck, nets = write_case(tmp_path)
    code = cli.main(["advise", "--rules", deck, nets, "--net", "n", "--run", "M1", "50", "50",
                     "50050", "50", "--json"])
    data = json.loads(capsys.readouterr().out)
    assert code == 0 and data["found"] is True
    # the API's names (AdviseReply): best_option indexes options, lengths carry their unit
    assert data["options"][data["best_option"]]["layer"] == "M3" and data["jumper"]["kept_length_dbu"] == 39900
    assert "best" not in data and "kept_length" not in data["jumper"]
    assert data["diode"]["diff_area_um2"] == pytest.approx(101 / 36000, rel=1e-6)


def test_only_some_answers(tmp_path, capsys):
    deck, nets = write_case(tmp_path)
    code = cli.main(["advise", "--rules", deck, nets, "--net", "n", "--run", "M1", "50", "50",
                     "50050", "50", "--only", "hop", "--json"])
    data = json.loads(capsys.readouterr().out)
    assert code == 0 and data["options"][data["best_option"]]["layer"] == "M3"
    assert data["jumper"] is None and data["diode"] is None
    assert data["exact_scores"] == 3  # the run as is, then M3 and M5


def test_exit_1_when_only_illegal_options(tmp_path, capsys):
    # M1..M2 only, and the flat table: no hop, the jumper keeps part but leaves the rest
    # unrouted (not a fix), and no diode suffices.
    deck, nets = write_case(tmp_path, top=450.0)
    data = json.loads(open(nets).read())
    data["nets"][0]["layer_range"] = ["M1", "M2"]
    open(nets, "w").write(json.dumps(data))
    code = cli.main(["advise", "--rules", deck, nets, "--net", "n", "--run", "M1", "50", "50", "50050", "50"])
    out = capsys.readouterr().out
    assert code == 1, out
    assert "none suffices" in out


def test_exit_2_on_bad_input(tmp_path, capsys):
    deck, nets = write_case(tmp_path)
    assert cli.main(["advise", "--rules", deck, nets, "--net", "n", "--run", "M9", "0", "0", "5", "0"]) == 2
    assert "run.layer" in capsys.readouterr().err
    assert cli.main(["advise", "--rules", deck, nets, "--net", "zz", "--run", "M1", "0", "0", "5", "0"]) == 2
    assert cli.main(["advise", "--rules", deck, nets, "--net", "n", "--run", "M1", "0", "x", "5", "0"]) == 2
    assert "run.y1" in capsys.readouterr().err
