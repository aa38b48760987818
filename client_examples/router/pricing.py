"""How the aware router asks the service, and what every call costs it.

``ServicePricer`` prices one sink search's candidates (maze.Pricer):

* a gate-side wire move is the partial path ``before`` plus the run on layer k being
  extended. The component of the path's end on k is the same for every run from it, so
  the router asks the service once per (partial path, layer) for that component's
  budget with the path as common shapes, and evaluates every run from it locally
  (etchguard.client.LocalBudget: the service's own figures, no call). A run's budget is
  asked a few steps before its first price (``prefetch``); the budgets a wave asks go
  in one Budgets message that is not waited for (the session answers in order while
  the search goes on), and a reply is waited for only when a price needs it. Moves a
  budget
  does not cover (one that would touch another part of the net) go to the service in
  one ScoreBatch.
* complete paths (moves onto the tree) come in lazily gathered rounds (maze.search) and
  go in one ScoreBatch, each distinct partial path sent once as a shared part.

``Meter`` counts requests, candidates per ScoreBatch, seconds in service calls and
seconds spent building requests and reading replies, per run.
"""

from __future__ import annotations

import statistics
import time
from collections import deque
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

import numpy as np
from etchguard.client import LocalBudget, Session, budget_request, candidate_columns, pb, rect

from grid import Rect
from maze import Item


@dataclass
class Meter:
    """Service use of one run: requests by op, candidates per ScoreBatch, seconds."""

    requests: dict[str, int] = field(default_factory=dict)
    batch_sizes: list[int] = field(default_factory=list)
    seconds: float = 0.0  # waiting for replies (round trips and the server's work)
    build_seconds: float = 0.0  # building requests and reading replies in the client
    local: int = 0  # candidates evaluated from budgets, no call
    budgets: int = 0  # budgets asked (several per Budgets message)

    def count(self, op: str, n: int = 1) -> None:
        self.requests[op] = self.requests.get(op, 0) + n

    @property
    def calls(self) -> int:
        return sum(self.requests.values())

    @property
    def batch_p50(self) -> float:
        return statistics.median(self.batch_sizes) if self.batch_sizes else 0.0


class MeteredSession:
    """A Session whose blocking calls are counted and timed (by op)."""

    def __init__(self, session: Session, meter: Meter) -> None:
        self.session = session
        self.meter = meter

    def __getattr__(self, name: str):
        method = getattr(self.session, name)
        if name in ("send", "receive", "close", "send_request"):
            return method

        def timed(*args, **kwargs):
            t0 = time.perf_counter()
            try:
                return method(*args, **kwargs)
            finally:
                self.meter.seconds += time.perf_counter() - t0
                self.meter.count(name)
        return timed


