"""Start ``etchguard serve`` as a child process and wait until it says it listens.

The server announces itself on its JSON log (stderr): a ``"listening"`` line with the
addresses as bound (a port 0 resolved by the kernel) and the metrics port. Reading the
address from that line, rather than choosing a free port beforehand and hoping it is
still free, leaves no race with other processes. The tests, the router demo and the
benches start their servers through ``launch``; a shell script uses ``--address-file``.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, TypeVar


@dataclass
class Launched:
    """A running ``etchguard serve``: its process, its ready line and every log line."""

    proc: subprocess.Popen
    ready_message: str = "listening"  # a supervised farm says "shards listening"
    ready: dict[str, Any] = field(default_factory=dict)  # the ready line, {} until then
    logs: list[dict[str, Any]] = field(default_factory=list)
    _event: threading.Event = field(default_factory=threading.Event)

    @property
    def address(self) -> str:
        return self.ready["addresses"][0] if self.ready.get("addresses") else ""

    @property
    def metrics_port(self) -> int:
        return int(self.ready.get("metrics_port", 0))

    def _read(self) -> None:  # keeps draining, so the server never blocks on a full pipe
        assert self.proc.stderr is not None
        for line in self.proc.stderr:
            try:
                entry = json.loads(line)
            except json.JSONDecodeError:
                entry = {"msg": line.rstrip("\n"), "level": "raw"}
            if not isinstance(entry, dict):
                entry = {"msg": str(entry), "level": "raw"}
            self._seen(entry)
        self._event.set()  # the process ended: stop waiting

    def _seen(self, entry: dict[str, Any]) -> None:
        """One log line read (a subclass may watch for more)."""
        self.logs.append(entry)
        if entry.get("msg") == self.ready_message and not self.ready:
            self.ready = entry
            self._event.set()

    def signal(self, signum: int = signal.SIGTERM) -> None:
        self.proc.send_signal(signum)

    def stop(self, timeout: float = 15.0) -> int:
        """SIGTERM, then wait; killed (and TimeoutExpired raised) when it does not end."""
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGTERM)
        try:
            return self.proc.wait(timeout)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
            raise

    def messages(self) -> list[str]:
        return [str(e.get("msg", "")) for e in self.logs]


L = TypeVar("L", bound=Launched)


def launch(args: Sequence[str], *, prefix: Sequence[str] = (), cwd: Path | None = None,
           timeout_s: float = 30.0, python: str = sys.executable,
           ready_message: str = "listening", kind: type[L] = Launched) -> L:  # type: ignore[assignment]  # L is Launched then
    """Run ``etchguard serve ARGS`` (under ``prefix``, e.g. a namespace) and return once
    its ready line is read, as a ``kind`` (``Launched`` or a subclass); RuntimeError
    with the log when it ends or stays silent."""
    cmd = [*prefix, python, "-m", "etchguard.cli", "serve", *args]
    proc = subprocess.Popen(cmd, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                            stderr=subprocess.PIPE, text=True, cwd=cwd,
                            env=dict(os.environ, PYTHONUNBUFFERED="1"))
    server = kind(proc, ready_message)
    threading.Thread(target=server._read, daemon=True).start()
    if not server._event.wait(timeout_s) or not server.ready:
        if proc.poll() is None:
            proc.kill()
        proc.wait()
        raise RuntimeError(f"etchguard serve {' '.join(args)} did not start: {server.logs}")
    return server
