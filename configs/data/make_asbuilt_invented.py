"""Generate the INVENTED bench measurement of the demo design as built (configs/data/).

Not a measurement of anything: design #1 of the demo study, as `optmatch run configs/demo_whip.yaml`
writes it to results/demo-whip/, "built" with invented errors (below) and cascaded by scikit-rf (not by
optmatch's engine) onto the invented whip data, plus seeded noise.  The search is seeded, so the demo
always finds the same design; if the search changes, regenerate with one command from the project root:

    optmatch run configs/demo_whip.yaml && python configs/data/make_asbuilt_invented.py

Then `optmatch trim results/demo-whip --measured configs/data/demo_whip_asbuilt_invented.s1p`.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import numpy as np
import skrf

from optmatch.cli.trim import read_results, study_load
from optmatch.domain.design import describe
from optmatch.io.touchstone import write_touchstone
from optmatch.units import C0

ROOT = Path(__file__).resolve().parents[2]
RESULTS = ROOT / "results" / "demo-whip"
OUT = Path(__file__).with_name("demo_whip_asbuilt_invented.s1p")

# The invented build, element by element from the load (mm; + = longer than designed): the open stub
# cut 5 mm long as the cut list advises, the others cut to about a millimetre, the reel's velocity
# factor 1 % low and its Z0 1 % high.
CUT_ERRORS_MM = {0: -0.6, 1: 5.0, 2: 0.4, 3: -0.8}
VF_SCALE = -0.01
Z0_SCALE = 0.01
NOISE = 0.0015  # per real and imaginary part (invented)
SWEEP_HZ = np.arange(400e6, 470e6 + 1.0, 0.5e6)
SEED = 20261215


def main() -> int:
    if not (RESULTS / "summary.json").is_file():
        print(f"{RESULTS}: not found; run `optmatch run configs/demo_whip.yaml` first", file=sys.stderr)
        return 2
    os.chdir(ROOT)  # the study file path in summary.json is relative to the project root
    built = read_results(RESULTS, 1)
    problem = built.study.problem
    load, _ = study_load(built.study)
    f = skrf.Frequency.from_f(SWEEP_HZ, unit="Hz")
    zl = load(SWEEP_HZ)
    net = skrf.Network(frequency=f, s=((zl - problem.z_sys) / (zl + problem.z_sys)).reshape(-1, 1, 1),
                       z0=problem.z_sys)
    notes = []
    for rep in describe(problem, built.design):
        assert rep.kind in ("line", "shunt_stub")
        assert rep.physical_m is not None and rep.vf is not None and rep.z0_ohm is not None
        err = CUT_ERRORS_MM.get(rep.index, 0.0)
        length = rep.physical_m + err * 1e-3
        vf = rep.vf * (1 + VF_SCALE)
        media = skrf.media.DefinedGammaZ0(f, z0_port=problem.z_sys, z0=rep.z0_ohm * (1 + Z0_SCALE),
                                          gamma=1j * 2 * np.pi * SWEEP_HZ / (vf * C0))
        if rep.kind == "line":
            el = media.line(length, unit="m")
        elif rep.end == "open":
            el = media.shunt_delay_open(length, unit="m")
        else:
            el = media.shunt_delay_short(length, unit="m")
        net = el ** net
        part = "line" if rep.kind == "line" else f"{rep.end} shunt stub"
        notes.append(f"element {rep.index + 1}, {part}: designed {rep.physical_m * 1e3:.1f} mm, "
                     f"built {length * 1e3:.1f} mm ({err:+.1f} mm)")
    rng = np.random.default_rng(SEED)
    gamma = net.s[:, 0, 0] + NOISE * (rng.normal(size=SWEEP_HZ.size) + 1j * rng.normal(size=SWEEP_HZ.size))
    header = [
        "INVENTED DATA for the optmatch demo: not a measurement of any real network or antenna.",
        "An invented bench sweep of design #1 of results/demo-whip (configs/demo_whip.yaml) as built,",
        "made by configs/data/make_asbuilt_invented.py with scikit-rf. The invented build errors:",
        *notes,
        f"cable velocity factor {VF_SCALE:+.0%}, cable Z0 {Z0_SCALE:+.0%}, noise {NOISE} per part, seed {SEED}.",
    ]
    write_touchstone(OUT, SWEEP_HZ, gamma, problem.z_sys, comment_lines=header)
    print(OUT.relative_to(ROOT), SWEEP_HZ.size, "points")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
