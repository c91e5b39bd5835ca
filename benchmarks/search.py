"""Search quality: our pipeline against simple baselines and the theoretical figure, case by case.

Run: python benchmarks/search.py            (about 2-3 minutes on a 2-core machine)

For every case (a study: load, mask, network, search settings) the table gives the margin (dB
by which the worst grid point clears the mask) and the worst return loss (dB) of:

  ours         run_search with an in-memory storage and the study's own search settings;
  closed form  the best closed-form spot solution at the reference frequency (the search's seeds,
               mapped onto the study's network), evaluated over the band;
  scipy DE     scipy.optimize.differential_evolution on the same margin objective over the unit
               cube, with the evaluation budget ours used (split evenly over every combination of
               the discrete choices, one DE run each; scipy's default population of 15 per
               coordinate, no polish, tolerance 0 so the whole budget is spent; the count printed
               is counted, not computed);
  optuna TPE   plain optuna (TPESampler, one network evaluation per trial: suggest_float per free
               coordinate plus a categorical per discrete choice) for the wall time ours took;
  theory       where one exists: the exact equal-ripple (Chebyshev) optimum of the stepped-line
               transformer, or the Bode–Fano bound for the reactive loads (a bound, not
               necessarily reachable by a few stubs).

"ours >= baseline" allows 0.01 dB (the printed resolution). A case is a :class:`Case` in ``CASES``;
append more cases there.  All loads, masks and the demo antenna data are invented.

The multimodal cases (``MULTIMODAL``: reactive loads, 4-6 element stub and line networks, 18-22 %
bands) run at the default budget (no search settings but the seed) and are also compared with the
best-known margin of a long many-restart scipy run (``benchmarks/best_known.py``, output in
``benchmarks/best_known.json``).  Every case's best design is checked against its Bode–Fano ceiling
(``optmatch.domain.feasibility``) on a dense grid.  The last line leads with the worst gap to a
best-known margin.
"""

from __future__ import annotations

import itertools
import json
import math
import os
import sys
import tempfile
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import optuna
import scipy
from machine import cpu_model
from scipy.optimize import differential_evolution

from optmatch.domain.bounds import (
    bode_fano_rc_min_gamma,
    bode_fano_rl_min_gamma,
    chebyshev_bandwidth,
    chebyshev_exact_gamma_max,
    gamma_to_return_loss_db,
)
from optmatch.domain.feasibility import model_impedance
from optmatch.domain.mask import build_grid
from optmatch.domain.network import Choice
from optmatch.domain.problem import Problem
from optmatch.running.search import run_search, study_seeds
from optmatch.studyfile.loader import Study, load_study

REPO = Path(__file__).resolve().parent.parent
TIE_DB = 0.01  # "at least as good" tolerance, dB
BEST_KNOWN = Path(__file__).resolve().parent / "best_known.json"

optuna.logging.set_verbosity(optuna.logging.WARNING)


# ---------------------------------------------------------------- cases


@dataclass(frozen=True)
class Theory:
    """A theoretical figure: worst in-band return loss (dB) it allows, and what it is."""

    label: str
    worst_rl_db: float
    note: str = ""


@dataclass(frozen=True)
class Case:
    """One benchmark case: a study (YAML text or a file in the repo) and its theoretical figure."""

    name: str
    study_text: str | None = None
    study_file: str | None = None  # relative to the repository root
    theory: Callable[[Problem], Theory | None] = field(default=lambda problem: None)
    chebyshev: bool = False  # headline reports the gap to this case's theoretical figure
    dense: Callable[[Problem], Problem] | None = None  # the same problem on a dense grid, to check
    best_known: bool = False  # compared with benchmarks/best_known.json (a long scipy run)

    def load(self, workdir: Path) -> Study:
        if self.study_file is not None:
            return load_study(REPO / self.study_file)
        path = workdir / f"{self.name}.yaml"
        path.write_text(self.study_text or "")
        return load_study(path)


