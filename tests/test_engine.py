"""Engine checks against scikit-rf (independent reference library) and physical identities.

scikit-rf reference networks are built with ``skrf.media.DefinedGammaZ0`` with the propagation
constant passed explicitly (γ = α + jω/c per metre), each element as a 2-port referenced to the
system impedance, and the network cascaded with ``**`` onto a 1-port load.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
import skrf

from optmatch.engine import Stage, evaluate, evaluate_reduced, worst_gamma_sq

C0 = 299_792_458.0  # m/s
FREQ = np.linspace(100e6, 1000e6, 61)


# ---------------------------------------------------------------- scikit-rf reference builder


def _media(freq: np.ndarray, z_sys: float, z0: float, loss_c: float = 0.0, loss_d: float = 0.0, length_m: float = 1.0):
    """DefinedGammaZ0 whose line of ``length_m`` has the engine's whole-line loss figures."""
    alpha = (loss_c * np.sqrt(freq) + loss_d * freq) / length_m  # Np/m
    gamma = alpha + 1j * 2.0 * np.pi * freq / C0
    return skrf.media.DefinedGammaZ0(skrf.Frequency.from_f(freq, unit="Hz"), z0_port=z_sys, z0=z0, gamma=gamma)


def _skrf_element(stage: Stage, p: dict, freq: np.ndarray, z_sys: float) -> skrf.Network:
    """One element as a scikit-rf 2-port referenced to ``z_sys``."""
    main = _media(freq, z_sys, z_sys)
    if stage.kind in ("line", "stub"):
        length_m = p["delay"] * C0
        med = _media(freq, z_sys, p["z0"], p.get("loss_c", 0.0), p.get("loss_d", 0.0), max(length_m, 1e-300))
        if stage.kind == "line":
            return med.line(length_m, unit="m")
        one_port = med.delay_short(length_m, unit="m") if p.get("short", False) else med.delay_open(length_m, unit="m")
        if stage.connection == "shunt":
            return main.shunt(one_port)
        return main.resistor(one_port.z[:, 0, 0])  # series branch of the stub's impedance
    value = p["value"]
    table = {
        ("series", "r"): main.resistor,
        ("series", "l"): main.inductor,
        ("series", "c"): main.capacitor,
        ("shunt", "r"): main.shunt_resistor,
        ("shunt", "l"): main.shunt_inductor,
        ("shunt", "c"): main.shunt_capacitor,
    }
    return table[(stage.connection, stage.part)](value)


def skrf_gamma(stages, params, freq, zload, z_sys=50.0) -> np.ndarray:
    """Input reflection of the network (elements from the load outwards) via scikit-rf's cascade."""
    main = _media(freq, z_sys, z_sys)
    zl = np.broadcast_to(np.asarray(zload, dtype=complex), freq.shape)
    net = main.load((zl - z_sys) / (zl + z_sys))
    for stage, p in zip(stages, params, strict=True):
        net = _skrf_element(stage, p, freq, z_sys) ** net
    return net.s[:, 0, 0]


def engine_gamma(stages, params, freq, zload, z_sys=50.0) -> np.ndarray:
    return evaluate(stages, params, freq, zload, z_sys).gamma[0]


LINE = Stage("line")
SHUNT_STUB = Stage("stub", "shunt")
SERIES_STUB = Stage("stub", "series")

ZLOAD = 30.0 - 45.0j


# ---------------------------------------------------------------- single elements vs scikit-rf


@pytest.mark.parametrize("z_sys", [50.0, 75.0])
def test_line_matches_skrf(z_sys):
    stages, params = [LINE], [{"z0": 93.0, "delay": 1.7e-9}]
    np.testing.assert_allclose(  # scikit-rf as an independent reference
        engine_gamma(stages, params, FREQ, ZLOAD, z_sys), skrf_gamma(stages, params, FREQ, ZLOAD, z_sys),
        rtol=0, atol=1e-9
    )


