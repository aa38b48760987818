"""Fixtures several test modules use: pytest hands them to any test that names them, so
no module imports another's fixtures.

* ``server`` / ``client``: a real ``etchguard serve`` on the demo deck (one per module)
  and a client of it (grpc_fixtures.py starts servers);
* ``example_binary``: the C++ client example (client_examples/cpp) built once per module
  into build/cpp-example, kept between runs.
"""

from __future__ import annotations

import fcntl
import os
import shutil
import subprocess
from pathlib import Path

import pytest
from grpc_fixtures import start_server
from native_build import CPP_BUILD, CPP_BUILD_TIMEOUT_S, CPP_EXAMPLE, CPP_SOURCE


@pytest.fixture(scope="module")
def server():
    """A server on the demo deck with metrics on, shared by a test module."""
    s = start_server()
    yield s
    s.stop()


@pytest.fixture
def client(server):
    with server.client() as c:
        yield c


def _missing_prerequisites() -> list[str]:
    missing = [tool for tool in ("cmake", "protoc", "grpc_cpp_plugin") if shutil.which(tool) is None]
    if shutil.which("c++") is None and shutil.which("g++") is None:
        missing.append("a C++ compiler (g++)")
    if not any(Path(p, "grpcpp", "grpcpp.h").exists() for p in ("/usr/include", "/usr/local/include")):
        missing.append("gRPC C++ headers (libgrpc++-dev)")
    return missing


@pytest.fixture(scope="module")
def example_binary() -> Path:
    missing = _missing_prerequisites()
    if missing:
        why = (f"the C++ example cannot be built: missing {', '.join(missing)}; "
               "run `bash .ci/install-cpp-deps.sh` as root")
        if os.environ.get("ETCHGUARD_SKIP_CPP") == "1":
            pytest.skip(f"ETCHGUARD_SKIP_CPP=1: {why}")
        pytest.fail(f"{why}, or set ETCHGUARD_SKIP_CPP=1 to skip this test", pytrace=False)
    CPP_BUILD.mkdir(parents=True, exist_ok=True)
    # One build at a time in the shared tree (a parallel `make cpp-example`, say).
    with open(CPP_BUILD.parent / ".cpp-example.lock", "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        for cmd in (["cmake", "-S", str(CPP_SOURCE), "-B", str(CPP_BUILD)],
                    ["cmake", "--build", str(CPP_BUILD), "-j", str(os.cpu_count() or 2)]):
            done = subprocess.run(cmd, capture_output=True, text=True, timeout=CPP_BUILD_TIMEOUT_S)
            assert done.returncode == 0, f"{' '.join(cmd)} failed:\n{done.stdout[-4000:]}\n{done.stderr[-4000:]}"
    assert CPP_EXAMPLE.exists()
    return CPP_EXAMPLE
