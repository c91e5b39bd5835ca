"""Cores shared between worker processes: the numerical libraries' own thread pools.

numpy and scipy each load an OpenBLAS that starts one thread per core.  A single study gains nothing
from them (its arrays are small), but with one worker process per core those pools oversubscribe the
machine: measured on 2 cores, two workers with default pools ran each study's search 11 % slower than
one worker alone, and 2 % slower with one thread per pool (``benchmarks/batch.py``).  So each process
of a batch with several workers caps every pool at its share of the cores.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from contextlib import contextmanager

from threadpoolctl import threadpool_limits


def threads_per_worker(workers: int, cores: int | None = None) -> int | None:
    """Threads each library pool gets in one of ``workers`` processes on ``cores`` cores (default: this
    machine's); None for a single worker, whose pools are left as the libraries set them."""
    if workers <= 1:
        return None
    return max(1, (cores or os.cpu_count() or 1) // workers)


@contextmanager
def pool_threads(limit: int | None) -> Iterator[None]:
    """Cap the thread pools of every numerical library loaded so far at ``limit`` threads (None: no cap).

    Enter it after the search modules are imported: a library loaded later is not capped.
    """
    if limit is None:
        yield
        return
    with threadpool_limits(limits=limit):
        yield


__all__ = ["pool_threads", "threads_per_worker"]
