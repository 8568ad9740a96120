"""Shared by the benchmark scripts: the median wall time of a call."""

from __future__ import annotations

import statistics
import time


def median_time(fn, repeat: int = 3) -> float:
    """Median wall time of ``fn()`` over ``repeat`` runs, in seconds."""
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)
