"""A real ``etchguard serve`` process on a loopback port, for the gRPC tests.

``start_server()`` runs the server through the package's ``launch`` with ``--listen
127.0.0.1:0`` (the kernel picks a free port) and reads the bound address from its JSON
"listening" log line; the metrics endpoint, when wanted, also takes port 0 and the log
line names the port bound. ``stop()``
sends SIGTERM and waits. The ``server`` and ``client`` fixtures are in conftest.py.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from etchguard.client import Client, pin, rect, run
from etchguard.server.launch import Launched, launch
from etchguard.server.supervisor import free_port  # noqa: F401 - for the tests that need one

REPO = Path(__file__).resolve().parents[1]
DEMO_DECK = REPO / "service" / "etchguard" / "data" / "lumen-6m.toml"
START_TIMEOUT_S = 20.0


class ServerProcess(Launched):
    """A test's server: the package's launched process, with a client at hand."""

    def client(self, **kwargs) -> Client:
        return Client(self.address, timeout=kwargs.pop("timeout", 20.0), **kwargs)


def start_server(*extra: str, rules: Path | None = DEMO_DECK, metrics: bool = True,
                 listen: str = "127.0.0.1:0", prefix: Sequence[str] = ()) -> ServerProcess:
    """``prefix``: a command the server runs under (e.g. nsenter into a namespace)."""
    args = ["--listen", listen, *(["--metrics-port", "0"] if metrics else []), "--grace", "5", *extra]
    if rules is not None:
        args += ["--rules", str(rules)]
    return launch(args, prefix=prefix, cwd=REPO, timeout_s=START_TIMEOUT_S, kind=ServerProcess)


_names = iter(range(1_000_000))


def net_name(prefix: str = "n") -> str:
    """A net name unique in this test process (tests share a server)."""
    return f"{prefix}{next(_names)}"


# A small net on the demo deck: a gate pin and a driver pin joined by M1 - V1 - M2.
GATE = pin("u1.a", "M1", [(0, 0, 200, 200)], gate_area={"thin": 0.05}, cell_area={"M1": 0.02})
DRIVER = pin("u0.y", "M1", [(20_000, 0, 20_200, 200)], diff_area=0.3)


def trunk(deck) -> list:
    """M1 from the gate, a via up to M2 (committed shapes of the small net)."""
    from etchguard.client import via

    return [rect("M1", 0, 30, 5000, 170)] + via(deck, "V1", 4900, 100)


def candidate(length: int = 9000) -> list:
    return [run("M2", 4900, 100, 4900, 100 + length)]


def open_small_net(c: Client, name: str | None = None) -> tuple[str, list[int]]:
    name = name or net_name()
    c.open_net(name, [GATE, DRIVER])
    return name, c.commit(name, trunk(c.deck))