# Stepped line: ZL = 100 Ω on 50 Ω, N = 3, over the band for which Pozar's Chebyshev formula
# (Microwave Engineering, 4th ed., sec. 5.7, eq. 5.60) gives Γm = 0.05.
TX_N, TX_ZL, TX_Z0, TX_GM = 3, 100.0, 50.0, 0.05
TX_BW = chebyshev_bandwidth(TX_ZL, TX_Z0, TX_N, TX_GM)
TX_F0 = 1e9


def _transformer_dense(problem: Problem, points: int = 4001) -> Problem:
    """The transformer problem on a dense grid: the exact optimum holds over the continuous band."""
    seg = problem.grid.segments[0]
    grid = build_grid([replace(seg, points=points)])
    return replace(problem, grid=grid, zload=np.full(grid.freq.size, TX_ZL, dtype=complex))


def _transformer_theory(problem: Problem) -> Theory:
    exact = chebyshev_exact_gamma_max(TX_ZL, TX_Z0, TX_N, TX_BW)
    return Theory("Chebyshev optimum", gamma_to_return_loss_db(exact),
                  f"exact equal ripple |Γ| {exact:.5f}; small-reflection design Γm = {TX_GM} "
                  f"({gamma_to_return_loss_db(TX_GM):.2f} dB)")


# Reactive loads (invented): a series R–L and a parallel R–C, each over a band of about 20-25 %.
RL_R, RL_L, RL_LO, RL_HI = 20.0, 15e-9, 880e6, 1120e6      # 24 % band
RC_R, RC_C, RC_LO, RC_HI = 100.0, 3e-12, 900e6, 1100e6     # 20 % band


def _rl_theory(problem: Problem) -> Theory:
    g = bode_fano_rl_min_gamma(RL_R, RL_L, RL_LO, RL_HI)
    return Theory("Bode–Fano bound", gamma_to_return_loss_db(g), f"|Γ| >= {g:.4f}")


def _rc_theory(problem: Problem) -> Theory:
    g = bode_fano_rc_min_gamma(RC_R, RC_C, RC_LO, RC_HI)
    return Theory("Bode–Fano bound", gamma_to_return_loss_db(g), f"|Γ| >= {g:.4f}")


CASES: list[Case] = [
    Case(
        name="transformer-N3",
        study_text=f"""
name: bench-transformer
load: {{impedance: {TX_ZL:g}}}
system: {TX_Z0:g}
reference: {TX_F0:g}Hz
mask: {{segments: [{{from: {TX_F0 * (1 - TX_BW / 2):.6f}Hz, to: {TX_F0 * (1 + TX_BW / 2):.6f}Hz,
                    return_loss: 25, points: 81}}]}}
network: {{template: stepped_line, sections: {TX_N}, z0: {{min: 20, max: 200}}}}
search: {{trials: 6, seed: 2, population: 32, generations: 40}}
""",
        theory=_transformer_theory,
        chebyshev=True,
        dense=_transformer_dense,
    ),
    Case(
        name="RL-triple-stub",
        study_text=f"""
name: bench-rl
load: {{series_rlc: {{r: {RL_R:g}, l: {RL_L * 1e9:g}nH}}}}
mask: {{segments: [{{from: {RL_LO / 1e6:g}MHz, to: {RL_HI / 1e6:g}MHz, return_loss: 15, points: 41}}]}}
network: {{template: triple_stub, spacing: 45deg, end: either}}
search: {{trials: 10, seed: 4, population: 48, generations: 50}}
""",
        theory=_rl_theory,
    ),
    Case(
        name="RC-double-stub",
        study_text=f"""
name: bench-rc
load: {{parallel_rlc: {{r: {RC_R:g}, c: {RC_C * 1e12:g}pF}}}}
mask: {{segments: [{{from: {RC_LO / 1e6:g}MHz, to: {RC_HI / 1e6:g}MHz, return_loss: 15, points: 41}}]}}
network: {{template: double_stub, spacing: 45deg, end: either}}
search: {{trials: 10, seed: 5, population: 48, generations: 50}}
""",
        theory=_rc_theory,
    ),
    Case(name="demo-whip", study_file="configs/demo_whip.yaml"),
]

