"""Several loads: what a study over three loads costs against one load, and that the one-load path
costs what it did.

Run: python benchmarks/loads.py            (about half a minute on a 2-core machine)

Three comparisons in one process (CPU time of this process, median of ``REPEATS``, since the
machine is shared):

  margins   ``Problem.margins`` on a population of 64 demo designs against the engine call it makes
            for one load (``evaluate_reduced`` with ``margin_db``, the body it had before several
            loads existed): the one-load path adds no work;
  search    the demo whip's search with its one load (configs/demo_whip_conditions.yaml with only
            the parked load) against the same study over its three invented conditions;
  stacked   the same one-load search given as ``loads:`` with one entry (the several-loads
            machinery with a single load) against ``load:``.

The headline (last line) gives the three-load cost ratio and the one-load overhead.
"""

from __future__ import annotations

import statistics
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import optuna
import yaml
from machine import cpu_model

from optmatch.domain.mask import margin_db
from optmatch.engine import evaluate_reduced
from optmatch.running.search import run_search
from optmatch.studyfile.loader import study_from_data

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "configs" / "demo_whip_conditions.yaml"
REPEATS = 3

optuna.logging.set_verbosity(optuna.logging.WARNING)


def cpu(fn, repeats: int = REPEATS) -> tuple[float, object]:
    """Median CPU seconds of ``fn()`` and its last result."""
    times, out = [], None
    for _ in range(repeats):
        t0 = time.process_time()
        out = fn()
        times.append(time.process_time() - t0)
    return statistics.median(times), out


def studies():
    raw = yaml.safe_load(DEMO.read_text(encoding="utf-8"))
    three = study_from_data(raw, DEMO)
    one_raw = {k: v for k, v in raw.items() if k != "loads"}
    one_raw["load"] = {"touchstone": raw["loads"][0]["touchstone"]}
    one_raw["name"] = "demo-whip-parked"
    one = study_from_data(one_raw, DEMO)
    listed_raw = dict(one_raw)
    listed_raw.pop("load")
    listed_raw["loads"] = [raw["loads"][0]]
    listed = study_from_data(listed_raw, DEMO)
    return one, listed, three


def main() -> None:
    warnings.filterwarnings("ignore")
    one, listed, three = studies()
    print(f"machine: {cpu_model()}; Python {sys.version.split()[0]}; numpy {np.__version__}")

    problem = one.problem
    choice = problem.network.choice_from({n: o[0] for n, _, o in problem.network.choice_space()})
    u = np.random.default_rng(1).random((64, problem.network.dim))

    def direct() -> np.ndarray:
        params = problem.network.engine_params(np.atleast_2d(u), choice)
        return evaluate_reduced(problem.network.stages, params, problem.grid.freq, problem.zload, problem.z_sys,
                                reducer=lambda r: margin_db(r.gamma_sq, None, problem.grid))

    def through_problem() -> np.ndarray:
        return problem.margins(u, choice)

    loops = 200
    t_direct, t_problem = [], []
    for _ in range(5):  # alternate, so that a change in the machine's load hits both
        t, m_direct = cpu(lambda: [direct() for _ in range(loops)][-1], 1)
        t_direct.append(t)
        t, m_problem = cpu(lambda: [through_problem() for _ in range(loops)][-1], 1)
        t_problem.append(t)
    t_direct, t_problem = statistics.median(t_direct), statistics.median(t_problem)
    assert np.array_equal(m_direct, m_problem)
    overhead = t_problem / t_direct
    print(f"margins of 64 designs x {loops}: engine call {t_direct:.3f} s, Problem.margins {t_problem:.3f} s "
          f"(ratio {overhead:.3f}; same margins)")

    def search(study):
        return lambda: run_search(study, optuna.storages.InMemoryStorage())

    t_one, out_one = cpu(search(one))
    t_listed, out_listed = cpu(search(listed))
    t_three, out_three = cpu(search(three))
    print(f"search, one load (load:):            {t_one:.2f} s CPU, best margin {out_one.designs[0].margin_db:+.3f} dB")
    print(f"search, one load (loads: one entry): {t_listed:.2f} s CPU, best margin "
          f"{out_listed.designs[0].margin_db:+.3f} dB")
    print(f"search, three loads:                 {t_three:.2f} s CPU, best worst margin "
          f"{out_three.designs[0].margin_db:+.3f} dB")
    print(f"loads: three-load search {t_three / t_one:.2f}x the one-load search's CPU; one-load path overhead "
          f"{100 * (overhead - 1):+.1f} % (Problem.margins vs its engine call), loads: one entry "
          f"{t_listed / t_one:.2f}x load:")


if __name__ == "__main__":
    main()
