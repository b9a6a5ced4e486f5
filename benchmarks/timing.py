"""Timing helpers shared by the benchmark scripts (run them as ``python benchmarks/bench_*.py``)."""

import statistics
import time


def run_times(fn, repeats):
    """Wall-clock times [s] of ``repeats`` calls of ``fn()``."""
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return times


def median_time(fn, repeats):
    """Median wall-clock time [s] of ``repeats`` calls: robust to a noisy machine."""
    return statistics.median(run_times(fn, repeats))


def best_time(fn, repeats):
    """Shortest wall-clock time [s] of ``repeats`` calls."""
    return min(run_times(fn, repeats))
