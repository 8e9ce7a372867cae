"""Timing helpers shared by the benchmark scripts (run as scripts, so imported as ``timing``)."""

from __future__ import annotations

import statistics
import time


def timed(fn, runs: int) -> list[float]:
    """Wall-clock seconds of ``runs`` calls of ``fn``."""
    out = []
    for _ in range(runs):
        t0 = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t0)
    return out


def show(label: str, times: list[float], *, width: int = 52) -> float:
    """Print min, median and max; return the median."""
    print(f"  {label:<{width}} min {min(times):8.3f}  median {statistics.median(times):8.3f}  "
          f"max {max(times):8.3f} s")
    return statistics.median(times)


def timed_together(steps, runs: int) -> dict[str, list[float]]:
    """Time each ``(label, fn, before)`` step once per round, ``runs`` rounds, interleaved so that
    load from other processes on a shared machine falls on all sides alike. ``before`` (or None)
    runs untimed ahead of its step."""
    times: dict[str, list[float]] = {label: [] for label, _, _ in steps}
    for _ in range(runs):
        for label, fn, before in steps:
            if before is not None:
                before()
            t0 = time.perf_counter()
            fn()
            times[label].append(time.perf_counter() - t0)
    return times
