"""Shared by the benchmarks: what machine a benchmark ran on (for the figures' caption), and the best
of repeated timings."""

from __future__ import annotations

import platform
import time
from collections.abc import Callable


def cpu_model() -> str:
    """The CPU model name from /proc/cpuinfo (or what platform knows)."""
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown"


def best_time(fn: Callable[[], object], repeats: int) -> float:
    """The shortest wall time (s) of ``repeats`` calls of ``fn``."""
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best
