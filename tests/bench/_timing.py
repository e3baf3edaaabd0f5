"""Timing helper shared by the benchmarks (not a benchmark itself: no bench_ prefix)."""

from __future__ import annotations

import time


def best_of(fn, repeat: int = 1) -> tuple[float, object]:
    """Call ``fn`` ``repeat`` times; return the shortest wall time in seconds and the last result."""
    best, out = float("inf"), None
    for _ in range(repeat):
        start = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - start)
    return best, out
