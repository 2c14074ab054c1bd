"""Shared timing helper of the benchmark scripts: median wall time of repeats."""

from __future__ import annotations

import statistics
import time


def median_time(function, repeats: int = 5) -> tuple[float, object]:
    """Median wall-clock seconds of ``repeats`` calls of ``function()``, and its last result."""
    times, result = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        result = function()
        times.append(time.perf_counter() - start)
    return statistics.median(times), result
