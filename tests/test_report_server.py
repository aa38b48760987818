"""``etchguard report --server``: the same report from the nets a running server holds.

A real ``etchguard serve`` on a loopback port (tests/grpc_fixtures.py) gets part of
the demo block through the Python client; the report's JSON must equal an offline
engine.check of the same nets, and its page must hold the figures it can draw
without geometry (histograms), saying that nets are not drawn.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

import etchguard as eg
from etchguard.cli import main
from etchguard.client import pin, rect
from grpc_fixtures import DEMO_DECK, free_port, start_server

NETS_PATH = DEMO_DECK.parent / "lumen-demo-nets.json"


def _some_demo_nets(deck: eg.Deck, count: int = 30) -> list[dict]:
    """The first ``count`` nets plus every violating one (so the page has violations)."""
    raw = json.loads(NETS_PATH.read_text(encoding="utf-8"))["nets"]
    engine = eg.Engine(deck)
    chosen = []
    for i, (net, spec) in enumerate(zip(raw, eg.parse_net_file(deck, {"nets": raw}))):
        engine.open_net(spec.name, spec.pins, spec.layer_range, spec.shapes)
        if i < count or not engine.check(spec.name).legal:
            chosen.append(net)
    return chosen


@pytest.fixture(scope="module")
def served() -> tuple[str, list[dict]]:
    deck = eg.load_deck(DEMO_DECK)
    nets = _some_demo_nets(deck)
    server = start_server()
    try:
        with server.client() as c:
            for net in nets:
                pins = [pin(p["name"], p["layer"], p["rects"], p.get("gate_area"), p.get("diff_area", 0.0),
                            p.get("cell_area")) for p in net["pins"]]
                c.open_net(net["name"], pins, [rect(s["layer"], *s["rect"]) for s in net["shapes"]])
        yield server.address, nets
    finally:
        server.stop()


def test_server_report_equals_offline_check(served: tuple[str, list[dict]], tmp_path: Path,
                                            capsys: pytest.CaptureFixture[str]) -> None:
    address, nets = served
    out_html = tmp_path / "s.html"
    rc = main(["report", "--server", address, "--json", "-o", str(out_html), "--progress", "never"])
    printed = capsys.readouterr().out
    deck = eg.load_deck(DEMO_DECK)
    engine = eg.Engine(deck)
    expected = {}
    for spec in eg.parse_net_file(deck, {"nets": nets}):
        engine.open_net(spec.name, spec.pins, spec.layer_range, spec.shapes)
        expected[spec.name] = engine.check(spec.name).as_dict()
    assert rc == (0 if all(e["legal"] for e in expected.values()) else 1)
    data = json.loads(printed)
    assert data["deck"] == deck.name
    got = {n["net"]: n for n in data["nets"]}
    assert set(got) == set(expected)
    for name, exp in expected.items():
        g = got[name]
        assert (g["legal"], g["worst_utilization"]) == (exp["legal"], exp["worst_utilization"])
        # protobuf doubles carry the engine's floats unchanged
        assert [{k: c[k] for k in exp["checks"][0]} for c in g["checks"]] == exp["checks"]
    page = out_html.read_text(encoding="utf-8")
    layers = {c["layer"] for e in expected.values() for c in e["checks"]}
    assert page.count('<svg class="eg-fig eg-hist"') == len(layers)
    # the violating nets' pins and shapes come from GetNet, the rules from GetDeck's TOML:
    # the page draws them, and their offending components equal an offline report's
    violating = sum(not e["legal"] for e in expected.values())
    assert violating > 0 and page.count('<svg class="eg-fig eg-net"') == violating
    assert "No geometry for this net: not drawn." not in page
    assert f"server {address}" in page
    net_file = tmp_path / "nets.json"
    net_file.write_text(json.dumps({"nets": nets}), encoding="utf-8")
    main(["report", "--rules", str(DEMO_DECK), str(net_file), "--json", "--progress", "never"])
    offline = {n["net"]: n for n in json.loads(capsys.readouterr().out)["nets"]}
    for name in (n for n, e in expected.items() if not e["legal"]):
        assert got[name]["offenders"] and got[name]["offenders"] == offline[name]["offenders"]


def test_server_report_selects_nets(served: tuple[str, list[dict]], capsys: pytest.CaptureFixture[str]) -> None:
    address, nets = served
    name = nets[0]["name"]
    main(["report", "--server", address, "--json", "--progress", "never", "--net", name])
    assert [n["net"] for n in json.loads(capsys.readouterr().out)["nets"]] == [name]
    assert main(["report", "--server", address, "--json", "--match", "no-such-*"]) == 2
    assert "no net matches 'no-such-*'" in capsys.readouterr().err


def test_server_unreachable_is_bad_input(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    port = free_port()  # nothing listens there
    rc = main(["report", "--server", f"127.0.0.1:{port}", "--timeout", "1", "--json"])
    assert rc == 2
    # the refused connection is the answer (was: a wait for the whole --timeout, then
    # "no server answered ... within")
    err = capsys.readouterr().err
    assert "no server answers at" in err and "within" not in err


def test_output_into_a_missing_folder_is_refused_before_any_work(tmp_path: Path,
                                                                 capsys: pytest.CaptureFixture[str]) -> None:
    # nothing listens on port 1 either: the folder is refused first, before any call
    rc = main(["report", "--server", "127.0.0.1:1", "-o", str(tmp_path / "absent" / "r.html")])
    assert rc == 2
    err = capsys.readouterr().err
    assert "--output: the folder" in err and "does not exist" in err and "server" not in err.split("--output")[1]


def test_server_with_a_net_file_is_refused(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    rc = main(["report", "--server", "127.0.0.1:1", str(NETS_PATH), "--json"])
    assert rc == 2 and "--server reports the server's own nets" in capsys.readouterr().err