@pytest.mark.parametrize("stage", [SHUNT_STUB, SERIES_STUB], ids=["shunt", "series"])
@pytest.mark.parametrize("short", [False, True], ids=["open", "short"])
def test_stub_matches_skrf(stage, short):
    stages = [LINE, stage]
    params = [{"z0": 50.0, "delay": 0.4e-9}, {"z0": 62.0, "delay": 0.83e-9, "short": short}]
    np.testing.assert_allclose(  # scikit-rf as an independent reference
        engine_gamma(stages, params, FREQ, ZLOAD), skrf_gamma(stages, params, FREQ, ZLOAD), rtol=0, atol=1e-9
    )


@pytest.mark.parametrize("connection", ["series", "shunt"])
@pytest.mark.parametrize(("part", "value"), [("r", 33.0), ("l", 27e-9), ("c", 4.7e-12)])
def test_lumped_matches_skrf(connection, part, value):
    stages = [Stage("lumped", connection, part)]
    params = [{"value": value}]
    np.testing.assert_allclose(  # scikit-rf as an independent reference
        engine_gamma(stages, params, FREQ, ZLOAD), skrf_gamma(stages, params, FREQ, ZLOAD), rtol=0, atol=1e-9
    )


@pytest.mark.parametrize("stage", [LINE, SHUNT_STUB, SERIES_STUB], ids=["line", "shunt", "series"])
@pytest.mark.parametrize("short", [False, True], ids=["open", "short"])
def test_lossy_line_and_stubs_match_skrf(stage, short):
    p = {"z0": 75.0, "delay": 5.3e-9, "loss_c": 2.1e-5, "loss_d": 1.3e-10}
    if stage.kind == "stub":
        p["short"] = short
    stages, params = [LINE, stage], [{"z0": 50.0, "delay": 0.9e-9, "loss_c": 1e-5}, p]
    np.testing.assert_allclose(  # scikit-rf as an independent reference (γ = α + jβ per metre)
        engine_gamma(stages, params, FREQ, ZLOAD), skrf_gamma(stages, params, FREQ, ZLOAD), rtol=0, atol=1e-9
    )


# ---------------------------------------------------------------- random cascades vs scikit-rf


def _random_network(rng: np.random.Generator, n_elem: int, lossless: bool = False):
    kinds = ["line", "shunt_stub", "series_stub", "lumped"]
    parts = ["l", "c"] if lossless else ["r", "l", "c"]
    stages, params = [], []
    for _ in range(n_elem):
        kind = kinds[rng.integers(len(kinds))]
        if kind == "lumped":
            part = parts[rng.integers(len(parts))]
            conn = ("series", "shunt")[rng.integers(2)]
            value = {"r": rng.uniform(1, 300), "l": rng.uniform(1e-9, 120e-9), "c": rng.uniform(0.5e-12, 30e-12)}[part]
            stages.append(Stage("lumped", conn, part))
            params.append({"value": value})
            continue
        p = {"z0": rng.uniform(20.0, 150.0), "delay": rng.uniform(0.05e-9, 3e-9)}
        if not lossless and rng.random() < 0.4:
            p["loss_c"] = rng.uniform(0, 3e-5)
            p["loss_d"] = rng.uniform(0, 2e-10)
        if kind == "line":
            stages.append(LINE)
        else:
            p["short"] = bool(rng.integers(2))
            stages.append(SHUNT_STUB if kind == "shunt_stub" else SERIES_STUB)
        params.append(p)
    return stages, params


def _random_load(rng: np.random.Generator, freq: np.ndarray) -> np.ndarray:
    """A passive load that varies with frequency: R + jX drifting linearly across the band."""
    r = rng.uniform(5.0, 300.0) + rng.uniform(-3.0, 3.0) * np.linspace(0, 1, freq.size)
    x = rng.uniform(-200.0, 200.0) + rng.uniform(-50.0, 50.0) * np.linspace(0, 1, freq.size)
    return r + 1j * x


