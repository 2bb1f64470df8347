"""Timing helper shared by the benchmark scripts (run as ``python bench/NAME.py``)."""

from __future__ import annotations

import time


def best_time(fn, repeat: int) -> tuple[float, object]:
    """The shortest of ``repeat`` timed calls of ``fn`` (least disturbed by other work), and its result."""
    best, value = float("inf"), None
    for _ in range(repeat):
        start = time.perf_counter()
        value = fn()
        best = min(best, time.perf_counter() - start)
    return best, value
