"""Voltage, current and heat along a driven design: closed-form standing waves, power balance, and
the rating check."""

from __future__ import annotations

import math

import numpy as np
import pytest

from optmatch.domain.power import check_ratings, drive
from optmatch.engine import Stage, evaluate
from optmatch.io.catalog import shipped_catalog

F = np.array([300e6, 435e6, 500e6])
P = 100.0


def test_open_stub_voltage_is_the_standing_wave_closed_form():
    # a shunt open stub across a 50 Ω load, fed from a 50 Ω source
    zl, z0, tau = 50.0, 50.0, 0.1 / 435e6  # 0.1 λ at 435 MHz
    res = drive([Stage("stub", "shunt")], [{"z0": z0, "delay": tau, "short": False}], F, zl, 50.0, P)
    sec = res.sections[0]
    beta_l = 2 * np.pi * F * tau
    z_stub = -1j * z0 / np.tan(beta_l)
    z_in = zl * z_stub / (zl + z_stub)
    v_junction = np.abs(math.sqrt(8 * 50.0 * P) * z_in / (z_in + 50.0))
    # lossless open stub: |V(z)| = |V_end|·|cos βz| (z from the open end), so |V_end| = |V_j| / |cos βℓ| and
    # the maximum sits at the open end while βℓ < 90° (Pozar, Microwave Engineering, 4th ed., sec. 2.3,
    # standing waves on a terminated line; recalled from memory)
    np.testing.assert_allclose(sec.open_end_v, v_junction / np.abs(np.cos(beta_l)), rtol=1e-9)
    np.testing.assert_allclose(sec.voltage_v, sec.open_end_v, rtol=1e-9)
    np.testing.assert_allclose(sec.dissipated_w, 0.0, atol=1e-9)  # identity: a lossless stub takes no power


def test_matched_line_voltage_and_vswr_maximum():
    z0 = 50.0
    res = drive([Stage("line")], [{"z0": z0, "delay": 1.0 / 435e6}], F, z0, 50.0, P)  # one λ at 435 MHz
    # matched line: V = √(2·P·Z0) = 100 V peak at 100 W in 50 Ω (definition of average power, P = V²/2R)
    np.testing.assert_allclose(res.sections[0].voltage_v, math.sqrt(2 * P * z0), rtol=1e-9)
    # mismatched load ZL = 150 Ω (Γ = 0.5) on a line longer than λ/2: Vmax = |V+|(1 + |Γ|) with |V+| = √(2·P·Z0)
    # from a matched source (Pozar, Microwave Engineering, 4th ed., sec. 2.3; recalled from memory)
    res = drive([Stage("line")], [{"z0": z0, "delay": 1.0 / 300e6}], F, 150.0, 50.0, P)
    np.testing.assert_allclose(res.sections[0].voltage_v, math.sqrt(2 * P * z0) * 1.5, rtol=1e-5)
    np.testing.assert_allclose(res.sections[0].current_a, math.sqrt(2 * P / z0) * 1.5, rtol=1e-5)
    # lossless: all accepted power reaches the load, 1 − |Γ|² = 0.75 of the available (identity)
    np.testing.assert_allclose(res.delivered_w, 0.75 * P, rtol=1e-9)
    np.testing.assert_allclose(res.accepted_w, res.delivered_w, rtol=1e-9)


def test_matched_lossy_line_dissipates_the_data_sheet_loss():
    cable = shipped_catalog()["RG-58-class"]
    med = cable.medium()
    length = 10.0
    p = {"z0": med.z0, "delay": length / (med.vf * 299_792_458.0), "loss_c": med.kc * length,
         "loss_d": med.kd * length}
    res = drive([Stage("line")], [p], F, med.z0, med.z0, P)
    a_db = cable.attenuation_db_per_100m(F) * length / 100
    # a matched line passes 10^(−A/10) of its input and heats with the rest (definition of attenuation in dB)
    np.testing.assert_allclose(res.sections[0].dissipated_w, P * (1 - 10 ** (-a_db / 10)), rtol=1e-9)
    np.testing.assert_allclose(res.delivered_w, P * 10 ** (-a_db / 10), rtol=1e-9)
    # the heating figure of a matched line is the power entering it (its own definition, checked here)
    np.testing.assert_allclose(res.sections[0].heating_w, P, rtol=1e-9)


def test_overdriven_cable_fails_its_rating():
    cable = shipped_catalog()["RG-174-class"]
    med = cable.medium()
    p = {"z0": med.z0, "delay": 0.3 / 435e6, "short": False, "loss_c": med.kc * 0.1, "loss_d": med.kd * 0.1}
    low = check_ratings(drive([Stage("stub", "shunt")], [p], F, 50.0, 50.0, 1.0), {0: cable})[0]
    high = check_ratings(drive([Stage("stub", "shunt")], [p], F, 50.0, 50.0, 10000.0), {0: cable})[0]
    # 10 kW available into RG-174-class exceeds its data-sheet class ratings (about 1.6 kV peak, under 100 W
    # at UHF; catalog figures typical of the class, recalled from memory); 1 W does not
    assert low.voltage_ok and low.power_ok
    assert not high.voltage_ok and not high.power_ok
    # voltage scales as √P (identity: the network is linear)
    assert high.peak_voltage_v / low.peak_voltage_v == pytest.approx(math.sqrt(10000.0), rel=1e-9)


def test_drive_agrees_with_the_engine_on_a_mixed_lossy_network():
    # series open stub, shunt short stub, lumped parts and lossy lines on a reactive load
    stages = [Stage("line"), Stage("stub", "series"), Stage("lumped", "shunt", "c"), Stage("lumped", "series", "l"),
              Stage("stub", "shunt"), Stage("line")]
    params = [{"z0": 75.0, "delay": 0.31e-9, "loss_c": 2e-6, "loss_d": 1e-11},
              {"z0": 62.0, "delay": 0.17e-9, "short": False},
              {"value": 3.3e-12}, {"value": 12e-9},
              {"z0": 50.0, "delay": 0.4e-9, "short": True, "loss_c": 1e-6},
              {"z0": 50.0, "delay": 0.2e-9}]
    zl = 22.0 + 1j * (2 * np.pi * F * 35e-9 - 1 / (2 * np.pi * F * 8e-12))
    res = drive(stages, params, F, zl, 50.0, P)
    ref = evaluate(stages, params, F, zl, 50.0)
    # power balance at the input (definition of Γ): the network accepts (1 − |Γ|²) of the available power
    np.testing.assert_allclose(res.accepted_w, P * (1 - ref.gamma_sq[0]), rtol=1e-9)
    # and the load receives the engine's delivered share (the same walk, read at the load end)
    np.testing.assert_allclose(res.delivered_w, P * ref.delivered[0], rtol=1e-9)
    # identity: what the network accepts is what reaches the load plus what its lossy sections turn to heat
    lost = sum(s.dissipated_w for s in res.sections)
    np.testing.assert_allclose(res.accepted_w - res.delivered_w, lost, rtol=1e-6)
