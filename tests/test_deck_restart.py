"""A restart with another rule deck does not silently re-judge the nets held.

Real ``etchguard serve`` processes with ``--state-dir``: a state written under the
demo deck lumen-6m, then a start with ``--rules`` lumen-5m (other cut sizes, fewer
layers) is refused unless ``--rejudge-held-nets`` is given, and then the log says
which deck replaced which and how many nets were re-judged.
"""

from __future__ import annotations

import subprocess
import sys

from grpc_fixtures import DEMO_DECK, DRIVER, GATE, REPO, start_server, trunk

OTHER_DECK = REPO / "service" / "etchguard" / "data" / "lumen-5m.toml"


def _held_state(state) -> str:
    """A server on the demo deck holding one net; returns its report's text form."""
    server = start_server("--state-dir", str(state), metrics=False)
    try:
        with server.client() as c:
            c.open_net("kept", [GATE, DRIVER])
            c.commit("kept", trunk(c.deck)[:1])
            return str(c.check("kept"))
    finally:
        assert server.stop() == 0


def test_another_deck_at_restart_is_refused_and_changes_nothing(tmp_path):
    state = tmp_path / "state"
    figures = _held_state(state)
    proc = subprocess.run([sys.executable, "-m", "etchguard.cli", "serve", "--listen", "127.0.0.1:0",
                           "--state-dir", str(state), "--rules", str(OTHER_DECK)],
                          capture_output=True, text=True, timeout=60, cwd=REPO)
    assert proc.returncode == 2, proc.stderr
    err = proc.stderr
    assert "lumen-6m" in err and "lumen-5m" in err and str(OTHER_DECK) in err
    assert "1 net" in err and "--rejudge-held-nets" in err and "Traceback" not in err
    server = start_server("--state-dir", str(state), metrics=False)  # the held deck again
    try:
        with server.client() as c:
            assert c.stats().deck == "lumen-6m"
            assert str(c.check("kept")) == figures
    finally:
        assert server.stop() == 0


def test_rejudge_held_nets_loads_the_new_deck_and_says_so(tmp_path):
    state = tmp_path / "state"
    _held_state(state)
    server = start_server("--state-dir", str(state), "--rejudge-held-nets", rules=OTHER_DECK,
                          metrics=False)
    try:
        swap = [e for e in server.logs if e.get("msg") == "held nets re-judged under another deck"]
        assert len(swap) == 1 and swap[0]["level"] == "warning"
        assert swap[0]["from_deck"] == "lumen-6m" and swap[0]["to_deck"] == "lumen-5m"
        assert swap[0]["nets"] == 1 and swap[0]["rules_file"] == str(OTHER_DECK)
        with server.client() as c:
            assert c.stats().deck == "lumen-5m"
            assert c.check("kept").net == "kept"
    finally:
        assert server.stop() == 0
    server = start_server("--state-dir", str(state), rules=OTHER_DECK, metrics=False)
    try:  # the new deck is the held one now: no option needed, nothing re-judged
        assert not [e for e in server.logs if "re-judged" in e.get("msg", "")]
    finally:
        assert server.stop() == 0


def test_the_same_deck_no_deck_or_the_same_rules_reworded_need_no_option(tmp_path):
    state = tmp_path / "state"
    _held_state(state)
    commented = tmp_path / "lumen-6m-commented.toml"
    commented.write_text("# the same rules, one comment more\n" + DEMO_DECK.read_text(encoding="utf-8"),
                         encoding="utf-8")
    for rules in (DEMO_DECK, None, commented):
        server = start_server("--state-dir", str(state), rules=rules, metrics=False)
        try:
            with server.client() as c:
                assert c.stats().deck == "lumen-6m" and c.stats().nets == 1
        finally:
            assert server.stop() == 0
