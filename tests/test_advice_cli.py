"""``etchguard advise``: text and JSON output, exit codes 0 / 1 / 2."""

from __future__ import annotations

import json

import pytest

from etchguard import Engine, Shape, cli, loads_deck
from etchguard.v1 import etchguard_pb2 as pb
from test_advice import deck_text, far_side_net, net_json  # noqa: F401  (shared scenario)


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
    # exactly the proto's fields, at every level, and its enums as the kinds' words
    assert set(data) == set(pb.AdviseReply.DESCRIPTOR.fields_by_name)
    assert set(data["jumper"]) == set(pb.JumperAdvice.DESCRIPTOR.fields_by_name)
    assert all(set(o) == set(pb.LayerOption.DESCRIPTOR.fields_by_name) for o in data["options"])
    assert [o["status"] for o in data["options"]] == ["legal", "legal"]
    assert data["jumper"]["limited_by"] == "limit" and data["warnings"] == []
    assert isinstance(data["jumper"]["run_length_dbu"], int)  # int64 stays a number


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
    # every field an error names is an option as typed: --run's parts by its metavar
    cases = [(["--net", "n", "--run", "M9", "0", "0", "5", "0"], "--run LAYER: "),
             (["--net", "n", "--run", "M1", "0", "x", "5", "0"], "--run Y1: "),
             (["--net", "n", "--run", "M1", "0", "0", "5", "7"], "--run: "),
             (["--net", "n", "--run", "M1", "0", "0", "5", "0", "--width", "0"], "--width: "),
             (["--net", "zz", "--run", "M1", "0", "0", "5", "0"], "--net: ")]
    for extra, field in cases:
        assert cli.main(["advise", "--rules", deck, nets, *extra]) == 2, extra
        assert field in capsys.readouterr().err, extra


def _advise(deck, engine, x1, y1, x2, y2):
    return engine.advise("n", deck.layer_index["M1"], x1, y1, x2, y2)


def test_warnings_whatever_the_run(tmp_path, capsys):
    """The net over a limit before the run is said for a short run and a long one alike;
    a run against its layer's direction and a run that touches the net nowhere are said
    too (the answer is given all the same)."""
    deck = loads_deck(deck_text(), "advice-test")
    engine = Engine(deck)
    pins, shapes = far_side_net(deck)
    engine.open_net("n", pins, None, shapes)
    fine = _advise(deck, engine, 50, 50, 50050, 50)  # the module's case: illegal run, net legal
    assert fine.warnings == ()
    # M1 to the left of the gate: 60,100 x 100 DBU = 6.01 um^2 over 0.01 um^2, 601 of 400
    engine.commit("n", [Shape(deck.layer_index["M1"], (-60000, 0, 100, 100))])
    for run in ((50, 50, 250, 50), (50, 50, 50050, 50)):  # short and long
        adv = _advise(deck, engine, *run)
        assert any("over a limit already, before this run" in w for w in adv.warnings), run
    across = _advise(deck, engine, 50, 50, 50, 3050)  # M1 is horizontal
    assert any("vertical, against M1's preferred direction (horizontal)" in w for w in across.warnings)
    apart = _advise(deck, engine, 20050, 5050, 25050, 5050)  # 5 um above everything
    assert any("touches none of the net's shapes or pins" in w for w in apart.warnings)
    assert not any("touches none" in w for w in across.warnings)
    # the command line prints them, in text and in JSON
    deck_path, nets = write_case(tmp_path)
    cli.main(["advise", "--rules", deck_path, nets, "--net", "n", "--run", "M1", "20050", "5050", "25050", "5050"])
    assert "warning: the run touches none" in capsys.readouterr().out
    cli.main(["advise", "--rules", deck_path, nets, "--net", "n", "--run", "M1", "50", "50", "50", "3050", "--json"])
    assert any("against M1's preferred direction" in w for w in json.loads(capsys.readouterr().out)["warnings"])
