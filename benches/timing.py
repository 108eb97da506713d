"""Timing shared by the reference scripts of the benchmarks."""
import statistics
import time


def median_time(fn, repeats=5):
    """The median of `repeats` wall-clock timings of `fn()`, in seconds."""
    times = []
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times)
