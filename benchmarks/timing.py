"""Timing helpers shared by the benchmark's scripts: the best of several runs, and section headings."""

from __future__ import annotations

import math
import time
from collections.abc import Callable


def timed(fn: Callable[[], object], repeat: int) -> tuple[float, object]:
    """The fastest of ``repeat`` runs of ``fn``, and its last result."""
    best, value = math.inf, None
    for _ in range(repeat):
        started = time.perf_counter()
        value = fn()
        best = min(best, time.perf_counter() - started)
    return best, value


def section(title: str) -> None:
    print(f"\n== {title} ==", flush=True)