# Multimodal cases of our own (invented loads), each searched at the default budget (no search
# settings but the seed) and compared with the best-known margin of a long many-restart scipy run
# (benchmarks/best_known.py, output in benchmarks/best_known.json).  Each has an exact Bode–Fano
# ceiling (a plain R–C or R–L load).
RC4_R, RC4_C, RC4_LO, RC4_HI = 150.0, 2.2e-12, 820e6, 980e6          # parallel R–C, 18 % band
RL5_R, RL5_L, RL5_LO, RL5_HI = 12.0, 6e-9, 1.6e9, 2.0e9               # series R–L, 22 % band
SC6_R, SC6_C, SC6_LO, SC6_HI = 30.0, 4e-12, 410e6, 510e6              # series R–C, 22 % band

def _ceiling_theory(problem: Problem) -> Theory | None:
    fz = problem.feasibility()
    if fz.ceiling_return_loss_db is None:
        return None
    return Theory("Bode–Fano ceiling", fz.ceiling_return_loss_db, f"{fz.model}, {fz.basis}")


MULTIMODAL: list[Case] = [
    Case(
        name="RC-line-stub-line-stub",
        study_text=f"""
name: bench-rc-lsls
load: {{parallel_rlc: {{r: {RC4_R:g}, c: {RC4_C * 1e12:g}pF}}}}
mask: {{segments: [{{from: {RC4_LO / 1e6:g}MHz, to: {RC4_HI / 1e6:g}MHz, return_loss: 20, points: 41}}]}}
network:
  elements:
    - line: {{length: {{min: 0deg, max: 180deg}}, z0: 50, vf: 0.66}}
    - shunt_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, z0: 50, vf: 0.66}}
    - line: {{length: {{min: 5deg, max: 180deg}}, z0: 50, vf: 0.66}}
    - shunt_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, z0: 50, vf: 0.66}}
search: {{seed: 21}}
""",
        best_known=True,
        theory=_ceiling_theory,
    ),
    Case(
        name="RL-five-element-ladder",
        study_text=f"""
name: bench-rl-ladder5
load: {{series_rlc: {{r: {RL5_R:g}, l: {RL5_L * 1e9:g}nH}}}}
mask: {{segments: [{{from: {RL5_LO / 1e9:g}GHz, to: {RL5_HI / 1e9:g}GHz, return_loss: 10, points: 41}}]}}
network:
  elements:
    - line: {{length: {{min: 0deg, max: 180deg}}, z0: 50, vf: 0.7}}
    - shunt_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, z0: 50, vf: 0.7}}
    - line: {{length: {{min: 5deg, max: 180deg}}, z0: 35, vf: 0.7}}
    - shunt_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, z0: 50, vf: 0.7}}
    - line: {{length: {{min: 5deg, max: 180deg}}, z0: 50, vf: 0.7}}
search: {{seed: 22}}
""",
        best_known=True,
        theory=_ceiling_theory,
    ),
    Case(
        name="seriesRC-six-element",
        study_text=f"""
name: bench-src-mixed6
load: {{series_rlc: {{r: {SC6_R:g}, c: {SC6_C * 1e12:g}pF}}}}
mask: {{segments: [{{from: {SC6_LO / 1e6:g}MHz, to: {SC6_HI / 1e6:g}MHz, return_loss: 15, points: 41}}]}}
network:
  elements:
    - line: {{length: {{min: 0deg, max: 180deg}}, z0: 50, vf: 0.66}}
    - series_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, z0: 50, vf: 0.66}}
    - line: {{length: {{min: 5deg, max: 180deg}}, z0: 50, vf: 0.66}}
    - shunt_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, z0: 50, vf: 0.66}}
    - line: {{length: 45deg, z0: 50, vf: 0.66}}
    - shunt_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, z0: 50, vf: 0.66}}
search: {{seed: 23}}
""",
        best_known=True,
        theory=_ceiling_theory,
    ),
]


# ---------------------------------------------------------------- methods


@dataclass
class Row:
    """One method's result on one case."""

    method: str
    margin_db: float | None
    worst_rl_db: float | None
    evaluations: int | None = None
    seconds: float | None = None
    note: str = ""


