"""``etchguard serve --shards N``: N shard processes on one host under one supervisor.

The supervisor plans the shards (``plan``), writes the topology file every client
reads, starts each shard as ``etchguard serve --topology FILE --shard-index K`` with
the supervisor's own options, and watches them:

* **Addresses.** ``--listen HOST:PORT`` gives shard k ``HOST:PORT+k`` (port 0: a free
  port per shard, found when the supervisor starts, below the ephemeral range: see
  ``free_port``); ``unix:PATH`` gives ``PATH``
  with ``{shard}`` replaced by k, or ``PATH-k`` when it has none.
* **State.** ``--state-dir DIR`` gives shard k its own journal and snapshots in
  ``DIR/shard-k``; a shard that dies (a crash, kill -9) is started again on the same
  folder and comes back with every change it had acknowledged. Restarts back off
  from ``FIRST_BACKOFF_S`` doubling to ``MAX_BACKOFF_S``, and reset once a shard has
  stayed up ``STEADY_S``. Without a state folder a restarted shard comes back empty
  (said in a warning at start).
* **Logs.** Every shard's JSON log lines pass through on the supervisor's stderr with
  ``"shard": k`` added; the supervisor says ``shards listening`` (addresses,
  topology, metrics port) once every shard listens.
* **Metrics.** With ``--metrics-port P`` each shard serves its metrics on a private
  loopback port and the supervisor serves them all on P, every sample labelled
  ``shard="k"``, with ``etchguard_shard_up{shard}`` (1 while the shard's metrics
  answer) and ``etchguard_shard_restarts_total{shard}``. Health stays per shard: the
  standard gRPC health service on each shard's own address.
* **Stop.** SIGTERM or SIGINT is passed on to every shard, which stops gracefully
  (a final snapshot); the supervisor waits for them and exits 0.
"""

from __future__ import annotations

import json
import logging
import os
import random
import signal
import socket
import subprocess
import sys
import threading
import time
import urllib.request
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from prometheus_client import CollectorRegistry, start_http_server
from prometheus_client.core import CounterMetricFamily, GaugeMetricFamily, Metric
from prometheus_client.parser import text_string_to_metric_families

from .._shards import Topology
from .app import ServeError, ServerConfig

log = logging.getLogger("etchguard.server")

FIRST_BACKOFF_S = 0.2
MAX_BACKOFF_S = 5.0
STEADY_S = 30.0
START_TIMEOUT_S = 60.0
SCRAPE_TIMEOUT_S = 2.0


@dataclass
class ShardPlan:
    index: int
    listen: str
    state_dir: Path | None
    metrics_port: int | None  # the shard's private metrics port; None = off


@dataclass
class Plan:
    shards: list[ShardPlan]
    topology: Topology
    topology_path: Path


def free_port(host: str = "127.0.0.1") -> int:
    """A port free on ``host`` now, for a process that must be told its port before it
    starts (a shard: every shard reads the farm's topology, all addresses, at start).

    Taken at random below the kernel's ephemeral range when it can be: port 0 binds and
    outgoing connections draw from that range, so a port found free there can be taken
    by anyone before the shard binds it; below it only a process asking for that very
    port can. Else (no free port there) one the kernel picks."""
    low = _ephemeral_low()
    family = socket.AF_INET6 if ":" in host else socket.AF_INET
    for port in random.sample(range(max(1024, low - 12000), low), min(200, max(0, low - 1024))):
        with socket.socket(family, socket.SOCK_STREAM) as s:
            try:
                s.bind((host, port))
            except OSError:
                continue
            return port
    with socket.socket(family, socket.SOCK_STREAM) as s:
        s.bind((host, 0))
        return s.getsockname()[1]


def _ephemeral_low() -> int:
    try:
        return int(Path("/proc/sys/net/ipv4/ip_local_port_range").read_text().split()[0])
    except (OSError, ValueError, IndexError):
        return 32768  # Linux's default