def test_random_cascades_match_skrf():
    rng = np.random.default_rng(20240611)
    for _ in range(50):
        stages, params = _random_network(rng, int(rng.integers(1, 9)))
        zl = _random_load(rng, FREQ)
        z_sys = float(rng.choice([50.0, 75.0]))
        np.testing.assert_allclose(  # scikit-rf's ** cascade as an independent reference
            engine_gamma(stages, params, FREQ, zl, z_sys), skrf_gamma(stages, params, FREQ, zl, z_sys),
            rtol=0, atol=1e-9
        )


def test_nonuniform_grid_matches_skrf():
    rng = np.random.default_rng(7)
    freq = np.sort(rng.uniform(50e6, 2e9, 40))
    freq = np.concatenate([freq, np.linspace(2.1e9, 2.5e9, 11)])
    stages, params = _random_network(rng, 6)
    np.testing.assert_allclose(  # scikit-rf as an independent reference
        engine_gamma(stages, params, freq, ZLOAD), skrf_gamma(stages, params, freq, ZLOAD), rtol=0, atol=1e-9
    )


def _exact_line_gamma(freq, delay, z0, zl, z_sys=50.0):
    """Γ of a lossless line on ``zl`` from the textbook input-impedance formula
    Zin = Z0 (ZL + jZ0 tan βl) / (Z0 + jZL tan βl) (Pozar, Microwave Engineering, 4th ed., eq. 2.44,
    recalled from memory), with βl reduced to a fraction of a turn in exact rational arithmetic."""
    turns = [Fraction(float(f)) * Fraction(delay) for f in freq]
    phase = 2.0 * np.pi * np.array([float(t - math.floor(t)) for t in turns])
    jt = 1j * np.tan(phase)
    zin = z0 * (zl + z0 * jt) / (z0 + zl * jt)
    return (zin - z_sys) / (zin + z_sys)


def test_nearly_uniform_grid_matches_exact_line():
    # steps that differ from the first one by a millihertz must not be treated as one uniform run
    steps = np.full(300, 1e6 + 0.9e-3)
    steps[0] = 1e6
    freq = np.concatenate([[1e9], 1e9 + np.cumsum(steps)])
    for delay in (1e-8, 1e-7, 1e-6):  # a 3 m, 30 m and 300 m air line
        np.testing.assert_allclose(  # textbook formula, exact phase (see _exact_line_gamma)
            engine_gamma([LINE], [{"z0": 60.0, "delay": delay}], freq, ZLOAD),
            _exact_line_gamma(freq, delay, 60.0, ZLOAD),
            rtol=0,
            atol=1e-11,
        )


def test_long_line_on_long_uniform_grid_matches_exact_line():
    freq = np.linspace(1e9, 3e9, 2001)
    np.testing.assert_allclose(  # textbook formula, exact phase (see _exact_line_gamma)
        engine_gamma([LINE], [{"z0": 60.0, "delay": 1e-6}], freq, ZLOAD),
        _exact_line_gamma(freq, 1e-6, 60.0, ZLOAD),
        rtol=0,
        atol=1e-11,
    )


# ---------------------------------------------------------------- batches and chunks


def _batch_network(rng: np.random.Generator, n: int):
    stages = [LINE, SHUNT_STUB, LINE, SERIES_STUB, Stage("lumped", "shunt", "c")]
    params = [
        {"z0": rng.uniform(20, 150, n), "delay": rng.uniform(0.1e-9, 3e-9, n)},
        {"z0": rng.uniform(20, 150, n), "delay": rng.uniform(0.1e-9, 3e-9, n), "short": rng.random(n) < 0.5},
        {"z0": 50.0, "delay": rng.uniform(0.1e-9, 3e-9, n), "loss_c": 2e-5},
        {"z0": rng.uniform(20, 150, n), "delay": rng.uniform(0.1e-9, 3e-9, n), "short": rng.random(n) < 0.5},
        {"value": rng.uniform(0.5e-12, 10e-12, n)},
    ]
    return stages, params