def worst_rl(problem: Problem, u: np.ndarray, choice: Choice) -> float:
    """Worst return loss (dB) over the grid of one design."""
    return float(np.min(problem.response(np.atleast_2d(u), choice).return_loss_db))


def all_choices(problem: Problem) -> list[Choice]:
    """Every combination of the network's discrete options."""
    space = problem.network.choice_space()
    names = [name for name, _, _ in space]
    return [problem.network.choice_from(dict(zip(names, combo, strict=True)))
            for combo in itertools.product(*(opts for _, _, opts in space))]


ours_design: list = [None]  # the last run's best design (for the ceiling check)


def run_ours(study: Study, dense: Problem | None) -> tuple[Row, int, float, float | None]:
    outcome = run_search(study, optuna.storages.InMemoryStorage())
    best = outcome.designs[0]
    ours_design[0] = best
    note = f"{outcome.trials_complete} trials"
    dense_rl = None
    if dense is not None:
        dense_rl = worst_rl(dense, best.vector(), best.choice)
        note += f"; worst RL {dense_rl:.3f} dB on a {dense.grid.freq.size}-point grid"
    row = Row("ours", best.margin_db, worst_rl(study.problem, best.vector(), best.choice),
              outcome.evaluations, outcome.elapsed_s, note)
    return row, outcome.evaluations, outcome.elapsed_s, dense_rl


def run_closed_form(study: Study) -> Row:
    problem = study.problem
    seeds = study_seeds(problem)
    if not seeds:
        return Row("closed form", None, None, 0, None, "no closed-form solution fits the network")
    margins = [float(problem.margins(s.u, s.choice)[0]) for s in seeds]
    k = int(np.argmax(margins))
    return Row("closed form", margins[k], worst_rl(problem, seeds[k].u, seeds[k].choice), len(seeds), None,
               f"best of {len(seeds)}: {seeds[k].origin}")


