"""Configure and build a CMake project for a test (the core's own tests, the in-process
example): one build at a time per tree (a lock file beside it), the tree kept between
runs under build/ so a rebuild compiles only what changed."""

from __future__ import annotations

import fcntl
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
BUILD_TIMEOUT_S = 1200  # the core built with sanitizers on 2 shared cores takes minutes
# The C++ client example (client_examples/cpp), built by conftest's example_binary.
CPP_SOURCE = REPO / "client_examples" / "cpp"
CPP_BUILD = REPO / "build" / "cpp-example"
CPP_EXAMPLE = CPP_BUILD / "etchguard_example"
CPP_BUILD_TIMEOUT_S = 600  # a first build on 2 cores takes about 1.5 minutes; later ones seconds


def cmake() -> str:
    """The machine's cmake, else the one PyPI put beside this Python (make venv installs
    it there when the machine has none)."""
    found = shutil.which("cmake") or shutil.which("cmake", path=str(Path(sys.executable).parent))
    if found is None:
        pytest.fail("cmake is not installed (needed to build the C++ core); "
                    "`pip install cmake` or apt-get install cmake", pytrace=False)
    if shutil.which("c++") is None and shutil.which("g++") is None:
        pytest.fail("no C++ compiler (g++) to build the core", pytrace=False)
    return found


def build(source: Path, tree: Path, *options: str, target: str | None = None) -> None:
    """cmake -S source -B tree options... && cmake --build tree; fails the test with the
    tail of CMake's output when either step fails."""
    tool = cmake()
    tree.mkdir(parents=True, exist_ok=True)
    with open(tree.parent / f".{tree.name}.lock", "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        steps = [[tool, "-S", str(source), "-B", str(tree), *options],
                 [tool, "--build", str(tree), "--parallel", str(min(os.cpu_count() or 2, 2))]]
        if target:
            steps[1] += ["--target", target]
        for cmd in steps:
            done = subprocess.run(cmd, capture_output=True, text=True, timeout=BUILD_TIMEOUT_S)
            if done.returncode != 0:
                pytest.fail(f"{' '.join(cmd)} failed ({done.returncode}):\n"
                            f"{done.stdout[-6000:]}\n{done.stderr[-6000:]}", pytrace=False)