def shard_address(listen: str, k: int) -> str:
    if listen.startswith("unix:"):
        path = listen.removeprefix("unix:")
        return "unix:" + (path.replace("{shard}", str(k)) if "{shard}" in path else f"{path}-{k}")
    host, sep, port = listen.rpartition(":")
    if not sep or not port.isdigit():
        raise ServeError(f"{listen!r} is not HOST:PORT or unix:PATH", "listen")
    if int(port) == 0:
        return f"{host}:{free_port(host.strip('[]') or '127.0.0.1')}"
    if int(port) + k > 65535:
        raise ServeError(f"shard {k} would need port {int(port) + k}", "listen")
    return f"{host}:{int(port) + k}"


def plan(config: ServerConfig, shards: int, topology_out: Path | None) -> Plan:
    if not 1 <= shards <= 1024:
        raise ServeError(f"must be 1 to 1024 on one host, got {shards}", "shards")
    if config.topology is not None or config.shard_index is not None:
        raise ServeError("--shards writes its own topology; --topology/--shard-index serve one shard",
                         "shards")
    if len(config.listen) != 1:
        raise ServeError("--shards takes one --listen pattern", "listen")
    addresses = [shard_address(config.listen[0], k) for k in range(shards)]
    if len(set(addresses)) != shards:
        raise ServeError(f"{config.listen[0]!r} gives two shards the same address", "listen")
    path = topology_out or (config.state_dir / "topology" if config.state_dir else Path("etchguard.topology"))
    return Plan([ShardPlan(k, addresses[k], config.state_dir / f"shard-{k}" if config.state_dir else None,
                           free_port() if config.metrics_port is not None else None) for k in range(shards)],
                Topology(tuple(addresses)), path)


def shard_command(config: ServerConfig, shard: ShardPlan, topology_path: Path) -> list[str]:
    """The ``etchguard serve`` command line of one shard: the supervisor's options."""
    from .cli import options_of  # cli starts the supervisor: imported when it runs

    return [sys.executable, "-m", "etchguard.cli", "serve", *options_of(
        config, listen=[shard.listen], topology=topology_path, shard_index=shard.index,
        metrics_port=shard.metrics_port, metrics_address="127.0.0.1", metrics_beyond_loopback=False,
        state_dir=shard.state_dir, address_file=None)]


@dataclass
class _Child:
    plan: ShardPlan
    command: list[str]
    proc: subprocess.Popen | None = None
    restarts: int = 0
    started: float = 0.0
    backoff: float = FIRST_BACKOFF_S
    listening: threading.Event = field(default_factory=threading.Event)


