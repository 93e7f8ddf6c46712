"""Small helpers shared by the benchmark scripts (median of warm repeats, model lookup)."""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable


def median_seconds(fn: Callable[[], object], repeats: int = 30, warmup: int = 3) -> float:
    """Median wall time of ``fn()`` over ``repeats`` calls after ``warmup`` calls."""
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def interleaved_medians(
    fns: dict[str, Callable[[], object]], repeats: int = 30, warmup: int = 3
) -> dict[str, float]:
    """Median time of each function, measured in alternation so machine noise hits all alike."""
    for fn in fns.values():
        for _ in range(warmup):
            fn()
    times: dict[str, list[float]] = {k: [] for k in fns}
    for _ in range(repeats):
        for name, fn in fns.items():
            t0 = time.perf_counter()
            fn()
            times[name].append(time.perf_counter() - t0)
    return {k: statistics.median(v) for k, v in times.items()}