def _one(params, j):
    return [{k: (v[j] if np.ndim(v) == 1 else v) for k, v in p.items()} for p in params]


def test_mixed_end_batch_equals_per_candidate():
    rng = np.random.default_rng(3)
    n = 40
    stages, params = _batch_network(rng, n)
    assert 0 < params[1]["short"].sum() < n  # the batch really mixes open and short ends
    batch = evaluate(stages, params, FREQ, ZLOAD).gamma
    for j in range(n):
        single = evaluate(stages, _one(params, j), FREQ, ZLOAD).gamma[0]
        # identity: a batch is only many single evaluations side by side
        np.testing.assert_allclose(batch[j], single, rtol=0, atol=1e-13)
    # and each candidate agrees with scikit-rf (independent reference)
    for j in (0, 7, 21):
        np.testing.assert_allclose(batch[j], skrf_gamma(stages, _one(params, j), FREQ, ZLOAD), rtol=0, atol=1e-9)


def test_chunk_size_does_not_change_results():
    rng = np.random.default_rng(11)
    n = 1000
    stages, params = _batch_network(rng, n)
    ref = evaluate(stages, params, FREQ, ZLOAD, chunk=n)
    worst_ref = worst_gamma_sq(stages, params, FREQ, ZLOAD, chunk=n)
    for chunk in (1, 7, 64, 256, 999):
        res = evaluate(stages, params, FREQ, ZLOAD, chunk=chunk)
        # identity: chunking only splits the candidate axis (equal to the last bit or two: numpy's
        # SIMD and strided loops may round a complex product differently)
        np.testing.assert_allclose(res.gamma, ref.gamma, rtol=0, atol=1e-14)
        np.testing.assert_allclose(res.delivered, ref.delivered, rtol=0, atol=1e-14)
        np.testing.assert_allclose(worst_gamma_sq(stages, params, FREQ, ZLOAD, chunk=chunk), worst_ref,
                                   rtol=0, atol=1e-14)
    red = evaluate_reduced(stages, params, FREQ, ZLOAD, reducer=lambda r: r.return_loss_db.min(axis=1), chunk=33)
    np.testing.assert_allclose(red, -10 * np.log10(worst_ref), rtol=1e-13)  # identity: RL = −10·log10 max|Γ|²


# ---------------------------------------------------------------- physical identities


@pytest.mark.parametrize("zl", [30.0 - 45.0j, 200.0 + 10.0j, 7.0 + 0.0j])
def test_half_wave_line_repeats_load(zl):
    f0 = 433e6
    res = evaluate([LINE], [{"z0": 80.0, "delay": 0.5 / f0}], np.array([f0]), zl)
    np.testing.assert_allclose(res.zin[0, 0], zl, rtol=1e-9)  # identity: λ/2 line repeats the load


@pytest.mark.parametrize("zl", [30.0 - 45.0j, 200.0 + 10.0j, 7.0 + 0.0j])
def test_quarter_wave_line_inverts_load(zl):
    f0 = 433e6
    z0 = 80.0
    res = evaluate([LINE], [{"z0": z0, "delay": 0.25 / f0}], np.array([f0]), zl)
    np.testing.assert_allclose(res.zin[0, 0], z0**2 / zl, rtol=1e-9)  # identity: λ/4 inverter Z = Z0²/ZL


def test_lossless_network_conserves_power():
    rng = np.random.default_rng(5)
    for _ in range(30):
        stages, params = _random_network(rng, int(rng.integers(1, 9)), lossless=True)
        res = evaluate(stages, params, FREQ, _random_load(rng, FREQ))
        # identity: in a lossless network accepted power = delivered power
        np.testing.assert_allclose(res.delivered + res.gamma_sq, 1.0, rtol=0, atol=1e-12)
        accepted = 1.0 - res.gamma_sq
        well = accepted > 1e-2  # where little is accepted the dB ratio only magnifies rounding
        np.testing.assert_allclose(res.network_loss_db[well], 0.0, rtol=0, atol=1e-9)


