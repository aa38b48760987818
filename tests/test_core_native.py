"""The C++ core's own tests (core/tests), built with AddressSanitizer and
UndefinedBehaviorSanitizer, must pass: a memory error, undefined behaviour or a failed
check fails this test with the executable's output.

The core is built on its own with plain CMake (no Python), as a C++ router would, into
build/sanitize (the tree `make core-test` uses; kept between runs, so a rebuild compiles
only what changed).
"""

from __future__ import annotations

import os
import subprocess

from native_build import REPO, build

TREE = REPO / "build" / "sanitize"
RUN_TIMEOUT_S = 600


def test_core_tests_pass_under_sanitizers():
    build(REPO / "core", TREE, "-DETCHGUARD_SANITIZE=ON", "-DETCHGUARD_CORE_TESTS=ON")
    exe = TREE / "etchguard_core_tests"
    assert exe.exists(), f"{exe} was not built"
    env = dict(os.environ)
    env.setdefault("UBSAN_OPTIONS", "print_stacktrace=1")
    done = subprocess.run([str(exe)], capture_output=True, text=True, env=env,
                          timeout=RUN_TIMEOUT_S)
    output = f"--- stdout ---\n{done.stdout[-8000:]}\n--- stderr ---\n{done.stderr[-12000:]}"
    assert done.returncode == 0, f"etchguard_core_tests exited {done.returncode}:\n{output}"
    assert " 0 failed" in done.stdout, output
