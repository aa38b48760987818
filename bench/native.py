"""Build a CMake project for a bench (the C++ clients): the tree is kept under build/ and
reused between runs, so a later run compiles only what changed."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

BUILD_TIMEOUT_S = 900


def cmake() -> str | None:
    """The machine's cmake, else the one `make venv` put beside this Python."""
    return shutil.which("cmake") or shutil.which("cmake", path=str(Path(sys.executable).parent))


def cmake_build(source: Path, tree: Path) -> float:
    """Configure and build ``source`` in ``tree``; returns the seconds taken. Raises
    RuntimeError with the tail of CMake's output when a step fails."""
    tool = cmake()
    if tool is None:
        raise RuntimeError("cmake is not installed (make venv puts one in the venv)")
    t = time.monotonic()
    for cmd in ([tool, "-S", str(source), "-B", str(tree)],
                [tool, "--build", str(tree), "-j", str(min(os.cpu_count() or 2, 2))]):
        done = subprocess.run(cmd, capture_output=True, text=True, timeout=BUILD_TIMEOUT_S)
        if done.returncode != 0:
            raise RuntimeError(f"{' '.join(cmd)} failed:\n{done.stdout[-3000:]}\n{done.stderr[-3000:]}")
    return time.monotonic() - t
