"""Exact derivatives of the cascade: against central differences and closed-form identities."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from optmatch.domain.network import Choice
from optmatch.domain.optimise import minimax_polish, minimax_polish_exact
from optmatch.engine import Stage
from optmatch.engine.derivatives import walk_tangents
from optmatch.studyfile.loader import load_study

F = np.linspace(0.9e9, 1.1e9, 21)
W = 2 * np.pi * F


def _study(tmp_path: Path, text: str):
    path = tmp_path / "study.yaml"
    path.write_text(text)
    return load_study(path)


# Our own test network: every element kind, a free Z0, log-spaced lumped values, a lossy cable, a
# network-loss limit (so the loss branch of the shortfall is exercised) and a length tie-break.
EVERY_KIND = """
load: {impedance: 22-31j}
mask:
  segments:
    - {from: 900MHz, to: 1000MHz, return_loss: 12, max_loss: 0.05 dB, points: 15}
    - {from: 1000MHz, to: 1100MHz, return_loss: 14, points: 15}
network:
  elements:
    - lumped: {connection: series, part: l, value: {min: 1nH, max: 20nH}}
    - line: {length: {min: 10deg, max: 170deg}, cable: RG-58-class}
    - shunt_stub: {length: {min: 5deg, max: 175deg}, end: either, z0: 50, vf: 0.66}
    - lumped: {connection: shunt, part: c, value: {min: 0.2pF, max: 5pF}}
    - line: {length: {min: 10deg, max: 170deg}, z0: {min: 25, max: 110}}
    - series_stub: {length: {min: 5deg, max: 175deg}, end: either, z0: 75, vf: 0.8}
    - lumped: {connection: series, part: r, value: {min: 0.1, max: 3}}
"""


@pytest.mark.parametrize("ends", [(False, False), (True, True), (False, True)])
def test_shortfall_gradient_matches_central_differences(tmp_path, ends):
    # Reference: central differences of the plain engine's shortfalls (identity: the derivative's
    # definition), step 1e-6 in the unit cube, for every element kind and both stub ends.
    pb = _study(tmp_path, EVERY_KIND).problem
    short = [False] * 7
    short[2], short[5] = ends
    choice = Choice((0,) * 7, tuple(short))
    rng = np.random.default_rng(5)
    u = rng.uniform(0.1, 0.9, (6, pb.network.dim))
    vals, grads = pb.shortfalls_and_grad(u, choice, 0.3)
    ref = pb.shortfalls_db(u, choice) + 0.3 * pb.length_wl(u, choice)[:, None]
    np.testing.assert_allclose(vals, ref, atol=1e-10)
    h = 1e-6
    for j in range(pb.network.dim):
        e = np.zeros(pb.network.dim)
        e[j] = h
        up = pb.shortfalls_db(u + e, choice) + 0.3 * pb.length_wl(u + e, choice)[:, None]
        down = pb.shortfalls_db(u - e, choice) + 0.3 * pb.length_wl(u - e, choice)[:, None]
        fd = (up - down) / (2 * h)
        np.testing.assert_allclose(grads[:, :, j], fd, rtol=1e-5, atol=1e-5 * np.max(np.abs(fd)))


def test_lossless_line_turns_gamma_at_minus_two_j_omega():
    # Pozar, Microwave Engineering, 4th ed., sec. 2.3 (recalled from memory): on a lossless line
    # matched to the system impedance, Γ(ℓ) = Γ_L·exp(−2jβℓ), so dΓ/dτ = −2jω·Γ and |Γ| is constant.
    zl = 80 - 35j
    tau = np.array([0.3e-9, 1.7e-9])
    p = [{"z0": 50.0, "delay": tau, "d_delay": np.ones((1, 2))}]
    tr = walk_tangents([Stage("line")], p, F, zl, 2, 1, 50.0)
    g = tr.gamma
    np.testing.assert_allclose(tr.dgamma[0], -2j * W * g, rtol=1e-12)
    _, dg2 = tr.gamma_sq_and_grad()
    np.testing.assert_allclose(dg2, 0.0, atol=1e-12 * np.max(W))


def test_series_inductor_derivative_is_closed_form():
    # Identity: Zin = ZL + jωL (X = 2πfL), Γ = (Zin − Zs)/(Zin + Zs), so dΓ/dL = 2·Zs·jω/(Zin + Zs)².
    zl, l_h, zs = 30 + 10j, 12e-9, 50.0
    p = [{"value": l_h, "d_value": np.array([[1.0]])}]
    tr = walk_tangents([Stage("lumped", "series", "l")], p, F, zl, 1, 1, zs)
    zin = zl + 1j * W * l_h
    np.testing.assert_allclose(tr.gamma[0], (zin - zs) / (zin + zs), rtol=1e-12)
    np.testing.assert_allclose(tr.dgamma[0, 0], 2 * zs * 1j * W / (zin + zs) ** 2, rtol=1e-10)


def test_shunt_open_stub_derivative_is_closed_form():
    # Open stub of Z0 and delay τ: Y = j·tan(ωτ)/Z0 (Pozar, 4th ed., sec. 2.3, recalled from memory),
    # shunted across a matched load: Yin = 1/Zs + Y, Γ = (1 − Zs·Yin)/(1 + Zs·Yin) = −Zs·Y/(2 + Zs·Y).
    # dY/dτ = j·ω·sec²(ωτ)/Z0 and dΓ/dY = −2·Zs/(2 + Zs·Y)².
    zs, z0, tau = 50.0, 70.0, 0.2e-9
    p = [{"z0": z0, "delay": tau, "short": False, "d_delay": np.array([[1.0]])}]
    tr = walk_tangents([Stage("stub", "shunt")], p, F, zs, 1, 1, zs)
    y = 1j * np.tan(W * tau) / z0
    np.testing.assert_allclose(tr.gamma[0], -zs * y / (2 + zs * y), rtol=1e-10)
    dy = 1j * W / np.cos(W * tau) ** 2 / z0
    np.testing.assert_allclose(tr.dgamma[0, 0], -2 * zs / (2 + zs * y) ** 2 * dy, rtol=1e-9)


def test_exact_polish_is_no_worse_than_forward_differences(tmp_path):
    # Both polishes minimise the same worst shortfall from the same starts near the best point of a
    # 41³ grid (as a population search hands them over): the exact-gradient one must reach the
    # forward-difference result (our own reactive load and double stub).
    pb = _study(tmp_path, """
load: {series_rlc: {r: 18, l: 22nH}}
mask: {segments: [{from: 430MHz, to: 520MHz, return_loss: 12}]}
network: {template: double_stub, spacing: 45deg, end: short}
""").problem
    choice = pb.network.default_choice()
    axis = np.linspace(0.0, 1.0, 41)
    grid = np.stack(np.meshgrid(axis, axis, axis, indexing="ij"), -1).reshape(-1, 3)
    best = grid[np.argmax(pb.margins(grid, choice))]
    starts = np.clip(best + np.random.default_rng(2).uniform(-0.02, 0.02, (4, pb.network.dim)), 0, 1)

    def shortfall(u):
        return pb.shortfalls_db(u, choice)

    def shortfall_grad(u):
        return pb.shortfalls_and_grad(u, choice)

    exact, _ = minimax_polish_exact(shortfall, shortfall_grad, starts)
    for a in range(len(starts)):
        old, _ = minimax_polish(shortfall, starts[a])
        new_worst = np.max(shortfall(exact[a][None, :]))
        assert new_worst <= np.max(shortfall(starts[a][None, :]))  # never worse than the start
        assert new_worst <= np.max(shortfall(old[None, :])) + 1e-3
