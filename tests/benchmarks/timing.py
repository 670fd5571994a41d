"""Timing for the benchmarks: the median wall time of a few calls."""

from __future__ import annotations

import statistics
import time
from collections.abc import Callable
from typing import Any


def median_seconds(fn: Callable[[], Any], repeats: int = 5) -> float:
    """Median of ``repeats`` wall times of ``fn()``, seconds."""
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)
