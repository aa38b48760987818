"""LoadDeck from technology LEF text, over gRPC against a real ``etchguard serve``.

The check is the hand-derived deck of the demo tech LEF (``test_lef.EXPECTED_DECK``:
every value worked out from the LEF's statements with the contract's mapping table, "The
same model from the open LEF/DEF standard"): LEF text loaded over the wire gives the
DeckInfo that deck gives as TOML, and a held net the same check figures under both. A
bad LEF is INVALID_ARGUMENT naming name:line and the keyword and leaves the deck and the
nets held as they were; a deck loaded from LEF comes back after a restart.
"""

from __future__ import annotations

from pathlib import Path

import grpc
import pytest
from etchguard.client import ServiceError
from grpc_fixtures import DRIVER, GATE, start_server, trunk
from test_lef import EXPECTED_DECK, TECH

NAME = "lumen-tech.lef"


def deck_fields(info) -> tuple:
    """DeckInfo without the TOML source and the warnings (how the deck was given)."""
    return (info.name, info.dbu_per_micron, info.cumulative_includes_cuts, [str(layer) for layer in info.layers],
            list(info.oxides), info.rule_count)


def line_of(text: str, needle: str) -> int:
    return 1 + next(i for i, line in enumerate(text.splitlines()) if needle in line)


@pytest.fixture(scope="module")
def server():
    s = start_server(rules=None, metrics=False)
    yield s
    assert s.stop() == 0


def test_lef_text_gives_the_deck_and_figures_of_the_toml_deck(server) -> None:
    lef = TECH.read_text(encoding="utf-8")
    with server.client() as c:
        toml_info = c.load_deck(EXPECTED_DECK)
        c.open_net("same", [GATE, DRIVER])
        c.commit("same", trunk(c.deck))
        under_toml = str(c.check("same"))
        lef_info = c.load_deck_lef([(NAME, lef)], process_name="lumen-3m")
        assert deck_fields(lef_info) == deck_fields(toml_info)
        assert str(c.check("same")) == under_toml  # the held net re-judged under the LEF's deck
        # the reply's TOML is the deck the server keeps, and the warnings name name:line
        assert c.deck.toml == lef_info.toml and "lumen-3m" in lef_info.toml
        range_line = line_of(lef, "SPACING 0.3 RANGE")
        assert any(w.startswith(f"{NAME}:{range_line}: SPACING") for w in lef_info.warnings), lef_info.warnings
        assert not toml_info.warnings
        # as deck-from-lef: the first name without its extension when no name is given
        assert c.load_deck_lef([TECH]).name == "lumen-tech"
        c.close_net("same")


@pytest.mark.parametrize(("old", "new", "needle", "keyword"), [
    ("  WIDTH 0.14 ;", "  WIDTH 0.l4 ;", "WIDTH 0.l4", "WIDTH"),  # not a number
    ("END M2", "END M9", "END M9", "END"),  # an END that closes another block
])
def test_bad_lef_is_invalid_argument_naming_line_and_keeps_the_deck(server, old: str, new: str, needle: str,
                                                                    keyword: str) -> None:
    lef = TECH.read_text(encoding="utf-8")
    assert old in lef
    bad = lef.replace(old, new, 1)
    with server.client() as c:
        before = c.load_deck(EXPECTED_DECK)
        c.open_net("kept", [GATE, DRIVER])
        c.commit("kept", trunk(c.deck))
        figures = str(c.check("kept"))
        with pytest.raises(ServiceError) as info:
            c.load_deck_lef([(NAME, bad)], process_name="lumen-3m")
        assert info.value.code is grpc.StatusCode.INVALID_ARGUMENT
        assert info.value.field == f"{NAME}:{line_of(bad, needle)}: {keyword}", (info.value.field, info.value.message)
        c._deck = None  # fetch the deck again: it is the one held before
        assert c.deck.toml == before.toml and deck_fields(c.deck) == deck_fields(before)
        assert str(c.check("kept")) == figures
        c.close_net("kept")


def test_side_wall_rule_without_thickness_and_no_text_are_refused(server) -> None:
    lef = TECH.read_text(encoding="utf-8")
    with server.client() as c:
        before = c.load_deck(EXPECTED_DECK)
        with pytest.raises(ServiceError) as info:  # a silent zero would hide every side-wall violation
            c.load_deck_lef([(NAME, lef.replace("  THICKNESS 0.13 ;\n", "", 1))])
        assert info.value.code is grpc.StatusCode.INVALID_ARGUMENT
        assert info.value.field.startswith(f"{NAME}:") and "THICKNESS" in info.value.message
        with pytest.raises(ServiceError) as info:
            c.load_deck_lef([])
        assert info.value.code is grpc.StatusCode.INVALID_ARGUMENT and info.value.field == "lef.files"
        c._deck = None
        assert c.deck.toml == before.toml


def test_deck_from_lef_survives_a_restart(tmp_path: Path) -> None:
    state = tmp_path / "state"
    server = start_server("--state-dir", str(state), rules=None, metrics=False)
    try:
        with server.client() as c:
            info = c.load_deck_lef([TECH], process_name="lumen-3m")
            c.open_net("held", [GATE, DRIVER])
            c.commit("held", trunk(c.deck))
            figures = str(c.check("held"))
    finally:
        assert server.stop() == 0
    server = start_server("--state-dir", str(state), rules=None, metrics=False)
    try:
        with server.client() as c:
            assert deck_fields(c.deck) == deck_fields(info) and c.deck.toml == info.toml
            assert str(c.check("held")) == figures
    finally:
        assert server.stop() == 0