class Supervisor:
    def __init__(self, config: ServerConfig, the_plan: Plan) -> None:
        self.config = config
        self.plan = the_plan
        self.children = [_Child(p, shard_command(config, p, the_plan.topology_path)) for p in the_plan.shards]
        self._stopping = threading.Event()
        self._out_lock = threading.Lock()
        self.metrics_port = 0
        self._metrics_server: Any = None  # prometheus_client's WSGI server once serving

    # -- children -----------------------------------------------------------------------

    def _spawn(self, child: _Child) -> None:
        child.listening.clear()
        env = dict(os.environ, PYTHONUNBUFFERED="1")
        child.proc = subprocess.Popen(child.command, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                                      stderr=subprocess.PIPE, text=True, env=env)
        child.started = time.monotonic()
        threading.Thread(target=self._relay, args=(child, child.proc), daemon=True,
                         name=f"etchguard-shard-{child.plan.index}-log").start()

    def _relay(self, child: _Child, proc: subprocess.Popen) -> None:
        """Pass a shard's log lines on, labelled with its index."""
        assert proc.stderr is not None
        for line in proc.stderr:
            try:
                entry = json.loads(line)
            except json.JSONDecodeError:
                entry = {"msg": line.rstrip("\n"), "level": "raw"}
            if isinstance(entry, dict):
                entry["shard"] = child.plan.index
                if entry.get("msg") == "listening":
                    child.listening.set()
            with self._out_lock:
                sys.stderr.write(json.dumps(entry, default=str) + "\n")
                sys.stderr.flush()

    def _watch(self) -> None:
        while not self._stopping.wait(0.1):
            for child in self.children:
                proc = child.proc
                if proc is None or proc.poll() is None or self._stopping.is_set():
                    continue
                if time.monotonic() - child.started > STEADY_S:
                    child.backoff = FIRST_BACKOFF_S
                log.warning("shard exited; restarting it", extra={"fields": {
                    "shard": child.plan.index, "returncode": proc.returncode,
                    "backoff_s": child.backoff, "state_dir": str(child.plan.state_dir)}})
                if self._stopping.wait(child.backoff):
                    return
                child.backoff = min(child.backoff * 2, MAX_BACKOFF_S)
                child.restarts += 1
                self._spawn(child)

    # -- metrics --------------------------------------------------------------------------

    def collect(self):
        """Every shard's metrics with a ``shard`` label, and the supervisor's own."""
        merged: dict[str, Metric] = {}
        up = GaugeMetricFamily("etchguard_shard_up", "1 while the shard's metrics answer", labels=["shard"])
        restarts = CounterMetricFamily("etchguard_shard_restarts", "times the supervisor restarted the shard",
                                       labels=["shard"])
        for child in self.children:
            k = str(child.plan.index)
            restarts.add_metric([k], child.restarts)
            try:
                with urllib.request.urlopen(f"http://127.0.0.1:{child.plan.metrics_port}/metrics",
                                            timeout=SCRAPE_TIMEOUT_S) as reply:
                    text = reply.read().decode("utf-8")
            except OSError:
                up.add_metric([k], 0)
                continue
            up.add_metric([k], 1)
            for family in text_string_to_metric_families(text):
                out = merged.get(family.name)
                if out is None:
                    out = merged[family.name] = Metric(family.name, family.documentation, family.type)
                for sample in family.samples:
                    out.add_sample(sample.name, {**sample.labels, "shard": k}, sample.value)
        yield up
        yield restarts
        yield from merged.values()

    def _serve_metrics(self) -> None:
        if self.config.metrics_port is None:
            return
        registry = CollectorRegistry()
        registry.register(self)
        self._metrics_server, _ = start_http_server(self.config.metrics_port, self.config.metrics_address,
                                                    registry=registry)
        self.metrics_port = self._metrics_server.server_address[1]

    # -- life ---------------------------------------------------------------------------------

    def run(self) -> int:
        requested = threading.Event()

        def on_signal(signum, _frame):
            requested.set()

        previous = {s: signal.signal(s, on_signal) for s in (signal.SIGTERM, signal.SIGINT)}
        try:
            self.plan.topology_path.parent.mkdir(parents=True, exist_ok=True)
            self.plan.topology.write(self.plan.topology_path)
            for child in self.children:
                self._spawn(child)
            deadline = time.monotonic() + START_TIMEOUT_S
            for child in self.children:
                if not child.listening.wait(max(0.0, deadline - time.monotonic())):
                    raise ServeError(f"shard {child.plan.index} did not start listening", "shards")
            self._serve_metrics()
            threading.Thread(target=self._watch, daemon=True, name="etchguard-supervisor").start()
            log.info("shards listening", extra={"fields": {
                "addresses": list(self.plan.topology.addresses), "topology": str(self.plan.topology_path),
                "fingerprint": f"{self.plan.topology.fingerprint:016x}", "metrics_port": self.metrics_port,
                "pids": [c.proc.pid for c in self.children if c.proc is not None], "pid": os.getpid()}})
            while not requested.wait(0.5):
                pass
            return 0
        finally:
            self.stop()
            for s, handler in previous.items():
                signal.signal(s, handler)

    def stop(self) -> None:
        self._stopping.set()
        for child in self.children:
            if child.proc is not None and child.proc.poll() is None:
                child.proc.send_signal(signal.SIGTERM)
        for child in self.children:
            if child.proc is None:
                continue
            try:
                child.proc.wait(self.config.grace_s + 10)
            except subprocess.TimeoutExpired:
                child.proc.kill()
                child.proc.wait()
        if self._metrics_server is not None:
            self._metrics_server.shutdown()
            self._metrics_server.server_close()
        log.info("shards stopped")


def supervise(config: ServerConfig, shards: int, topology_out: Path | None) -> int:
    the_plan = plan(config, shards, topology_out)
    if config.state_dir is None:
        log.warning("no --state-dir: a shard that is restarted comes back empty")
    return Supervisor(replace(config), the_plan).run()
