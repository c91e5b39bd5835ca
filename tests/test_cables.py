"""Cable catalog: velocity factors of the trade, the loss model against scikit-rf, power derating,
merging a user's file, and one-line errors."""

from __future__ import annotations

import math
import textwrap

import numpy as np
import pytest
import skrf

from optmatch.domain.cables import merge_catalogs
from optmatch.domain.network import Bound, ElementSpec, NetworkSpec
from optmatch.engine import evaluate
from optmatch.io.catalog import CatalogError, load_catalog, read_catalog, shipped_catalog
from optmatch.units import C0

CAT = shipped_catalog()


def test_velocity_factors_of_the_trade():
    # solid-polyethylene coax: VF ≈ 0.66 (common practice, no source)
    for name in ("RG-58-class", "RG-213-class", "RG-174-class", "RG-59-class"):
        assert CAT[name].medium().vf == pytest.approx(0.66, abs=0.01)
    # foamed dielectric: VF about 0.8–0.85 (common practice, no source)
    for name in ("foam-10mm", "RG-6-class"):
        assert 0.78 <= CAT[name].medium().vf <= 0.86
    # PTFE dielectric: VF ≈ 1/√2.1 ≈ 0.69-0.70 (εr of PTFE ≈ 2.1, common practice, no source)
    assert CAT["semi-rigid-141"].vf == pytest.approx(1 / math.sqrt(2.1), abs=0.01)


def test_physical_length_of_a_quarter_wave():
    # λ/4 of solid-PE coax at 100 MHz: 0.75 m × 0.66 ≈ 0.495 m (common practice, no source)
    vf = CAT["RG-58-class"].medium().vf
    assert 0.25 * C0 / 100e6 * vf == pytest.approx(0.495, abs=0.005)


@pytest.mark.parametrize("name", ["RG-58-class", "foam-10mm", "RG-59-class"])
def test_catalog_loss_matches_skrf_lossy_line(name):
    cable = CAT[name]
    med = cable.medium()
    freq = np.linspace(100e6, 1e9, 31)
    length_m = 20.0
    el = ElementSpec("line", length=Bound(length_m, length_m), length_basis="physical", media=(med,))
    net = NetworkSpec((el,))
    params = net.engine_params(np.zeros((1, 0)), net.default_choice())
    zl = cable.z0_ohm  # matched: the input sees Z0 and S21 is the line's own loss
    ours = evaluate(net.stages, params, freq, zl, z_sys=cable.z0_ohm)
    loss_ours_db = 10 * np.log10(1.0 / ours.delivered[0])
    # independent reference: scikit-rf DefinedGammaZ0 with α from the data-sheet two-point fit
    alpha = cable.attenuation_db_per_100m(freq) / 100.0 * math.log(10) / 20
    gamma = alpha + 1j * 2 * np.pi * freq / (cable.vf * C0)
    ref = skrf.media.DefinedGammaZ0(skrf.Frequency.from_f(freq, unit="Hz"), z0_port=cable.z0_ohm,
                                    z0=cable.z0_ohm, gamma=gamma).line(length_m, "m")
    loss_ref_db = -20 * np.log10(np.abs(ref.s[:, 1, 0]))
    np.testing.assert_allclose(loss_ours_db, loss_ref_db, rtol=1e-9)  # scikit-rf lossy line
    # and at the catalog's own data points the loss is the data-sheet figure × 0.2 (20 m of 100 m)
    for f_pt, a_pt in cable.loss_points:
        if 100e6 <= f_pt <= 1e9:
            one = evaluate(net.stages, params, np.array([f_pt]), zl, z_sys=cable.z0_ohm)
            assert 10 * np.log10(1 / one.delivered[0, 0]) == pytest.approx(a_pt * 0.2, rel=1e-9)


def test_power_rating_derates_as_inverse_attenuation():
    c = CAT["RG-58-class"]
    assert float(c.power_rating_w(c.power_ref_hz)) == pytest.approx(c.max_power_w, rel=1e-12)  # identity
    f = np.array([50e6, 435e6, 1e9])
    # constant heating of a matched line at its rating: P(f)·a(f) = P_ref·a(f_ref) (the derating rule stated
    # in the catalog; matches the shape of makers' power-vs-frequency curves, common practice, no source)
    np.testing.assert_allclose(c.power_rating_w(f) * c.attenuation_db_per_100m(f),
                               c.max_power_w * c.attenuation_db_per_100m(c.power_ref_hz), rtol=1e-12)
    assert c.power_rating_w(1e9) < c.max_power_w  # ratings fall with frequency (common practice, no source)


def test_user_catalog_extends_and_replaces(tmp_path):
    p = tmp_path / "mine.yaml"
    p.write_text(textwrap.dedent("""
        cables:
          RG-58-class:
            z0: 52
            vf: 0.66
            attenuation: [{freq: 100MHz, db_per_100m: 16}, {freq: 1GHz, db_per_100m: 62}]
            max_voltage: 1800
            max_power: {watts: 300, freq: 100MHz}
          hardline-half:
            z0: 50
            vf: 0.88
            attenuation: [{freq: 100MHz, db_per_100m: 2.2}, {freq: 1GHz, db_per_100m: 7.6}]
            max_voltage: 4000
            max_power: {watts: 2.5kW, freq: 100MHz}
        """), encoding="utf-8")
    cat = load_catalog(p)
    assert cat["RG-58-class"].z0_ohm == 52.0  # the user's entry replaces the shipped one
    assert cat["hardline-half"].max_power_w == 2500.0
    assert set(CAT) <= set(cat)
    assert merge_catalogs(CAT, {})["foam-10mm"] == CAT["foam-10mm"]


def test_bad_catalog_is_one_line_per_problem(tmp_path):
    p = tmp_path / "bad.yaml"
    p.write_text("cables:\n  x: {z0: 50, vf: 1.4, attenuation: 3, max_voltage: 100, "
                 "max_power: {watts: 1, freq: 1GHz}}\n", encoding="utf-8")
    with pytest.raises(CatalogError) as info:
        read_catalog(p)
    probs = info.value.problems
    assert any(line.startswith(f"{p}:2: cables.x.vf:") for line in probs)
    assert any(line.startswith(f"{p}:2: cables.x.attenuation:") for line in probs)
    assert all("\n" not in line for line in probs)
