"""Small timing helpers shared by the benchmark modules."""

from __future__ import annotations

import time
from collections.abc import Callable, Sequence

__all__ = ["best_seconds", "best_seconds_alternating", "median_seconds_per_call"]


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


def best_seconds_alternating(
    runs: Sequence[Callable[[], object]], *, repeats: int = 5
) -> list[float]:
    """Best wall time of each run, in seconds, the runs timed in turn ``repeats`` times.

    One untimed warm-up of each first. Taking turns gives every run the same share of
    the other load on a shared machine, so the ratio of two bests is not the ratio of
    two different moments (common practice, no source).
    """
    for run in runs:
        run()
    best = [float("inf")] * len(runs)
    for _ in range(repeats):
        for k, run in enumerate(runs):
            start = time.perf_counter()
            run()
            best[k] = min(best[k], time.perf_counter() - start)
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
