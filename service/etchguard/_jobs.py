"""Jobs: each named job holds its own deck and nets, so one client's work cannot
touch another's verdicts.

A job is named by its caller (the gRPC adapter reads the name from call metadata).
Every job is an ``Engine`` of its own: its nets, its deck, its obstacle index, its
counters and its change log. Ownership is so by construction: a net lives only in the
engine of the job that opened it, and another job asking for the same name gets
``NotFoundError`` exactly as for a name nobody opened; one job's LoadDeck replaces
that job's deck only.

The unnamed job (``DEFAULT_JOB``) is the server as it was before jobs: calls that name
no job all share it, so a single-tenant server and its clients work unchanged. It is
a job like the others: named jobs do not see its nets, nor it theirs.

A job is made by its first call that changes something (OpenNet, LoadDeck) and starts
with the server's start-up deck, when one was given. Calls that only read, for a job
not made yet, are answered by an engine that holds nothing and refuses every change
(its change log refuses), so a mistyped job name creates nothing.
"""

from __future__ import annotations

import re
import threading
from collections.abc import Callable

from ._changelog import Change, ChangeLogError
from ._engine import Engine
from ._errors import InputError, LimitExceededError

DEFAULT_JOB = ""
# Job names become folder names of the state folder: letters, digits, '.', '_', '-',
# not starting with '.', at most 64 bytes.
JOB_NAME = re.compile(r"[A-Za-z0-9_-][A-Za-z0-9._-]{0,63}")
JOB_FIELD = "etchguard-job"  # the metadata key that names a call's job (see server/)


def check_job_name(job: str) -> str:
    if job != DEFAULT_JOB and not JOB_NAME.fullmatch(job):
        shown = job if len(job) <= 80 else job[:80] + "..."
        raise InputError(f"a job name is 1 to 64 of letters, digits, '.', '_', '-' and does not "
                         f"start with '.'; got {shown!r}", JOB_FIELD)
    return job


class _RefuseChanges:
    """The change log of the engine that answers reads for jobs not made yet: any change
    is refused before it is applied, so that engine stays empty."""

    def record(self, change: Change) -> None:
        raise ChangeLogError("a change reached the engine of a job not made yet", "job")


class Jobs:
    """Every job's engine; ``open_job(name)`` makes (or recovers) a named job's engine."""

    def __init__(self, default: Engine, open_job: Callable[[str], Engine], max_jobs: int,
                 empty: Engine) -> None:
        self.default = default
        self.max_jobs = max_jobs
        self._open_job = open_job
        self._lock = threading.Lock()  # held to find or make a job (not while it works)
        self._jobs: dict[str, Engine] = {}
        empty.changelog = _RefuseChanges()
        self._empty = empty

    @classmethod
    def single(cls, engine: Engine) -> Jobs:
        """Only the unnamed job: ``engine`` (a named job is refused as over the limit)."""
        def no_jobs(job: str) -> Engine:
            raise LimitExceededError("this server holds only the unnamed job", JOB_FIELD)
        return cls(engine, no_jobs, 0, Engine(None, engine.limits, engine.costs))

    def adopt(self, job: str, engine: Engine) -> None:
        """Take a job's engine recovered at start (its state folder keeps the owner)."""
        with self._lock:
            self._jobs[check_job_name(job)] = engine

    def find(self, job: str) -> Engine:
        """The job's engine for a call that reads: an empty, change-refusing one for a
        job not made yet."""
        if check_job_name(job) == DEFAULT_JOB:
            return self.default
        with self._lock:
            return self._jobs.get(job, self._empty)

    def open(self, job: str) -> Engine:
        """The job's engine for a call that may change it, made on first use."""
        if check_job_name(job) == DEFAULT_JOB:
            return self.default
        with self._lock:
            engine = self._jobs.get(job)
            if engine is None:
                if len(self._jobs) >= self.max_jobs:
                    raise LimitExceededError(f"{self.max_jobs} jobs are held already", JOB_FIELD)
                engine = self._jobs[job] = self._open_job(job)
            return engine

    def names(self) -> list[str]:
        with self._lock:
            return list(self._jobs)

    def engines(self) -> list[Engine]:
        """The default job's engine first, then every named job's."""
        with self._lock:
            return [self.default, *self._jobs.values()]

    def stats(self) -> dict[str, int]:
        """Every job's figures summed (the metrics endpoint's view of the server)."""
        total: dict[str, int] = {}
        for engine in self.engines():
            for key, value in engine.stats().items():
                total[key] = total.get(key, 0) + value
        total["jobs"] = len(self.names())
        return total
