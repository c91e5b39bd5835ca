"""Cable attenuation model: fit identities and the engine's lossy line against scikit-rf."""

from __future__ import annotations

import math

import numpy as np
import pytest
import skrf

from optmatch.domain.line_loss import (
    NEPER_PER_DB,
    LineLossError,
    attenuation_db_per_100m,
    fit_loss_one_point,
    fit_loss_two_point,
    line_loss_params,
)
from optmatch.engine import Stage, evaluate

C0 = 299_792_458.0
FREQ = np.linspace(50e6, 1.5e9, 59)
# invented data-sheet figures for a foam coax (dB/100 m)
F1, A1, F2, A2 = 100e6, 4.5, 1e9, 16.0


def test_two_point_fit_reproduces_both_points():
    kc, kd = fit_loss_two_point(F1, A1, F2, A2)
    assert kc > 0 and kd > 0
    a = attenuation_db_per_100m(np.array([F1, F2]), kc, kd)
    np.testing.assert_allclose(a, [A1, A2], rtol=1e-12)  # identity: the fit passes through its data


def test_one_point_fit_is_pure_conductor_loss():
    kc, kd = fit_loss_one_point(F1, A1)
    assert kd == 0.0
    assert attenuation_db_per_100m(np.array([F1]), kc, kd)[0] == pytest.approx(A1, rel=1e-12)  # identity
    # pure skin-effect loss grows as √f: four times the frequency, twice the dB (common practice, no source)
    assert attenuation_db_per_100m(np.array([4 * F1]), kc, kd)[0] == pytest.approx(2 * A1, rel=1e-12)


def test_neper_conversion():
    # 1 Np = 20/ln(10) dB ≈ 8.686 dB (definitions of neper and decibel, ISO 80000-3, recalled from memory)
    assert 1.0 / NEPER_PER_DB == pytest.approx(8.685889638, rel=1e-9)
    loss_c, loss_d = line_loss_params(250.0, 2.0, 3.0)
    assert loss_c == pytest.approx(2.0 * 2.5 * math.log(10) / 20, rel=1e-15)  # identity: 250 m = 2.5 × 100 m
    assert loss_d == pytest.approx(3.0 * 2.5 * math.log(10) / 20, rel=1e-15)
    lc, ld = line_loss_params(np.array([100.0, 200.0]), 1.0, 0.0)
    np.testing.assert_allclose(lc, [NEPER_PER_DB, 2 * NEPER_PER_DB], rtol=1e-15)  # per-candidate lengths
    np.testing.assert_array_equal(ld, [0.0, 0.0])


def _skrf_line(freq, length_m, vf, z0, kc, kd):
    alpha = attenuation_db_per_100m(freq, kc, kd) / 100.0 * math.log(10) / 20  # Np/m
    gamma = alpha + 1j * 2 * np.pi * freq / (vf * C0)
    med = skrf.media.DefinedGammaZ0(skrf.Frequency.from_f(freq, unit="Hz"), z0_port=50.0, z0=z0, gamma=gamma)
    return med, med.line(length_m, "m")


@pytest.mark.parametrize("length_m", [0.7, 12.0, 85.0])
def test_matched_lossy_line_loss_matches_skrf(length_m):
    kc, kd = fit_loss_two_point(F1, A1, F2, A2)
    loss_c, loss_d = line_loss_params(length_m, kc, kd)
    vf = 0.83
    params = [{"z0": 50.0, "delay": length_m / (vf * C0), "loss_c": loss_c, "loss_d": loss_d}]
    res = evaluate([Stage("line")], params, FREQ, 50.0)
    _, line = _skrf_line(FREQ, length_m, vf, 50.0, kc, kd)
    ref_db = -20 * np.log10(np.abs(line.s[:, 1, 0]))
    np.testing.assert_allclose(res.network_loss_db[0], ref_db, rtol=0, atol=1e-9)  # scikit-rf as reference
    # and the data-sheet figure scaled by length (identity of the model)
    np.testing.assert_allclose(ref_db, attenuation_db_per_100m(FREQ, kc, kd) * length_m / 100, rtol=1e-9)


def test_mismatched_lossy_line_matches_skrf():
    kc, kd = fit_loss_two_point(F1, A1, F2, A2)
    length_m, vf, z0, zl = 7.3, 0.66, 75.0, 20.0 - 35.0j
    loss_c, loss_d = line_loss_params(length_m, kc, kd)
    params = [{"z0": z0, "delay": length_m / (vf * C0), "loss_c": loss_c, "loss_d": loss_d}]
    res = evaluate([Stage("line")], params, FREQ, zl)
    med, line = _skrf_line(FREQ, length_m, vf, z0, kc, kd)
    ref = (line ** med.load((zl - 50) / (zl + 50))).s[:, 0, 0]
    np.testing.assert_allclose(res.gamma[0], ref, rtol=0, atol=1e-9)  # scikit-rf as an independent reference


@pytest.mark.parametrize(
    ("args", "word"),
    [
        ((100e6, 4.5, 100e6, 6.0), "share the frequency"),
        ((100e6, 4.5, 1e9, 5.0), "slower than √f"),
        ((100e6, 1.0, 1e9, 20.0), "faster than f"),
        ((-1.0, 4.5, 1e9, 16.0), "positive"),
        ((100e6, -4.5, 1e9, 16.0), "non-negative"),
    ],
)
def test_unusable_figures_are_one_line_errors(args, word):
    with pytest.raises(LineLossError) as err:
        fit_loss_two_point(*args)
    assert word in str(err.value) and "\n" not in str(err.value)