def run_scipy_de(study: Study, budget: int, seed: int) -> Row:
    problem = study.problem
    dim = problem.network.dim
    choices = all_choices(problem)
    share = max(budget // len(choices), 5)
    pop = min(15 * dim, share)  # scipy's default popsize (15 per coordinate)
    maxiter = max(math.ceil(share / pop) - 1, 0)
    rng = np.random.default_rng(seed)
    t0 = time.perf_counter()
    counted = 0
    best: tuple[float, np.ndarray, Choice] | None = None
    for choice in choices:
        def neg_margin(x: np.ndarray, choice: Choice = choice) -> np.ndarray:
            nonlocal counted
            u = np.atleast_2d(x.T)  # vectorised: x is (dim, S)
            counted += u.shape[0]
            return -problem.margins(u, choice)

        # Latin hypercube start of exactly ``pop`` rows (scipy's own init, with a fixed size)
        init = (rng.permuted(np.tile(np.arange(pop), (dim, 1)), axis=1).T + rng.random((pop, dim))) / pop
        res = differential_evolution(neg_margin, [(0.0, 1.0)] * dim, maxiter=maxiter, init=init, tol=0.0,
                                     atol=0.0, polish=False, vectorized=True, updating="deferred",
                                     rng=rng)
        if best is None or -res.fun > best[0]:
            best = (float(-res.fun), res.x, choice)
    assert best is not None
    note = (f"{len(choices)} choice combos x pop {pop} x {maxiter + 1} gens" if len(choices) > 1
            else f"pop {pop} x {maxiter + 1} gens")
    return Row("scipy DE", best[0], worst_rl(problem, best[1], best[2]), counted, time.perf_counter() - t0, note)


def run_optuna(study: Study, wall_s: float, seed: int) -> Row:
    problem = study.problem
    space = problem.network.choice_space()
    dim = problem.network.dim

    def objective(trial: optuna.Trial) -> float:
        picks = {name: trial.suggest_categorical(name, opts) for name, _, opts in space}
        u = np.array([[trial.suggest_float(f"u{k}", 0.0, 1.0) for k in range(dim)]])
        return float(problem.margins(u, problem.network.choice_from(picks))[0])

    ost = optuna.create_study(direction="maximize", sampler=optuna.samplers.TPESampler(seed=seed))
    t0 = time.perf_counter()
    ost.optimize(objective, timeout=wall_s)
    elapsed = time.perf_counter() - t0
    bt = ost.best_trial
    choice = problem.network.choice_from({name: bt.params[name] for name, _, _ in space})
    u = np.array([bt.params[f"u{k}"] for k in range(dim)])
    return Row("optuna TPE", bt.value, worst_rl(problem, u, choice), len(ost.trials), elapsed,
               f"{len(ost.trials)} trials")


def theory_row(study: Study, case: Case) -> Row | None:
    th = case.theory(study.problem)
    if th is None:
        return None
    need = float(np.max(study.problem.grid.min_rl_db))  # single-level masks in these cases
    return Row(f"theory: {th.label}", th.worst_rl_db - need, th.worst_rl_db, None, None, th.note)


# ---------------------------------------------------------------- shelf-constrained versions
#
# Each case again, built from the shelf: catalog cables, lengths cut in whole steps, stock pieces with
# counts, connector allowances.  Its continuous twin has the same cables, allowances and topology with
# free lengths (a stock stub's range covering the pieces), so the gap is what the shelf costs.

_SHELF_RG = """
name: bench-rl-{kind}
load: {{series_rlc: {{r: {r:g}, l: {l_nh:g}nH}}}}
mask: {{segments: [{{from: {lo:g}MHz, to: {hi:g}MHz, return_loss: 15, points: 41}}]}}
shelf:
  stock:
    semi-rigid-141: [{{length: 20mm, count: 1}}, {{length: 30mm, count: 1}}, {{length: 40mm, count: 1}},
                     {{length: 50mm, count: 1}}, {{length: 60mm, count: 1}}, {{length: 70mm, count: 1}},
                     {{length: 80mm, count: 1}}, {{length: 90mm, count: 1}}]
  allowances:
    sma_tee_arm: {{length: 6mm, vf: 0.70}}
network:
  elements:
    - line: {{length: {{min: 0deg, max: 180deg}}, cable: semi-rigid-141{cut}}}
    - shunt_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, cable: semi-rigid-141{cut},
                   allowances: [sma_tee_arm]}}
    - line: {{length: 45deg, cable: semi-rigid-141{cut}}}
    - shunt_stub: {{{stock_stub}, end: either, cable: semi-rigid-141, allowances: [sma_tee_arm]}}
    - line: {{length: 45deg, cable: semi-rigid-141{cut}}}
    - shunt_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, cable: semi-rigid-141{cut},
                   allowances: [sma_tee_arm]}}
search: {{trials: {trials}, seed: 4, population: 48, generations: 50}}
"""

_SHELF_RC = """
name: bench-rc-{kind}
load: {{parallel_rlc: {{r: {r:g}, c: {c_pf:g}pF}}}}
mask: {{segments: [{{from: {lo:g}MHz, to: {hi:g}MHz, return_loss: 15, points: 41}}]}}
network:
  elements:
    - line: {{length: {{min: 0deg, max: 180deg}}, cable: semi-rigid-141{cut}}}
    - shunt_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, cable: semi-rigid-141{cut}}}
    - line: {{length: 45deg, cable: semi-rigid-141{cut}}}
    - shunt_stub: {{length: {{min: 5deg, max: 180deg}}, end: either, cable: semi-rigid-141{cut}}}
search: {{trials: 10, seed: 5, population: 48, generations: 50}}
"""

_SHELF_TX = """
name: bench-transformer-{kind}
load: {{impedance: {zl:g}}}
system: {z0:g}
reference: {f0:g}Hz
mask: {{segments: [{{from: {flo:.6f}Hz, to: {fhi:.6f}Hz, return_loss: 25, points: 81}}]}}
shelf:
  cables:
    RG-62-class:   # 93-ohm air-spaced PE, typical of published datasheets, recalled from memory
      z0: 93
      z0_tolerance: 5
      vf: 0.84
      vf_tolerance: 0.02
      attenuation: [{{freq: 100MHz, db_per_100m: 10}}, {{freq: 1GHz, db_per_100m: 33}}]
      max_voltage: 1000
      max_power: {{watts: 200, freq: 100MHz}}
network:
  elements:
{sections}search: {{trials: 30, seed: 2, population: 32, generations: 40}}
"""
_TX_CABLES = "[RG-58-class, RG-59-class, RG-62-class]"


def _tx_text(kind: str) -> str:
    cut = ", cut: {step: 1mm, min: 5mm}" if kind == "shelf" else ""
    sections = "".join(f"    - line: {{length: {{min: 60deg, max: 120deg}}, cable: {_TX_CABLES}{cut}}}\n"
                       for _ in range(TX_N))
    return _SHELF_TX.format(kind=kind, zl=TX_ZL, z0=TX_Z0, f0=TX_F0, flo=TX_F0 * (1 - TX_BW / 2),
                            fhi=TX_F0 * (1 + TX_BW / 2), sections=sections)


def _rl_text(kind: str) -> str:
    shelf = kind == "shelf"
    return _SHELF_RG.format(kind=kind, r=RL_R, l_nh=RL_L * 1e9, lo=RL_LO / 1e6, hi=RL_HI / 1e6,
                            cut=", cut: {step: 1mm, min: 3mm}" if shelf else "",
                            stock_stub="stock: true" if shelf else "length: {min: 5deg, max: 180deg}",
                            trials=30 if shelf else 10)


def _rc_text(kind: str) -> str:
    return _SHELF_RC.format(kind=kind, r=RC_R, c_pf=RC_C * 1e12, lo=RC_LO / 1e6, hi=RC_HI / 1e6,
                            cut=", cut: {step: 1mm, min: 3mm}" if kind == "shelf" else "")


def _demo_continuous_text() -> str:
    """configs/demo_whip_shelf.yaml with free lengths: no cut steps, the stock stub free over its pieces."""
    text = (REPO / "configs" / "demo_whip_shelf.yaml").read_text(encoding="utf-8")
    text = text.replace(", cut: {step: 2mm, min: 10mm}", "")
    return text.replace("stock: true,", "length: {min: 5deg, max: 270deg},")


SHELF_CASES: list[tuple[str, Callable[[], str], Callable[[], str]]] = [
    ("transformer-N3 (cable choice, 1 mm cuts)", lambda: _tx_text("free"), lambda: _tx_text("shelf")),
    ("RL-triple-stub (1 mm cuts, stock stub, tees)", lambda: _rl_text("free"), lambda: _rl_text("shelf")),
    ("RC-double-stub (1 mm cuts)", lambda: _rc_text("free"), lambda: _rc_text("shelf")),
    ("demo-whip-shelf (configs/demo_whip_shelf.yaml)", _demo_continuous_text,
     lambda: (REPO / "configs" / "demo_whip_shelf.yaml").read_text(encoding="utf-8")),
]


def _shelf_margin(text: str, workdir: Path, name: str) -> tuple[float, float, Study, object]:
    path = workdir / f"{name}.yaml"
    path.write_text(text, encoding="utf-8")
    if "demo_whip" in text or "whip_uhf_invented" in text:
        path = REPO / "configs" / f"_bench_{name}.yaml"  # the demo's Touchstone path is relative to configs/
        path.write_text(text, encoding="utf-8")
    try:
        study = load_study(path)
    finally:
        if path.parent == REPO / "configs":
            path.unlink()
    outcome = run_search(study, optuna.storages.InMemoryStorage())
    return outcome.designs[0].margin_db, outcome.elapsed_s, study, outcome.designs[0]


def run_shelf(workdir: Path) -> list[tuple[str, float, float, float, float, bool]]:
    """Per case: (name, continuous margin, shelf margin, seconds free, seconds shelf, shelf rules kept)."""
    out = []
    for k, (name, free_text, shelf_text) in enumerate(SHELF_CASES):
        m_free, t_free, _, _ = _shelf_margin(free_text(), workdir, f"shelf{k}-free")
        m_shelf, t_shelf, study, best = _shelf_margin(shelf_text(), workdir, f"shelf{k}-shelf")
        net = study.problem.network
        ok = net.stock_shortage(best.choice) == 0
        vals = net.values(best.vector())
        for fp in net.free:
            el = net.elements[fp.element]
            if el.cut_step_m and fp.quantity == "length" and el.piece(best.choice.medium[fp.element]) is None:
                x = float(vals[fp.element]["length"][0]) / el.cut_step_m
                ok &= abs(x - round(x)) < 1e-6
        out.append((name, m_free, m_shelf, t_free, t_shelf, ok))
    return out


def print_shelf(rows: list[tuple[str, float, float, float, float, bool]]) -> None:
    print("\nshelf-constrained versions (same topology, cables and allowances; continuous lengths vs the shelf)")
    print(f"  {'case':<48} {'continuous dB':>13} {'shelf dB':>9} {'shelf - cont.':>13} {'time s':>11}  rules kept")
    for name, m_free, m_shelf, t_free, t_shelf, ok in rows:
        print(f"  {name:<48} {m_free:>13.3f} {m_shelf:>9.3f} {m_shelf - m_free:>+13.3f} "
              f"{t_free:>5.1f}/{t_shelf:<5.1f}  {'yes' if ok else 'NO'}")


# ---------------------------------------------------------------- runner


@dataclass
class CaseResult:
    case: Case
    study: Study
    rows: list[Row]
    wins: bool
    losses: list[str]
    dense_rl_db: float | None = None
    best_known_db: float | None = None
    ceiling_ok: bool | None = None  # the best design's dense-grid worst RL is within the exact ceiling


def ceiling_check(study: Study, u: np.ndarray, choice: Choice) -> bool | None:
    """True when the design's worst return loss on a 2001-point grid of the band is at most the
    exact Bode–Fano ceiling; None when the ceiling is an estimate or there is none."""
    fz = study.problem.feasibility()
    if fz.ceiling_return_loss_db is None or fz.basis != "exact":
        return None
    grid = build_grid([replace(study.problem.grid.segments[0], points=2001)])
    x = fz.values.get("c_f", fz.values.get("l_h"))
    zl = model_impedance(fz.model, fz.values["r_ohm"], x, grid.freq)
    problem = replace(study.problem, grid=grid, zload=zl)
    return worst_rl(problem, u, choice) <= fz.ceiling_return_loss_db + 1e-9


def run_case(case: Case, workdir: Path) -> CaseResult:
    study = case.load(workdir)
    ours, budget, wall, dense_rl = run_ours(study, case.dense(study.problem) if case.dense else None)
    rows = [ours, run_closed_form(study), run_scipy_de(study, budget, study.search.seed),
            run_optuna(study, wall, study.search.seed)]
    th = theory_row(study, case)
    if th is not None:
        rows.append(th)
    losses = [f"{r.method} by {r.margin_db - ours.margin_db:.3f} dB" for r in rows[1:4]
              if r.margin_db is not None and r.margin_db > (ours.margin_db or -np.inf) + TIE_DB]
    known = None
    if case.best_known and BEST_KNOWN.exists():
        known = json.loads(BEST_KNOWN.read_text(encoding="utf-8")).get(case.name, {}).get("margin_db")
    best = ours_design[0]
    return CaseResult(case, study, rows, not losses, losses, dense_rl, known,
                      ceiling_check(study, best.vector(), best.choice))


def _fmt(x: float | None, spec: str) -> str:
    return "-" if x is None else format(x, spec)


def print_case(res: CaseResult) -> None:
    pb = res.study.problem
    f = pb.grid.freq
    bw = (f.max() - f.min()) / pb.grid.centre * 100
    print(f"\n{res.case.name}: {f.min() / 1e6:.1f}-{f.max() / 1e6:.1f} MHz ({bw:.1f} % band, {f.size} points), "
          f"mask {float(np.max(pb.grid.min_rl_db)):g} dB, {len(pb.network.elements)} elements, "
          f"{pb.network.dim} free coordinates, {len(all_choices(pb))} choice combos")
    print(f"  {'method':<28} {'margin dB':>10} {'worst RL dB':>12} {'evaluations':>12} {'time s':>7}  note")
    for r in res.rows:
        print(f"  {r.method:<28} {_fmt(r.margin_db, '.3f'):>10} {_fmt(r.worst_rl_db, '.3f'):>12} "
              f"{_fmt(r.evaluations, ',d'):>12} {_fmt(r.seconds, '.1f'):>7}  {r.note}")


def print_best_known(results: list[CaseResult]) -> list[tuple[str, float]]:
    """Per multimodal case: our margin at the default budget, the best-known and the gap."""
    rows = [r for r in results if r.case.best_known]
    if not rows:
        return []
    print("\nmultimodal cases at the default budget against the best-known (benchmarks/best_known.json)")
    print(f"  {'case':<26} {'ours dB':>9} {'best-known dB':>14} {'gap dB':>8}")
    gaps = []
    for r in rows:
        ours = r.rows[0].margin_db
        if r.best_known_db is None or ours is None:
            print(f"  {r.case.name:<26} {_fmt(ours, '+.3f'):>9} {'-':>14} {'-':>8}  (run benchmarks/best_known.py)")
            continue
        gap = r.best_known_db - ours
        gaps.append((r.case.name, gap))
        print(f"  {r.case.name:<26} {ours:>+9.3f} {r.best_known_db:>+14.3f} {gap:>+8.3f}")
    return gaps


def main() -> None:
    warnings.simplefilter("ignore")
    print(f"machine: nproc {os.cpu_count()}, {cpu_model()}; python {sys.version.split()[0]}, numpy "
          f"{np.__version__}, scipy {scipy.__version__}, optuna {optuna.__version__}")
    t0 = time.perf_counter()
    results = []
    with tempfile.TemporaryDirectory() as tmp:
        for case in CASES + MULTIMODAL:
            res = run_case(case, Path(tmp))
            print_case(res)
            results.append(res)
        shelf_rows = run_shelf(Path(tmp))
        print_shelf(shelf_rows)
    gaps = print_best_known(results)
    checked = [r for r in results if r.ceiling_ok is not None]
    print(f"\nBode–Fano ceiling (exact, 2001-point grid): best design within it on "
          f"{sum(bool(r.ceiling_ok) for r in checked)}/{len(checked)} cases")
    print(f"\ntotal run time {time.perf_counter() - t0:.0f} s; load average {os.getloadavg()[0]:.2f}")
    wins = sum(r.wins for r in results)
    head = "search: "
    if gaps:
        name, gap = max(gaps, key=lambda g: g[1])
        head += (f"worst gap to best-known {max(gap, 0.0):.3f} dB ({name}; "
                 f"{sum(g <= 0.05 for _, g in gaps)}/{len(gaps)} cases within 0.05 dB); ")
    head += f"ours >= every baseline on {wins}/{len(results)} cases"
    losing = [f"{r.case.name} (behind {', '.join(r.losses)})" for r in results if not r.wins]
    if losing:
        head += f" [loses on {'; '.join(losing)}]"
    for r in results:
        if r.case.chebyshev:
            ours_rl = r.dense_rl_db if r.dense_rl_db is not None else r.rows[0].worst_rl_db
            gap = r.rows[-1].worst_rl_db - ours_rl
            where = "dense-grid " if r.dense_rl_db is not None else ""
            head += (f"; transformer {where}worst RL within {max(gap, 0.0):.3f} dB of the Chebyshev optimum"
                     + (f" ({-gap:.3f} dB above it)" if gap < 0 else ""))
    worst = min(shelf_rows, key=lambda r: r[2] - r[1])
    demo = next(r for r in shelf_rows if r[0].startswith("demo"))
    head += (f"; shelf: constrained margin at most {max(0.0, worst[1] - worst[2]):.2f} dB below continuous "
             f"(worst {worst[0].split(' ')[0]}), demo {demo[1] - demo[2]:.2f} dB below, "
             f"shelf rules kept on {sum(r[5] for r in shelf_rows)}/{len(shelf_rows)}")
    print(head)


if __name__ == "__main__":
    main()
