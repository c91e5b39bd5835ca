"""Explorer tuning: what one move of a control costs in the server, against one plain curve evaluation.

Run: python benchmarks/explorer.py [--repeats 20]

The demo whip study (configs/demo_whip.yaml, invented data, 41 grid points) is loaded and its
closed-form seed at the reference frequency taken as the design (no search needed).  One tuning update
is what the explorer computes per move: the controls, the tuned design (mm mapped back onto the search
vector), its curve (``performance``) and its yield (500 Monte Carlo builds plus the sensitivities).
The peer is one ``performance`` call of the same design in the same run.  Best of ``--repeats`` each.
The last line printed is ``explorer tuning update: <ms> ms per move (<ratio>x one curve evaluation)``.
"""

from __future__ import annotations

import argparse
import os
from pathlib import Path

import numpy as np
from machine import best_time, cpu_model

from optmatch.domain.design import Design, performance
from optmatch.explorer import tuning
from optmatch.running.search import study_seeds
from optmatch.studyfile.loader import load_study

ROOT = Path(__file__).resolve().parents[1]



def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=20)
    args = parser.parse_args()
    study = load_study(ROOT / "configs" / "demo_whip.yaml")
    problem = study.problem
    seed = study_seeds(problem)[0]
    u = np.clip(np.asarray(seed.u, dtype=float), 0.0, 1.0)
    design = Design(seed.choice, tuple(u), float(problem.margins(u, seed.choice)[0]),
                    float(problem.length_wl(u, seed.choice)[0]))
    stub = next(c for c in tuning.controls(problem, design) if c.free and "stub" in c.label)
    step = [0.0]

    def move() -> None:
        step[0] = -step[0] + 0.5  # alternate between two lengths, as a slider going back and forth
        controls = tuning.controls(problem, design)
        moved = tuning.tuned(problem, design, {stub.key: stub.value + step[0]})
        tuning.evaluate(problem, moved, study.spread)
        assert controls

    def curve() -> None:
        performance(problem, design)

    t_move = best_time(move, args.repeats)
    t_curve = best_time(curve, args.repeats)
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"machine: {os.cpu_count()} CPUs, {cpu_model()}; load average {load:.2f}")
    print(f"grid: {problem.grid.freq.size} points; Monte Carlo builds per move: {study.spread.samples}")
    print(f"one curve evaluation (performance): {t_curve * 1e3:.2f} ms")
    print(f"one tuning update (controls, tuned design, curve, yield, sensitivities): {t_move * 1e3:.2f} ms")
    print(f"explorer tuning update: {t_move * 1e3:.1f} ms per move ({t_move / t_curve:.0f}x one curve evaluation)")


if __name__ == "__main__":
    main()
