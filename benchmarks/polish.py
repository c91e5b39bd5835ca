"""The local polish: the older forward-difference polish against the exact-gradient one, same process.

Run: python benchmarks/polish.py            (about a minute on a 2-core machine)

Each study is searched with an in-memory storage, alternately in two configurations, ``REPEATS``
times each, and the median CPU time of this process is compared (CPU time, not wall time, because
the machine is shared):

  old   the polish as it was: SLSQP on each of the best three picks (1e-3 apart) with its constraint
        Jacobian from forward differences (d + 1 rows per call), and the engine's former small-batch
        paths (phasors by doubling for every batch size, the grid's uniform runs found on every call);
  new   exact gradients of every point's shortfall in one engine call (forward-mode tangents through
        the cascade), value-only line-search points, one pick per basin within 1 dB of the best,
        direct phasors for small batches and the grid kept between calls.

The population search is the same in both.  The headline (last line) is the demo study's time
ratio, with both best margins, which must agree to 0.001 dB or be better in the new one.
"""

from __future__ import annotations

import os
import statistics
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import optuna
from machine import cpu_model

import optmatch.engine.cascade as cascade
import optmatch.running.search as search
from optmatch.studyfile.loader import load_study

REPO = Path(__file__).resolve().parent.parent
REPEATS = 3

optuna.logging.set_verbosity(optuna.logging.WARNING)


def configure(new: bool) -> None:
    """Switch between the old and the new polish (and the engine's small-batch paths)."""
    search.EXACT_GRADIENTS = new
    cascade.CACHE_GRIDS = new
    cascade.DIRECT_PHASOR_MAX = 64 if new else 0
    cascade._GRIDS.clear()


def timed(study, new: bool) -> tuple[float, float]:
    configure(new)
    t0 = time.process_time()
    outcome = search.run_search(study, optuna.storages.InMemoryStorage())
    return time.process_time() - t0, outcome.designs[0].margin_db


def compare(study) -> tuple[float, float, float, float]:
    """Median CPU seconds and best margin (dB) of old and new."""
    old_t, new_t, old_m, new_m = [], [], 0.0, 0.0
    for _ in range(REPEATS):
        t, old_m = timed(study, False)
        old_t.append(t)
        t, new_m = timed(study, True)
        new_t.append(t)
    configure(True)
    return statistics.median(old_t), statistics.median(new_t), old_m, new_m


def main() -> None:
    warnings.simplefilter("ignore")
    load = os.getloadavg()[0]
    print(f"machine: nproc {os.cpu_count()}, {cpu_model()}; load average {load:.2f}; "
          f"python {sys.version.split()[0]}, numpy {np.__version__}")
    sys.path.insert(0, str(REPO / "benchmarks"))
    import search as bench_search  # noqa: E402  (the search benchmark's cases)

    studies = [("demo-whip", load_study(REPO / "configs" / "demo_whip.yaml"))]
    with tempfile.TemporaryDirectory() as tmp:
        for case in bench_search.CASES:
            if case.study_file is None:
                studies.append((case.name, case.load(Path(tmp))))
    print(f"{'study':<22} {'old s':>7} {'new s':>7} {'ratio':>6} {'old margin':>11} {'new margin':>11}")
    demo = None
    for name, study in studies:
        old_t, new_t, old_m, new_m = compare(study)
        print(f"{name:<22} {old_t:>7.2f} {new_t:>7.2f} {old_t / new_t:>5.2f}x {old_m:>+11.4f} {new_m:>+11.4f}")
        if demo is None:
            demo = (old_t, new_t, old_m, new_m)
    assert demo is not None
    old_t, new_t, old_m, new_m = demo
    verdict = "equal or better" if new_m >= old_m - 1e-3 else "WORSE"
    print(f"polish: demo search {old_t / new_t:.2f}x faster (old {old_t:.2f} s, new {new_t:.2f} s CPU, "
          f"median of {REPEATS}), best margin old {old_m:+.3f} dB, new {new_m:+.3f} dB ({verdict}); "
          f"load {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