def test_lossy_network_never_delivers_more_than_accepted():
    rng = np.random.default_rng(6)
    for _ in range(30):
        stages, params = _random_network(rng, int(rng.integers(1, 9)))
        params.append({"z0": 50.0, "delay": 1e-9, "loss_c": 1e-5})  # make sure something is lossy
        stages.append(LINE)
        res = evaluate(stages, params, FREQ, _random_load(rng, FREQ))
        # identity: a passive lossy network delivers at most the accepted power 1 − |Γ|²
        assert np.all(res.delivered <= 1.0 - res.gamma_sq + 1e-12)
        assert np.all(res.delivered < 1.0 - res.gamma_sq)  # strictly lossy here


@pytest.mark.parametrize("short_end", [False, True])
def test_quarter_wave_stub_extremes_stay_finite(short_end):
    f0 = 300e6
    freq = np.array([f0 * 0.9, f0, f0 * 1.1])
    # an open λ/4 shunt stub shorts the line; a short λ/4 series stub opens it (both |Γ| = 1)
    stage = SERIES_STUB if short_end else SHUNT_STUB
    res = evaluate([stage], [{"z0": 50.0, "delay": 0.25 / f0, "short": short_end}], freq, 50.0)
    g = res.gamma[0]
    assert np.all(np.isfinite(g))
    assert abs(abs(g[1]) - 1.0) < 1e-12  # identity: total reflection from a short/open at the input
    assert np.real(g[1]) == pytest.approx(1.0 if short_end else -1.0, abs=1e-12)
    assert res.delivered[0, 1] == pytest.approx(0.0, abs=1e-12)  # identity: nothing reaches the load


def test_series_inductor_on_resistor_by_identity():
    # Our own values (no source): 33 Ω with a series 47 nH at 275 MHz.  Identity: the inductor adds
    # X = 2πfL in series and leaves R unchanged.
    r_ohm, l_h, f_hz = 33.0, 47e-9, 275e6
    stages = [Stage("lumped", "series", "l"), LINE]
    res = evaluate(stages, [{"value": l_h}, {"z0": 50.0, "delay": 0.0}], np.array([f_hz]), r_ohm)
    z = res.zin[0, 0]
    assert z.real == pytest.approx(r_ohm, abs=1e-9)  # identity: R unchanged
    assert z.imag == pytest.approx(2 * np.pi * f_hz * l_h, rel=1e-12)  # identity: X = 2πfL (≈ 81.2 Ω)


@pytest.mark.parametrize("z_s", [50.0, 75.0, 300.0])
def test_matched_source_delivers_available_power(z_s):
    res = evaluate([LINE], [{"z0": z_s, "delay": 2.2e-9}], FREQ, z_s, z_sys=z_s)
    # all available power (common practice, no source)
    np.testing.assert_allclose(res.delivered, 1.0, rtol=0, atol=1e-12)
    v_over_emf = res.zin / (res.zin + z_s)
    # input voltage is half the EMF, −6.02 dB (common practice, no source)
    np.testing.assert_allclose(20 * np.log10(np.abs(v_over_emf)), 20 * np.log10(0.5), atol=1e-9)


def test_long_lumped_ladder_stays_finite_and_matches_skrf():
    # A 240-element L–C ladder driven far above its cut-off: the wave state spans hundreds of
    # decades across the band unless it is rescaled per point (reference: scikit-rf's cascade).
    freq = np.linspace(50e6, 2e9, 81)
    stages, params = [], []
    for _ in range(120):
        stages += [Stage("lumped", "series", "l"), Stage("lumped", "shunt", "c")]
        params += [{"value": 82e-9}, {"value": 39e-12}]
    got = evaluate(stages, params, freq, 50.0 + 10j).gamma[0]
    assert np.all(np.isfinite(got))
    ref = skrf_gamma(stages, params, freq, 50.0 + 10j)
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-9)
