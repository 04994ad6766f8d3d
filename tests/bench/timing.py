"""The one timing helper the benchmarks share."""

from __future__ import annotations

import statistics
import time


def median_ms(fn, repeats: int) -> float:
    """Median wall time of ``fn()`` over ``repeats`` calls (ms)."""
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return 1e3 * statistics.median(times)
