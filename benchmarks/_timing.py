"""Timing helpers shared by the benchmark scripts (best of several repeats)."""

from __future__ import annotations

import time
from collections.abc import Callable


def best_time(fn: Callable[[], object], repeats: int = 5) -> float:
    """Best wall time of ``repeats`` calls, seconds."""
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best
