"""The server's life on a farm: graceful stop on SIGTERM/SIGINT with calls in flight
finishing, unix sockets, a port that is taken, JSON logs."""

from __future__ import annotations

import signal
import threading
import time
import urllib.request

import grpc
import numpy as np
import pytest
from etchguard.client import Client, ServiceError, runs_to_rects
from grpc_fixtures import candidate, open_small_net, start_server


def _wait_for(predicate, timeout: float = 10.0) -> bool:
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if predicate():
            return True
        time.sleep(0.02)
    return False


def test_sigterm_lets_calls_in_flight_finish():
    # the detailed batch below may reply more than the default 16 MiB
    srv = start_server("--max-message-bytes", str(64 << 20), metrics=False)
    with srv.client() as c:
        name, _ = open_small_net(c)
        with c.session() as s:
            assert s.score(name, candidate()).changes  # the stream is in flight
            # a unary call in flight too: a batch (with details: the slow path) sized to
            # take about 1.5 s here
            def rects(n: int):
                return runs_to_rects(4900, 100, 4900, 100 + np.arange(3000, 3000 + n), 140)

            t0 = time.perf_counter()
            c.score_batch(name, rects(500), "M2", details=True)
            count = min(40_000, int(500 * 1.5 / (time.perf_counter() - t0)))
            batch: dict = {}
            worker = threading.Thread(target=lambda: batch.update(
                r=c.score_batch(name, rects(count), "M2", details=True)))
            worker.start()
            time.sleep(0.3)
            assert worker.is_alive()
            srv.signal(signal.SIGTERM)
            assert _wait_for(lambda: "stopping" in srv.messages())
            with Client(srv.address, timeout=5) as late:  # new calls are refused now
                with pytest.raises(ServiceError) as err:
                    late.stats()
                assert err.value.code == grpc.StatusCode.UNAVAILABLE
            for _ in range(5):  # the open stream keeps being answered during the grace
                assert s.score(name, candidate()).changes
            worker.join(30)
            assert len(batch["r"]) == count
            assert srv.proc.poll() is None  # still waiting for the stream
        assert srv.proc.wait(10) == 0
    messages = srv.messages()
    assert messages.index("signal received") < messages.index("stopping") < messages.index("stopped")
    assert all(e.get("level") != "raw" for e in srv.logs), "every log line is JSON"


def test_sigint_stops_and_unix_socket(tmp_path):
    path = tmp_path / "eg.sock"
    srv = start_server(metrics=False, listen=f"unix:{path}")
    assert srv.address == f"unix:{path}" and path.is_socket()
    with srv.client() as c:
        assert c.health() == "SERVING" and c.deck.name == "lumen-6m"
    srv.signal(signal.SIGINT)
    assert srv.proc.wait(10) == 0
    assert not path.exists()


def test_taken_port_is_an_error():
    first = start_server(metrics=False)
    try:
        with pytest.raises(RuntimeError, match="cannot listen"):
            start_server(metrics=False, listen=first.address)
    finally:
        assert first.stop() == 0


def test_listening_log_line_is_structured():
    srv = start_server("--max-nets", "7", "--workers", "3")
    try:
        line = next(e for e in srv.logs if e.get("msg") == "listening")
        assert line["level"] == "info" and line["logger"] == "etchguard.server" and "ts" in line
        assert line["deck"] == "lumen-6m" and line["workers"] == 3
        assert line["limits"]["max_nets"] == 7 and line["metrics_port"] == srv.metrics_port > 0
    finally:
        srv.stop()


def test_metrics_port_zero_takes_a_free_port_and_no_option_means_off():
    """``--metrics-port 0`` binds a port the kernel picks, as ``--listen``'s port 0 does,
    and the ready line names it (so a caller need not find a free port and race for it);
    without the option there is no endpoint."""
    with_metrics, without = start_server(), start_server(metrics=False)
    try:
        port = with_metrics.metrics_port
        assert port > 0
        text = urllib.request.urlopen(f"http://127.0.0.1:{port}/metrics", timeout=10).read().decode()
        assert "etchguard_calls_total" in text or "etchguard_nets_held" in text
        line = next(e for e in without.logs if e.get("msg") == "listening")
        assert line["metrics_port"] == 0 and without.metrics_port == 0
    finally:
        with_metrics.stop()
        without.stop()


def test_address_file_names_the_bound_port(tmp_path):
    """``--listen 127.0.0.1:0 --address-file F``: the server writes the address it bound
    (the kernel's pick), so a script starting it needs no port chosen beforehand (a port
    found free and released can be taken by another process before the server binds)."""
    where = tmp_path / "address"
    srv = start_server("--address-file", str(where), metrics=False)
    try:
        written = where.read_text(encoding="utf-8").splitlines()
        assert written == [srv.address] and not srv.address.endswith(":0")
        with Client(written[0], timeout=20.0) as c:
            assert c.health() == "SERVING"
    finally:
        srv.stop()


def test_settings_and_options_map_one_to_one(tmp_path):
    """Every server setting is an option stored under the setting's own name, and a
    config written back as options (what the supervisor hands each shard) reads back
    equal: no setting is copied by hand, so none is dropped on the way to a shard."""
    import argparse
    from dataclasses import fields

    from etchguard.server.app import ServerConfig
    from etchguard.server.cli import add_arguments, config_from_args, options_of

    parser = argparse.ArgumentParser()
    add_arguments(parser)
    assert {f.name for f in fields(ServerConfig)} <= set(vars(parser.parse_args([])))
    config = ServerConfig(listen=["127.0.0.1:0"], rules=tmp_path / "deck.toml", max_advice_scores=77, max_jobs=5,
                          max_sessions=9, session_idle_s=12.5, keep_journal_before_damage=True,
                          address_file=tmp_path / "address", cost_knee=0.5)
    assert config_from_args(parser.parse_args(options_of(config))) == config
