"""A small progress bar for long command-line runs, drawn on stderr.

``progress(items, total, label)`` yields the items unchanged and, while it does,
redraws one line ``label [#####.....]  42/200  21%`` in place. It draws only when
the stream is a terminal, or when ``force=True``: a log file or a pipe read by a
script must not fill with carriage returns. Redraws are throttled (``interval``
seconds) so that the bar costs nothing next to the work it follows.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Iterable, Iterator
from typing import TextIO, TypeVar

T = TypeVar("T")

BAR_WIDTH = 28


def wants_drawing(stream: TextIO, force: bool) -> bool:
    """Whether a bar should be drawn on ``stream``."""
    if force:
        return True
    isatty = getattr(stream, "isatty", None)
    try:
        return bool(isatty and isatty())
    except ValueError:  # a closed stream
        return False


def render(done: int, total: int | None, label: str, width: int = BAR_WIDTH) -> str:
    """One line of the bar (without the leading carriage return)."""
    prefix = f"{label} " if label else ""
    if not total or total <= 0:
        return f"{prefix}{done}"  # length unknown: a counter only
    fraction = min(1.0, max(0.0, done / total))
    filled = int(round(fraction * width))
    digits = len(str(total))
    return (f"{prefix}[{'#' * filled}{'.' * (width - filled)}] "
            f"{done:>{digits}}/{total} {fraction * 100:3.0f}%")


def progress(iterable: Iterable[T], total: int | None = None, label: str = "", *,
             stream: TextIO | None = None, force: bool = False,
             interval: float = 0.1) -> Iterator[T]:
    """Yield from ``iterable``, drawing a bar on ``stream`` (stderr by default).

    ``total`` defaults to ``len(iterable)`` when it has one. The bar's last state
    is left on its own line when the iteration ends, or is abandoned early.
    """
    out = stream if stream is not None else sys.stderr
    if total is None:
        try:
            total = len(iterable)  # type: ignore[arg-type]
        except TypeError:
            total = None
    if not wants_drawing(out, force):
        yield from iterable
        return
    done = 0
    last_draw = 0.0
    drawn_width = 0

    def draw() -> None:
        nonlocal drawn_width
        line = render(done, total, label)
        # pad with blanks so a shorter line fully covers the previous one
        out.write("\r" + line + " " * max(0, drawn_width - len(line)))
        out.flush()
        drawn_width = len(line)

    draw()
    try:
        for item in iterable:
            yield item
            done += 1
            now = time.monotonic()
            if now - last_draw >= interval:
                last_draw = now
                draw()
    finally:
        draw()
        out.write("\n")
        out.flush()
