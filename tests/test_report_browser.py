"""The report page in a real browser: headless Chromium loads it from a file, and the
DOM it builds must hold the summary and every figure, with no console error.

Chromium comes from Debian's package (.ci/install-chromium.sh installs it). Without
it this test is skipped, saying why; it never passes without having run.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import tempfile
from pathlib import Path

import pytest

import etchguard as eg
from etchguard._design_report import check_records, render_html, summarize

DATA = Path(__file__).resolve().parent.parent / "service" / "etchguard" / "data"
CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")

needs_chromium = pytest.mark.skipif(
    CHROMIUM is None, reason="chromium is not installed (run .ci/install-chromium.sh as root)")

# With --enable-logging=stderr Chromium logs each console message of the page as
# '...:INFO:CONSOLE:1] "text", source: URL (line)', whatever its level (error, warn,
# log), and an uncaught exception as such a line reading "Uncaught ...". The report
# page runs no script, so any console line at all is a fault.
_CONSOLE_LINE = re.compile(r":CONSOLE[:(]|Uncaught")


def load_in_chromium(page: Path) -> tuple[str, str]:
    """(dumped DOM, stderr) of headless Chromium loading ``page``."""
    with tempfile.TemporaryDirectory() as profile:
        done = subprocess.run(
            [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",  # type: ignore[list-item]
             "--no-first-run", "--disable-background-networking", "--disable-component-update",
             "--disable-sync", f"--user-data-dir={profile}", "--enable-logging=stderr", "--v=0",
             "--dump-dom", page.resolve().as_uri()],
            capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]
    return done.stdout, done.stderr


def console_errors(stderr: str) -> list[str]:
    return [line for line in stderr.splitlines() if _CONSOLE_LINE.search(line)]


@needs_chromium
def test_console_error_detection_works(tmp_path: Path) -> None:
    """The detector must see errors when a page does make them: an uncaught
    exception and a console.error call, two lines."""
    bad = tmp_path / "bad.html"
    bad.write_text("<!DOCTYPE html><html><body><p>x</p><script>console.error('boom');</script>"
                   "<script>undefinedFunction();</script></body></html>", encoding="utf-8")
    _dom, stderr = load_in_chromium(bad)
    found = console_errors(stderr)
    assert len(found) == 2 and any("Uncaught" in line for line in found), stderr[-2000:]


@needs_chromium
def test_report_page_loads_with_its_figures(tmp_path: Path) -> None:
    deck = eg.load_deck(DATA / "lumen-6m.toml")
    records = list(check_records(deck, eg.load_net_file(deck, DATA / "lumen-demo-nets.json")))
    page = tmp_path / "report.html"
    page.write_text(render_html(records, deck.name, deck=deck, source="demo"), encoding="utf-8")
    dom, stderr = load_in_chromium(page)

    s = summarize(records, deck.name)
    assert re.search(rf'data-key="nets"[^>]*>{s.nets}<', dom)
    assert re.search(rf'data-key="illegal"[^>]*>{s.illegal}<', dom)
    assert re.search(r'data-key="deck"[^>]*>lumen-6m<', dom)
    layers = {c.layer for r in records for c in r.report.checks}
    # the browser parsed every inline figure into an svg element
    assert len(re.findall(r'<svg class="eg-fig eg-hist"', dom)) == len(layers)
    assert len(re.findall(r'<svg class="eg-fig eg-net"', dom)) == s.illegal
    assert len(re.findall(r"<svg\b", dom)) == len(layers) + s.illegal
    assert 'id="caution"' in dom and "sign-off verification decide" in dom
    assert console_errors(stderr) == [], console_errors(stderr)
