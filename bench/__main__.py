"""Run every bench module of this package that exposes ``main()``.

``python -m bench`` runs them all (the engine bench first, then by name);
``python -m bench engine grpc`` runs only those named (with or without ``_bench``).
A bench that fails to import or raises is reported and the others still run; the exit
status is non-zero if any failed or returned non-zero.
"""

from __future__ import annotations

import importlib
import pkgutil
import sys
import time
import traceback
from collections.abc import Callable, Sequence
from pathlib import Path

FIRST = "engine_bench"


def discover() -> list[str]:
    """Names of the modules in bench/ (helpers included; main() is checked on import)."""
    names = [m.name for m in pkgutil.iter_modules([str(Path(__file__).parent)])
             if not m.name.startswith("_") and not m.ispkg]
    return sorted(names, key=lambda n: (n != FIRST, n))


def _wanted(name: str, selection: Sequence[str]) -> bool:
    return not selection or any(name in (s, f"{s}_bench") for s in selection)


def main(argv: Sequence[str] | None = None) -> int:
    selection = list(sys.argv[1:] if argv is None else argv)
    status = 0
    ran = []
    for name in discover():
        if not _wanted(name, selection):
            continue
        try:
            module = importlib.import_module(f"bench.{name}")
        except Exception:  # a bench whose dependencies are missing must not stop the rest
            print(f"== bench.{name}: import failed", flush=True)
            traceback.print_exc()
            status = 1
            continue
        entry: Callable[[], object] | None = getattr(module, "main", None)
        if not callable(entry):
            continue  # a helper module (net generator, baseline), not a bench
        print(f"== bench.{name}", flush=True)
        start = time.perf_counter()
        saved_argv = sys.argv
        sys.argv = [f"bench.{name}"]  # a bench parsing sys.argv must not see the runner's selection
        try:
            code = entry()
        except Exception:
            traceback.print_exc()
            code = 1
        finally:
            sys.argv = saved_argv
        print(f"== bench.{name}: {'ok' if not code else f'failed ({code})'} "
              f"in {time.perf_counter() - start:.0f} s", flush=True)
        ran.append(name)
        status = status or int(bool(code))
    if selection and not ran:
        print(f"no bench matches {' '.join(selection)}; found {', '.join(discover())}", file=sys.stderr)
        return 2
    return status


if __name__ == "__main__":
    sys.exit(main())
