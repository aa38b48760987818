"""Prometheus metrics of the server, on a port of their own.

* ``etchguard_calls_total{method, code}``: calls (and session requests, as
  ``Session/<op>``) by status code name;
* ``etchguard_call_seconds{method}``: server-side latency histogram per method;
* ``etchguard_nets_held``, ``etchguard_shapes_held``, ``etchguard_hot_nets``: gauges read
  from the engine at scrape time;
* ``etchguard_<counter>_total`` for the engine's counters (scores, commits, removals,
  checks, violations_seen: checks that found a net not legal).

Each server has its own registry, so several can live in one process (tests).
With the metrics port set to 0 the server uses ``NullMetrics`` and pays nothing.
"""

from __future__ import annotations

from collections.abc import Callable

from prometheus_client import CollectorRegistry, Counter, Histogram, start_http_server
from prometheus_client.core import CounterMetricFamily, GaugeMetricFamily

# 25 us .. 10 s: a score is tens of microseconds, a check-all can be seconds.
LATENCY_BUCKETS = (25e-6, 50e-6, 100e-6, 250e-6, 500e-6, 1e-3, 2.5e-3, 5e-3, 10e-3, 25e-3,
                   50e-3, 0.1, 0.25, 0.5, 1.0, 2.5, 10.0)
GAUGES = (("nets", "etchguard_nets_held", "nets held"),
          ("shapes", "etchguard_shapes_held", "committed shapes held over all nets"),
          ("hot_nets", "etchguard_hot_nets", "nets whose incremental state is built"))
ENGINE_COUNTERS = ("scores", "commits", "removals", "checks", "violations_seen")


class _EngineCollector:
    """Reads the engine's stats at scrape time (nothing on the call path)."""

    def __init__(self, stats: Callable[[], dict[str, int]]) -> None:
        self._stats = stats

    def collect(self):
        stats = self._stats()
        for key, name, help_text in GAUGES:
            yield GaugeMetricFamily(name, help_text, value=stats.get(key, 0))
        for key in ENGINE_COUNTERS:
            yield CounterMetricFamily(f"etchguard_{key}", f"engine counter: {key}",
                                      value=stats.get(key, 0))


class Metrics:
    def __init__(self, stats: Callable[[], dict[str, int]], methods: list[str]) -> None:
        self.registry = CollectorRegistry()
        self._calls = Counter("etchguard_calls", "calls by method and status code",
                              ["method", "code"], registry=self.registry)
        self._latency = Histogram("etchguard_call_seconds", "server-side call latency",
                                  ["method"], buckets=LATENCY_BUCKETS, registry=self.registry)
        self.registry.register(_EngineCollector(stats))
        # children bound once: a labels() lookup per call would cost more than the count
        self._ok = {m: self._calls.labels(m, "OK") for m in methods}
        self._hist = {m: self._latency.labels(m) for m in methods}
        self._server = None

    def observe(self, method: str, code: str, seconds: float) -> None:
        hist = self._hist.get(method)
        if hist is None:
            hist = self._hist[method] = self._latency.labels(method)
        hist.observe(seconds)
        if code == "OK" and method in self._ok:
            self._ok[method].inc()
        else:
            self._calls.labels(method, code).inc()

    def serve(self, address: str, port: int) -> int:
        """Start the HTTP endpoint; returns the bound port."""
        server, _thread = start_http_server(port, address, registry=self.registry)
        self._server = server
        return server.server_address[1]

    def close(self) -> None:
        if self._server is not None:
            self._server.shutdown()
            self._server.server_close()
            self._server = None


class NullMetrics:
    """Metrics switched off: the same face, doing nothing."""

    registry = None

    def observe(self, method: str, code: str, seconds: float) -> None:
        pass

    def serve(self, address: str, port: int) -> int:
        return 0

    def close(self) -> None:
        pass
