"""Small timing helpers shared by the benchmark modules."""

from __future__ import annotations

import time
from collections.abc import Callable

__all__ = ["best_seconds", "median_seconds_per_call"]


def best_seconds(run: Callable[[], object], *, repeats: int = 5) -> float:
    """Best wall time of ``repeats`` runs after one untimed warm-up run, in seconds.

    The best of several runs is the figure least disturbed by other load on a
    shared machine (common practice, no source).
    """
    run()
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        run()
        best = min(best, time.perf_counter() - start)
    return best


def median_seconds_per_call(call: Callable[[], object], *, calls: int, batches: int = 7) -> float:
    """Median over ``batches`` of the mean time per call of ``calls`` back-to-back calls, in seconds."""
    call()
    samples = []
    for _ in range(batches):
        start = time.perf_counter()
        for _ in range(calls):
            call()
        samples.append((time.perf_counter() - start) / calls)
    samples.sort()
    return samples[len(samples) // 2]
