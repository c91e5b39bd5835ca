"""The yield objective against the margin objective at equal wall time.

Run: python benchmarks/yield_objective.py        (a few minutes on a 2-core machine)

For each study, ``search: {objective: yield}`` runs with the study's own budget; then
``objective: margin`` runs for the same wall time (a time budget, with trials enough not to stop
first).  Both best designs are built 500 times in simulation on the same draws (the robustness view:
±1 mm cuts and the cables' or the study's Z0/VF spreads), and the table gives each one's yield,
nominal margin and 5th-percentile build margin, and the element whose cut tolerance costs most
(sensitivity × cut spread).  For the demo, a long yield-only run (far beyond the default budget)
shows what this network can reach under these spreads.  The last line gives the demo's yields.
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import optuna
import yaml
from machine import cpu_model

from optmatch.domain.design import Design
from optmatch.domain.optimise import population_search
from optmatch.domain.tolerance import draw_errors, monte_carlo, yield_scores
from optmatch.running.search import run_search
from optmatch.studyfile.loader import load_study

REPO = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(Path(__file__).resolve().parent))
import search as bench  # noqa: E402  (the search benchmark's cases)

optuna.logging.set_verbosity(optuna.logging.WARNING)


def _demo_raw() -> dict:
    raw = yaml.safe_load((REPO / "configs" / "demo_whip.yaml").read_text(encoding="utf-8"))
    raw["load"]["touchstone"] = str(REPO / "configs" / raw["load"]["touchstone"])
    return raw


def _case_raw(name: str) -> dict:
    case = next(c for c in bench.CASES + bench.MULTIMODAL if c.name == name)
    return yaml.safe_load(case.study_text or "")


STUDIES = [("demo-whip", _demo_raw), ("RC-double-stub", lambda: _case_raw("RC-double-stub")),
           ("RC-line-stub-line-stub", lambda: _case_raw("RC-line-stub-line-stub"))]


def _load(raw: dict, workdir: Path, tag: str):
    path = workdir / f"{tag}.yaml"
    path.write_text(yaml.safe_dump(raw), encoding="utf-8")
    return load_study(path)


def _limiting(study, design, rob) -> str:
    """The element whose cut spread moves the margin most (|dB per mm| × cut in mm)."""
    cut_mm = study.spread.cut_m * 1e3
    worst = max((s for s in rob.sensitivities if s.db_per_mm is not None), key=lambda s: abs(s.db_per_mm),
                default=None)
    if worst is None:
        return "-"
    el = study.problem.network.elements[worst.index]
    return (f"element {worst.index + 1} ({el.kind}): {worst.db_per_mm:+.2f} dB/mm, "
            f"±{abs(worst.db_per_mm) * cut_mm:.2f} dB")


def yield_variant(raw: dict) -> dict:
    """The study searched for yield."""
    return dict(raw, search={**dict(raw.get("search") or {}), "objective": "yield"})


def margin_variant(raw: dict, wall_s: float) -> dict:
    """The same study searched for margin for ``wall_s`` seconds (the yield search's wall time)."""
    return dict(raw, search={**dict(raw.get("search") or {}), "objective": "margin", "trials": 100000,
                             "time": f"{wall_s:.3f}s"})


def run_pair(name: str, raw: dict, workdir: Path) -> dict:
    study_y = _load(yield_variant(raw), workdir, f"{name}-yield")
    t0 = time.perf_counter()
    out_y = run_search(study_y, optuna.storages.InMemoryStorage())
    wall = time.perf_counter() - t0
    study_m = _load(margin_variant(raw, wall), workdir, f"{name}-margin")
    t0 = time.perf_counter()
    out_m = run_search(study_m, optuna.storages.InMemoryStorage())
    wall_m = time.perf_counter() - t0
    res = {"name": name, "wall_y": wall, "wall_m": wall_m, "trials_y": out_y.trials_complete,
           "trials_m": out_m.trials_complete}
    res["study"], res["designs"] = study_y, [out_y.designs[0], out_m.designs[0]]
    for key, study, out in (("y", study_y, out_y), ("m", study_m, out_m)):
        best = out.designs[0]
        rob = monte_carlo(study.problem, best, study.spread)
        res[key] = {"yield": rob.yield_frac, "margin": best.margin_db, "p5": rob.margin_p5_db,
                    "limit": _limiting(study, best, rob)}
    return res


def long_reference(study, starts: list) -> float:
    """Yield (on the robustness view's 500 builds) of a long yield-only run in the best design's
    choice: population 96, 200 generations, 256 draws, seeded with the designs found."""
    choice = starts[0].choice
    draws = draw_errors(study.problem, choice, study.spread, 256, np.random.default_rng(99))

    def score(u: np.ndarray) -> np.ndarray:
        y, p10 = yield_scores(study.problem, u, choice, draws)
        return y + 1e-3 * np.tanh(p10 / 3.0)

    seeds = np.array([d.u for d in starts if d.choice == choice])
    res = population_search(score, study.problem.network.dim, np.random.default_rng(5), seeds, 96, 200)
    best = Design(choice, tuple(res.u[0]), 0.0, 0.0)
    return monte_carlo(study.problem, best, study.spread).yield_frac


def main() -> None:
    warnings.simplefilter("ignore")
    print(f"machine: nproc {os.cpu_count()}, {cpu_model()}; load average {os.getloadavg()[0]:.2f}; "
          f"python {sys.version.split()[0]}, numpy {np.__version__}")
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for name, raw in STUDIES:
            rows.append(run_pair(name, raw(), Path(tmp)))
    print(f"{'study':<24} {'objective':<9} {'trials':>6} {'wall s':>7} {'yield':>7} {'margin dB':>10} "
          f"{'p5 dB':>7}  limiting piece")
    for r in rows:
        for key, label, trials, wall in (("y", "yield", r["trials_y"], r["wall_y"]),
                                         ("m", "margin", r["trials_m"], r["wall_m"])):
            d = r[key]
            print(f"{r['name']:<24} {label:<9} {trials:>6} {wall:>7.1f} {100 * d['yield']:>6.1f}% "
                  f"{d['margin']:>+10.3f} {d['p5']:>+7.3f}  {d['limit']}")
    better = sum(r["y"]["yield"] >= r["m"]["yield"] for r in rows)
    demo = rows[0]
    ref = long_reference(demo["study"], demo["designs"])
    print(f"demo: a long yield-only run (population 96, 200 generations, 256 draws) reaches {100 * ref:.1f} %; "
          f"the piece that limits it: {demo['y']['limit']}")
    print(f"yield objective: demo best design yield {100 * demo['y']['yield']:.1f} % vs "
          f"{100 * demo['m']['yield']:.1f} % by margin at equal wall time ({demo['wall_y']:.0f} s); "
          f"(long run {100 * ref:.1f} %); yield >= margin's on {better}/{len(rows)} studies; "
          f"load {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
