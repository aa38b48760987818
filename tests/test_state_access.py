"""Access to what the server keeps and shows: state files private, metrics on
loopback unless the operator says otherwise, a warning for a token file others can
read."""

from __future__ import annotations

import os
import stat
import struct
import subprocess
import sys

import pytest

from etchguard.server import ServeError, ServerConfig, build_server
from etchguard.server.security import check_metrics
from grpc_fixtures import DEMO_DECK, DRIVER, GATE, REPO, start_server, trunk


def _mode(path) -> int:
    return stat.S_IMODE(os.stat(path).st_mode)


def test_state_files_are_0600_and_the_folder_0700(tmp_path):
    state = tmp_path / "state"
    old_umask = os.umask(0o022)  # the usual umask: files would be 0644 unless asked
    try:
        server = start_server("--state-dir", str(state), "--snapshot-every", "3", metrics=False)
        try:
            with server.client() as c:
                c.open_net("n", [GATE, DRIVER])
                for shape in trunk(c.deck):
                    c.commit("n", [shape])
        finally:
            assert server.stop() == 0
    finally:
        os.umask(old_umask)
    assert _mode(state) == 0o700
    files = sorted(p for p in state.iterdir() if p.is_file())
    folders = sorted(p for p in state.iterdir() if p.is_dir())  # e.g. the named jobs' folder
    assert {p.name for p in files} >= {"LOCK", "snapshot.pb"} and any(p.suffix == ".log" for p in files)
    assert {p.name: _mode(p) for p in files} == {p.name: 0o600 for p in files}
    assert {p.name: _mode(p) for p in folders} == {p.name: 0o700 for p in folders}


def test_a_damaged_segment_set_aside_is_0600_too(tmp_path):
    from etchguard._journal import iter_records, segments

    state = tmp_path / "state"
    server = start_server("--state-dir", str(state), "--snapshot-every", "0", metrics=False)
    try:
        with server.client() as c:
            c.open_net("n", [GATE, DRIVER])
            for shape in trunk(c.deck):
                c.commit("n", [shape])
        server.proc.kill()  # no final snapshot: the records stay in the journal
        server.proc.wait()
    finally:
        server.stop()
    seg = segments(state)[-1][1]
    offsets = [off for _, off, _ in iter_records(state)]
    data = bytearray(seg.read_bytes())
    struct.pack_into("<I", data, offsets[2], 1 << 30)
    seg.write_bytes(bytes(data))
    server = start_server("--state-dir", str(state), "--keep-journal-before-damage", metrics=False)
    server.stop()
    aside = [p for p in state.iterdir() if p.name.endswith(".damaged")]
    assert aside and all(_mode(p) == 0o600 for p in aside)


def test_metrics_beyond_loopback_need_the_operators_word():
    config = ServerConfig(listen=["127.0.0.1:0"], metrics_port=9, metrics_address="0.0.0.0")
    with pytest.raises(ServeError) as info:
        build_server(config)
    assert info.value.field == "metrics_address" and "--metrics-beyond-loopback" in str(info.value)
    config.metrics_beyond_loopback = True
    check_metrics(config)  # accepted (not bound here: the tests stay on loopback)
    for address in ("127.0.0.1", "::1", "localhost"):
        check_metrics(ServerConfig(metrics_port=9, metrics_address=address))
    proc = subprocess.run([sys.executable, "-m", "etchguard.cli", "serve", "--listen", "127.0.0.1:0",
                           "--metrics-port", "9", "--metrics-address", "192.0.2.1",
                           "--rules", str(DEMO_DECK)], capture_output=True, text=True, timeout=30,
                          cwd=REPO)
    assert proc.returncode == 2 and "--metrics-beyond-loopback" in proc.stderr


@pytest.mark.parametrize("mode,warned", [(0o644, True), (0o640, True), (0o600, False), (0o400, False)])
def test_a_token_file_others_can_read_is_warned_about(tmp_path, mode, warned):
    token = tmp_path / "token"
    token.write_text("lumen-farm-token-51c2\n")
    token.chmod(mode)
    server = start_server("--token-file", str(token), metrics=False)
    server.stop()
    lines = [e for e in server.logs if e.get("msg") == "token file readable by others"]
    assert bool(lines) == warned
    if warned:
        assert lines[0]["file"] == str(token) and lines[0]["mode"] == oct(mode)
        assert "lumen-farm-token-51c2" not in str(server.logs)
