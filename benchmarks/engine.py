"""Engine speed: candidate evaluations per second, against scikit-rf's object cascade.

Run: python benchmarks/engine.py [--candidates 20000] [--designs 100]

Networks (elements from the load outwards, 201 frequency points, invented load):
  3 elements: line, shunt stub, line
  6 elements: line, shunt stub, line, shunt stub, line, series stub
Our engine evaluates many candidates in one call (worst |Γ|² per candidate, chunked).
scikit-rf builds each candidate's DefinedGammaZ0 networks and cascades them with ``**`` onto
the load, as a search through scikit-rf would have to.  The last line printed is
``engine speedup vs scikit-rf: <ratio>x`` with the smaller of the two ratios.
"""

from __future__ import annotations

import argparse
import os
import time
import tracemalloc
import warnings

import numpy as np
import skrf
from machine import best_time, cpu_model

from optmatch.engine import Stage, evaluate_reduced, worst_gamma_sq

C0 = 299_792_458.0
FREQ = np.linspace(400e6, 480e6, 201)
ZLOAD = 28.0 - 41.0j + 0.3 * (FREQ - 440e6) / 1e6 * (1 + 1j)  # invented drifting load, Ω

LINE, SHUNT, SERIES = Stage("line"), Stage("stub", "shunt"), Stage("stub", "series")
NETWORKS = {
    3: [LINE, SHUNT, LINE],
    6: [LINE, SHUNT, LINE, SHUNT, LINE, SERIES],
}


def random_params(stages, n: int, rng: np.random.Generator) -> list[dict]:
    params = []
    for st in stages:
        p = {"z0": rng.uniform(25.0, 120.0, n), "delay": rng.uniform(0.05e-9, 2.5e-9, n)}
        if st.kind == "stub":
            p["short"] = rng.random(n) < 0.5
        params.append(p)
    return params


def skrf_worst(stages, params, j: int) -> float:
    """Build candidate ``j`` with scikit-rf and return its worst |Γ|² over the grid."""
    freq = skrf.Frequency.from_f(FREQ, unit="Hz")
    gamma = 1j * 2 * np.pi * FREQ / C0
    main = skrf.media.DefinedGammaZ0(freq, z0_port=50.0, z0=50.0, gamma=gamma)
    net = main.load((ZLOAD - 50.0) / (ZLOAD + 50.0))
    for st, p in zip(stages, params, strict=True):
        med = skrf.media.DefinedGammaZ0(freq, z0_port=50.0, z0=p["z0"][j], gamma=gamma)
        length = p["delay"][j] * C0
        if st.kind == "line":
            el = med.line(length, "m")
        else:
            stub = med.delay_short(length, "m") if p["short"][j] else med.delay_open(length, "m")
            el = main.shunt(stub) if st.connection == "shunt" else main.resistor(stub.z[:, 0, 0])
        net = el**net
    return float(np.max(np.abs(net.s[:, 0, 0]) ** 2))



def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--candidates", type=int, default=20000, help="engine batch size")
    ap.add_argument("--designs", type=int, default=100, help="designs built and cascaded with scikit-rf")
    ap.add_argument("--million", type=int, default=1_000_000, help="candidates for the memory run")
    args = ap.parse_args()
    warnings.simplefilter("ignore")
    rng = np.random.default_rng(1)

    print(f"machine: {os.cpu_count()} CPUs, {cpu_model()}; numpy {np.__version__}, scikit-rf {skrf.__version__}")
    print(f"grid: {FREQ.size} points; engine batch {args.candidates}; scikit-rf designs {args.designs}")
    print()
    print(f"{'network':>9} {'engine evals/s':>15} {'µs/eval':>9} {'skrf evals/s':>13} {'µs/eval':>9} {'speedup':>8}")
    ratios = []
    for n_elem, stages in NETWORKS.items():
        params = random_params(stages, args.candidates, rng)
        worst_gamma_sq(stages, params, FREQ, ZLOAD)  # warm-up
        t_engine = best_time(lambda stages=stages, params=params: worst_gamma_sq(stages, params, FREQ, ZLOAD), 3)
        eng_rate = args.candidates / t_engine

        # check both agree on the designs timed with scikit-rf before trusting the timings
        ref = worst_gamma_sq(stages, params, FREQ, ZLOAD)
        for j in range(3):
            assert abs(skrf_worst(stages, params, j) - ref[j]) < 1e-9, "engine and scikit-rf disagree"

        def run_skrf(stages=stages, params=params):
            for j in range(args.designs):
                skrf_worst(stages, params, j)

        t_skrf = best_time(run_skrf, 2)
        skrf_rate = args.designs / t_skrf
        ratio = eng_rate / skrf_rate
        ratios.append(ratio)
        print(
            f"{n_elem:>7}-el {eng_rate:>15,.0f} {1e6 / eng_rate:>9.2f} {skrf_rate:>13,.0f} "
            f"{1e6 / skrf_rate:>9.1f} {ratio:>7.0f}x"
        )

    # memory: a million candidates of the 3-element network, only the worst |Γ|² kept
    stages = NETWORKS[3]
    params = random_params(stages, args.million, rng)
    input_mb = sum(np.asarray(v).nbytes for p in params for v in p.values()) / 2**20
    tracemalloc.start()
    t0 = time.perf_counter()
    worst = evaluate_reduced(stages, params, FREQ, ZLOAD, reducer=lambda r: np.max(r.gamma_sq, axis=1))
    elapsed = time.perf_counter() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print()
    print(
        f"memory: {args.million:,} candidates x 3 elements x {FREQ.size} points with evaluate_reduced: "
        f"peak {peak / 2**20:.1f} MiB traced during the call (inputs {input_mb:.1f} MiB, result "
        f"{worst.nbytes / 2**20:.1f} MiB), {elapsed:.1f} s under tracemalloc"
    )
    print(f"engine speedup vs scikit-rf: {min(ratios):.0f}x")


if __name__ == "__main__":
    main()
