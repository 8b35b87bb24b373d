"""A small progress reporter for long runs (grids, many cities), printing to stderr.

On a terminal it redraws one line; elsewhere (notebooks, logs) it prints a line at most every few
percent. ``enabled=False`` silences it.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Iterable, Iterator
from typing import TextIO, TypeVar

T = TypeVar("T")


def progress(
    items: Iterable[T], total: int | None = None, label: str = "", enabled: bool = True, stream: TextIO | None = None
) -> Iterator[T]:
    """Yield ``items`` while reporting ``label i/total`` and the elapsed time."""
    if not enabled:
        yield from items
        return
    out = stream or sys.stderr
    if total is None:
        try:
            total = len(items)  # type: ignore[arg-type]
        except TypeError:
            total = None
    tty = hasattr(out, "isatty") and out.isatty()
    start = time.perf_counter()
    step = max(1, (total or 100) // 20)
    i = 0
    for i, item in enumerate(items, 1):
        yield item
        if tty or i % step == 0 or i == total:
            elapsed = time.perf_counter() - start
            text = f"{label} {i}/{total if total else '?'} ({elapsed:.1f} s)"
            out.write(("\r" + text) if tty else (text + "\n"))
            out.flush()
    if tty and i:
        out.write("\n")
        out.flush()