class ServicePricer:
    """Prices one sink search's candidates for the net ``net`` (see the module doc)."""

    def __init__(self, session: MeteredSession, net: str,
                 item_rects: Callable[[Item], list[tuple[str, Rect]]], layer_names: Sequence[str],
                 flush_at: int = 4) -> None:
        self.session = session
        self.meter = session.meter
        self.net = net
        self.item_rects = item_rects
        self.layer_names = layer_names
        self.budgets: dict[tuple[tuple[Item, ...], int], LocalBudget | None] = {}
        self.asked: set[tuple[tuple[Item, ...], int]] = set()
        self.in_flight: deque[list[tuple[tuple[Item, ...], int]]] = deque()  # keys per message
        self.to_ask: dict[tuple[tuple[Item, ...], int], Item] = {}
        self.flush_at = flush_at

    # -- gate-side moves: budgets, evaluated here ---------------------------------------------

    def gate_side(self, asks: Sequence[tuple[tuple[Item, ...], int, Item]]) -> list[tuple[float, float]]:
        self._fetch_budgets({(before, k): run for before, k, run in asks})
        t0 = time.perf_counter()
        out: list[tuple[float, float] | None] = []
        uncovered: list[int] = []
        for i, (before, k, run) in enumerate(asks):
            budget = self.budgets[(before, k)]
            score = budget.evaluate(self.item_rects(run)) if budget is not None else None
            if score is None:
                uncovered.append(i)
                out.append(None)
            else:
                out.append((score.cost, score.worst_change_utilization))
        self.meter.local += len(asks) - len(uncovered)
        self.meter.build_seconds += time.perf_counter() - t0
        if uncovered:
            costs, utils = self._score([(asks[i][0], (asks[i][2],)) for i in uncovered])
            for i, c, u in zip(uncovered, costs, utils):
                out[i] = (float(c), float(u))
        return out  # type: ignore[return-value]

    def prefetch(self, before: tuple[Item, ...], k: int, run: Item) -> None:
        """Note a budget the search will likely need soon; ``flush`` asks for it."""
        key = (before, k)
        if key not in self.asked:
            self.to_ask[key] = run

    def flush(self, at_least: int | None = None) -> None:
        """Ask every noted budget in one Budgets message, without waiting, once at least
        ``at_least`` are noted (default ``flush_at``; measured on blk_r_small, 4 a
        message sent a third fewer messages than 1 at the same time): the reply travels
        while the search goes on (the session answers in order)."""
        if not self.to_ask or len(self.to_ask) < (self.flush_at if at_least is None else at_least):
            return
        t0 = time.perf_counter()
        keys = list(self.to_ask)
        requests = []
        for key in keys:
            before, k = key
            run = self.to_ask[key]
            common = [rect(name, *r) for item in before for name, r in self.item_rects(item)]
            requests.append(budget_request(self.net, self.layer_names[k], run[2], run[3], common))
        self.session.send("budgets", pb.BudgetsRequest(requests=requests))
        self.asked.update(keys)
        self.in_flight.append(keys)
        self.to_ask.clear()
        self.meter.count("budgets")
        self.meter.budgets += len(keys)
        self.meter.build_seconds += time.perf_counter() - t0

    def _receive_one(self) -> None:
        t0 = time.perf_counter()
        reply = self.session.receive()
        t1 = time.perf_counter()
        keys = self.in_flight.popleft()
        if reply.HasField("error"):
            raise RuntimeError(f"budgets refused: {reply.error.message}")
        for key, budget in zip(keys, reply.budgets.budgets):
            self.budgets[key] = LocalBudget(budget) if budget.found else None
        self.meter.seconds += t1 - t0
        self.meter.build_seconds += time.perf_counter() - t1

    def _fetch_budgets(self, wanted: dict[tuple[tuple[Item, ...], int], Item]) -> None:
        """Make sure the wanted budgets are held: ask those not asked yet (with the
        noted ones, one message), then take replies in order until all are in."""
        for key, run in wanted.items():
            if key not in self.asked:
                self.to_ask[key] = run
        if any(key not in self.asked for key in wanted):
            self.flush(at_least=1)
        for key in wanted:
            while key not in self.budgets:
                self._receive_one()

    def drain(self) -> None:
        """Take the replies still travelling (the session must be clear for other calls)."""
        while self.in_flight:
            self._receive_one()

    # -- complete paths and what budgets do not cover: one ScoreBatch -------------------------

    def joins(self, asks: Sequence[tuple[tuple[Item, ...], tuple[Item, ...]]]) -> list[float]:
        return self._score(asks)[0].tolist()

    def _score(self, asks: Sequence[tuple[tuple[Item, ...], tuple[Item, ...]]]) -> tuple[np.ndarray, np.ndarray]:
        t0 = time.perf_counter()
        part_of: dict[tuple[Item, ...], int] = {}
        parts: list[tuple[list[Rect], list[str]]] = []
        rects: list[Rect] = []
        layers: list[str] = []
        counts: list[int] = []
        which: list[int] = []
        for before, extension in asks:
            if before and before not in part_of:
                part_of[before] = len(parts)
                shapes = [x for item in before for x in self.item_rects(item)]
                parts.append(([r for _, r in shapes], [n for n, _ in shapes]))
            which.append(part_of[before] if before else -1)
            n = 0
            for item in extension:
                for name, r in self.item_rects(item):
                    layers.append(name)
                    rects.append(r)
                    n += 1
            counts.append(n)
        columns = candidate_columns(np.array(rects, dtype=np.int64), layers, counts,
                                    common=[(np.array(r, dtype=np.int64), n) for r, n in parts],
                                    common_part=which if parts else None)
        request = pb.ScoreBatchRequest(net=self.net, candidates=columns)
        self.drain()  # replies come in order: budgets asked before come first
        t1 = time.perf_counter()
        reply = self.session.session.ask("score_batch", request)
        t2 = time.perf_counter()
        out = (np.asarray(reply.cost, dtype=np.float64), np.asarray(reply.worst_change_utilization, dtype=np.float64))
        self.meter.count("score_batch")
        self.meter.batch_sizes.append(len(asks))
        self.meter.seconds += t2 - t1
        self.meter.build_seconds += (t1 - t0) + (time.perf_counter() - t2)
        return out
