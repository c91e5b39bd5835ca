"""Tolerance Monte Carlo and sensitivities of a design."""

from __future__ import annotations

import math

import numpy as np

from optmatch.domain.design import Design
from optmatch.domain.mask import Segment, build_grid
from optmatch.domain.network import Bound, Choice, ElementSpec, Medium, NetworkSpec
from optmatch.domain.problem import Problem
from optmatch.domain.tolerance import Spread, monte_carlo, sensitivities
from optmatch.units import C0

F0 = 1e9


def _quarter_wave(min_rl_db: float, z0_tol: float = 0.0) -> tuple[Problem, Design]:
    """A λ/4 section of √(50·100) Ω between a 100 Ω load and 50 Ω, at one frequency."""
    z1 = math.sqrt(50.0 * 100.0)
    quarter_m = 0.25 * C0 / F0
    el = ElementSpec("line", Bound(quarter_m, quarter_m), length_basis="physical",
                     media=(Medium(z1, 1.0, z0_tol_rel=z0_tol),))
    net = NetworkSpec((el,))
    problem = Problem("qw", 50.0, build_grid([Segment(F0, F0, min_rl_db)]), np.array([100.0 + 0j]), net, F0)
    choice = Choice((0,), (False,))
    margin = float(problem.margins(np.zeros((1, 0)), choice)[0])
    return problem, Design(choice, (), margin, 0.25)


def test_no_spread_reproduces_the_nominal_design():
    # Identity: with every tolerance zero each build is the design itself.
    problem, design = _quarter_wave(30.0)
    rob = monte_carlo(problem, design, Spread(cut_m=0.0, z0_rel=0.0, vf_rel=0.0, samples=50))
    assert rob.yield_frac == 1.0
    assert rob.margin_min_db == rob.margin_p50_db == design.margin_db


def test_z0_spread_yield_matches_the_closed_form():
    # Quarter-wave transformer: Zin = Z1²/ZL (Pozar, Microwave Engineering, 4th ed., sec. 2.5), so
    # |Γ| ≤ g holds for Z1² within Z0·ZL·[(1−g)/(1+g), (1+g)/(1−g)].  With Z1 uniform in ±δ the yield
    # is the share of that interval: a formula to compare the Monte Carlo with.
    min_rl, delta, n = 30.0, 0.05, 20000
    problem, design = _quarter_wave(min_rl)
    g = 10 ** (-min_rl / 20)
    z1 = math.sqrt(5000.0)
    lo, hi = math.sqrt(5000.0 * (1 - g) / (1 + g)), math.sqrt(5000.0 * (1 + g) / (1 - g))
    expected = (min(hi, z1 * (1 + delta)) - max(lo, z1 * (1 - delta))) / (2 * delta * z1)
    rob = monte_carlo(problem, design, Spread(cut_m=0.0, z0_rel=delta, vf_rel=0.0, samples=n, seed=3))
    sigma = math.sqrt(expected * (1 - expected) / n)
    assert abs(rob.yield_frac - expected) < 4 * sigma + 1e-9


def test_cable_tolerances_are_used_unless_overridden():
    problem, design = _quarter_wave(30.0, z0_tol=0.05)
    from_cable = monte_carlo(problem, design, Spread(cut_m=0.0, vf_rel=0.0, samples=4000, seed=1))
    overridden = monte_carlo(problem, design, Spread(cut_m=0.0, z0_rel=0.0, vf_rel=0.0, samples=100))
    assert from_cable.yield_frac < 1.0  # the cable's ±5 % Z0 costs builds
    assert overridden.yield_frac == 1.0


def test_length_sensitivity_equals_a_direct_difference():
    # Identity: the reported slope (dB per mm) equals the margin difference of the same design
    # re-evaluated with the stub 0.5 mm longer and shorter through the network's own parameters.
    span = 0.2
    line = ElementSpec("line", Bound(0.0, span), length_basis="physical")
    stub = ElementSpec("shunt_stub", Bound(0.0, span), length_basis="physical", end="short")
    net = NetworkSpec((line, stub))
    problem = Problem("s", 50.0, build_grid([Segment(0.9e9, 1.1e9, 15.0)]),
                      np.full(41, 30.0 - 40j), net, F0)
    choice = Choice((0, 0), (False, True))
    u = np.array([[0.2, 0.3]])
    design = Design(choice, tuple(u[0]), float(problem.margins(u, choice)[0]), 0.0)
    sens = sensitivities(problem, design)
    h = 0.5e-3 / span
    up, down = u.copy(), u.copy()
    up[0, 1] += h
    down[0, 1] -= h
    direct = (problem.margins(up, choice)[0] - problem.margins(down, choice)[0]) / 1.0  # per mm
    assert np.isclose(sens[1].db_per_mm, direct, rtol=1e-6, atol=1e-9)


def test_batched_builds_equal_the_single_design_builds():
    # Identity: the batched perturbation (many designs × the same draws) gives, row for row, the
    # builds of each design perturbed on its own.
    from optmatch.domain.tolerance import draw_errors, perturbed_batch, perturbed_params, yield_scores

    span = 0.2
    line = ElementSpec("line", Bound(0.0, span), length_basis="physical", media=(Medium(50.0, 0.7),))
    stub = ElementSpec("shunt_stub", Bound(0.01, span), length_basis="physical", end="short",
                       media=(Medium(50.0, 0.7, z0_tol_rel=0.03, vf_tol_rel=0.02),))
    net = NetworkSpec((line, stub))
    problem = Problem("s", 50.0, build_grid([Segment(0.9e9, 1.1e9, 15.0)]), np.full(41, 30.0 - 40j), net, F0)
    choice = Choice((0, 0), (False, True))
    u = np.array([[0.2, 0.3], [0.6, 0.1], [0.9, 0.8]])
    draws = draw_errors(problem, choice, Spread(cut_m=1e-3), 17, np.random.default_rng(4))
    batch = problem.margins_of(perturbed_batch(problem, u, choice, draws)).reshape(3, 17)
    for a in range(3):
        design = Design(choice, tuple(u[a]), 0.0, 0.0)
        single = problem.margins_of(perturbed_params(problem, design, draws.cut_m, draws.vf_rel, draws.z0_rel,
                                                     draws.value_rel))
        np.testing.assert_allclose(batch[a], single, rtol=0, atol=1e-12)
    y, p10 = yield_scores(problem, u, choice, draws)
    np.testing.assert_allclose(y, np.mean(batch >= 0, axis=1))
    np.testing.assert_allclose(p10, np.percentile(batch, 10, axis=1))
