"""Shared timing helpers of the benchmark scripts: median wall times of repeats."""

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


def in_turns(first, second, repeats: int) -> tuple[float, float]:
    """Medians of ``repeats`` wall times of ``first()`` and ``second()``, timed in
    turns (first, second, first, …): on a shared machine whose speed drifts over
    minutes, both then meet the same machine, and the ratio of the medians holds."""
    times: tuple[list, list] = ([], [])
    for _ in range(repeats):
        for function, kept in zip((first, second), times, strict=True):
            start = time.perf_counter()
            function()
            kept.append(time.perf_counter() - start)
    return statistics.median(times[0]), statistics.median(times[1])
