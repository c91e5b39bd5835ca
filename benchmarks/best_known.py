"""Best-known margins of the multimodal benchmark cases: a long, many-restart scipy run.

Run: python benchmarks/best_known.py [RESTARTS]     (about 10-20 minutes on a loaded 2-core machine)

For every case in ``search.MULTIMODAL`` and every combination of its discrete choices (stub ends),
``RESTARTS`` independent runs of scipy's ``differential_evolution`` (popsize 20 per coordinate,
600 generations, tolerance 0 so the budget is spent, Latin hypercube start, each with its own seed)
maximise the margin over the unit cube; every run's result is then refined by scipy's SLSQP on the
exact minimax form (minimise t subject to every grid point's shortfall ≤ t, forward-difference
Jacobian, scipy's own).  Nothing of optmatch's own search (seeds, optuna, inner search, polish) is
used: only the problem's margin and shortfalls through the engine.

The best margin per case, with its choice and unit vector, goes to ``benchmarks/best_known.json``
(with the effort spent), which ``benchmarks/search.py`` compares against.
"""

from __future__ import annotations

import json
import os
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
from scipy.optimize import differential_evolution, minimize
from search import MULTIMODAL, all_choices  # benchmarks/ is the script's folder

OUT = Path(__file__).resolve().parent / "best_known.json"
POP_PER_DIM = 20
GENERATIONS = 600


def refine(problem, choice, x0: np.ndarray) -> np.ndarray:
    """scipy SLSQP on the minimax form, from ``x0``; returns the better of start and result."""
    d = x0.size

    def shortfall(x: np.ndarray) -> np.ndarray:
        return problem.shortfalls_db(np.clip(x, 0.0, 1.0)[None, :], choice)[0]

    t0 = float(np.max(shortfall(x0)))
    res = minimize(lambda z: z[-1], np.append(x0, t0), method="SLSQP",
                   bounds=[(0.0, 1.0)] * d + [(None, None)],
                   constraints=[{"type": "ineq", "fun": lambda z: z[-1] - shortfall(z[:-1])}],
                   options={"maxiter": 200, "ftol": 1e-12})
    x = np.clip(res.x[:-1], 0.0, 1.0)
    return x if float(np.max(shortfall(x))) < t0 else x0


def best_known(case, restarts: int, workdir: Path) -> dict:
    study = case.load(workdir)
    problem = study.problem
    dim = problem.network.dim
    t0 = time.perf_counter()
    evaluations = 0
    best: dict | None = None
    per_choice = []
    for choice in all_choices(problem):
        choice_best = -np.inf
        for r in range(restarts):
            def neg_margin(x: np.ndarray, choice=choice) -> np.ndarray:
                nonlocal evaluations
                u = np.atleast_2d(x.T)
                evaluations += u.shape[0]
                return -problem.margins(u, choice)

            res = differential_evolution(neg_margin, [(0.0, 1.0)] * dim, popsize=POP_PER_DIM,
                                         maxiter=GENERATIONS, tol=0.0, atol=0.0, polish=False,
                                         vectorized=True, updating="deferred", init="latinhypercube",
                                         rng=np.random.default_rng([1000 + r, len(per_choice)]))
            x = refine(problem, choice, res.x)
            m = float(problem.margins(x[None, :], choice)[0])
            choice_best = max(choice_best, m)
            if best is None or m > best["margin_db"]:
                best = {"margin_db": m, "choice": {"medium": list(choice.medium), "short": list(choice.short)},
                        "u": [float(v) for v in x]}
        per_choice.append({"short": list(choice.short), "best_margin_db": choice_best})
        print(f"  {case.name}: ends {['short' if s else 'open' for s in choice.short]} best {choice_best:+.4f} dB",
              flush=True)
    assert best is not None
    best.update({"restarts_per_choice": restarts, "choices": len(per_choice), "per_choice": per_choice,
                 "de": {"popsize_per_dim": POP_PER_DIM, "generations": GENERATIONS},
                 "evaluations": evaluations, "seconds": time.perf_counter() - t0})
    return best


def main() -> None:
    warnings.simplefilter("ignore")
    restarts = int(sys.argv[1]) if len(sys.argv) > 1 else 16
    print(f"best-known run: {restarts} restarts per choice; nproc {os.cpu_count()}, "
          f"load average {os.getloadavg()[0]:.2f}", flush=True)
    doc = {}
    with tempfile.TemporaryDirectory() as tmp:
        for case in MULTIMODAL:
            doc[case.name] = best_known(case, restarts, Path(tmp))
            print(f"{case.name}: best-known margin {doc[case.name]['margin_db']:+.4f} dB "
                  f"({doc[case.name]['evaluations']:,} evaluations, {doc[case.name]['seconds']:.0f} s)", flush=True)
    OUT.write_text(json.dumps(doc, indent=1) + "\n", encoding="utf-8")
    worst = min(doc.values(), key=lambda d: d["margin_db"])
    print(f"best-known: {len(doc)} cases written to {OUT.name}; lowest margin {worst['margin_db']:+.4f} dB")


if __name__ == "__main__":
    main()
