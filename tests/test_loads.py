"""Load models and Touchstone I/O: hand formulas, physical identities and scikit-rf round trips."""

from __future__ import annotations

import numpy as np
import pytest
import skrf

from optmatch.domain.loads import (
    LoadError,
    TabulatedLoad,
    fixed_impedance,
    parallel_rlc,
    series_rlc,
)
from optmatch.io.touchstone import TouchstoneError, read_one_port, write_touchstone

FREQ = np.linspace(50e6, 500e6, 46)


# ---------------------------------------------------------------- RLC models


def test_series_rl_by_identity_and_skrf():
    # Our own values (no source): R = 33 Ω, L = 47 nH at 275 MHz.
    r_ohm, l_h, f_hz = 33.0, 47e-9, 275e6
    z = series_rlc(np.array([f_hz]), r_ohm=r_ohm, l_h=l_h)
    assert z[0].real == pytest.approx(r_ohm, abs=1e-12)  # identity: R unchanged
    assert z[0].imag == pytest.approx(2 * np.pi * f_hz * l_h, rel=1e-12)  # identity: X = 2πfL
    # scikit-rf's lumped inductor in series, terminated in the resistor, as the independent reference
    media = skrf.media.DefinedGammaZ0(frequency=skrf.Frequency.from_f([f_hz], unit="hz"), z0=50.0)
    ref = (media.inductor(l_h) ** media.resistor(r_ohm) ** media.short()).z[0, 0, 0]
    assert z[0] == pytest.approx(ref, rel=1e-9)


def test_series_rlc_hand_formula_and_resonance():
    r, ind, cap = 12.0, 180e-9, 6.8e-12
    z = series_rlc(FREQ, r, ind, cap)
    for f, zf in zip(FREQ, z, strict=True):
        w = 2 * np.pi * f
        assert zf == pytest.approx(complex(r, w * ind - 1 / (w * cap)), rel=1e-12)  # hand formula R + j(ωL − 1/ωC)
    f0 = 1 / (2 * np.pi * np.sqrt(ind * cap))
    z0 = series_rlc(np.array([f0]), r, ind, cap)[0]
    assert z0 == pytest.approx(r, abs=1e-9)  # identity: series resonance leaves only R


def test_series_rlc_subsets():
    w = 2 * np.pi * FREQ
    np.testing.assert_allclose(series_rlc(FREQ, l_h=50e-9), 1j * w * 50e-9, rtol=1e-14)  # hand formula jωL
    np.testing.assert_allclose(series_rlc(FREQ, c_f=10e-12), -1j / (w * 10e-12), rtol=1e-14)  # hand formula 1/jωC
    np.testing.assert_allclose(series_rlc(FREQ, r_ohm=75.0), 75.0, rtol=0)  # a lone R is frequency-independent


def test_parallel_rlc_hand_formula_and_resonance():
    r, ind, cap = 330.0, 56e-9, 8.2e-12
    z = parallel_rlc(FREQ, r, ind, cap)
    w = 2 * np.pi * FREQ
    # hand formula Z = R / (1 + jR(ωC − 1/ωL))
    np.testing.assert_allclose(z, r / (1 + 1j * r * (w * cap - 1 / (w * ind))), rtol=1e-12)
    f0 = 1 / (2 * np.pi * np.sqrt(ind * cap))
    # identity: parallel resonance gives R
    assert parallel_rlc(np.array([f0]), r, ind, cap)[0] == pytest.approx(r, rel=1e-9)
    # R ∥ C alone: Z = R / (1 + jωRC) (hand formula)
    np.testing.assert_allclose(parallel_rlc(FREQ, r_ohm=r, c_f=cap), r / (1 + 1j * w * r * cap), rtol=1e-12)


def test_fixed_impedance():
    np.testing.assert_array_equal(fixed_impedance(FREQ, 60 - 80j), np.full(FREQ.shape, 60 - 80j))  # identity


@pytest.mark.parametrize(
    ("call", "word"),
    [
        (lambda: series_rlc(FREQ, r_ohm=-1.0), "series R"),
        (lambda: series_rlc(FREQ, l_h=-1e-9), "series L"),
        (lambda: series_rlc(FREQ, c_f=0.0), "series C"),
        (lambda: parallel_rlc(FREQ, l_h=-1e-9), "parallel L"),
        (lambda: parallel_rlc(FREQ, c_f=-1e-12), "parallel C"),
        (lambda: series_rlc(FREQ), "at least one"),
        (lambda: series_rlc(np.array([100e6, 0.0]), r_ohm=50.0), "positive"),
        (lambda: fixed_impedance(np.array([-5.0]), 50.0), "positive"),
        (lambda: fixed_impedance(FREQ, -3 + 1j), "real part"),
    ],
)
def test_bad_load_input_is_a_one_line_error(call, word):
    with pytest.raises(LoadError) as err:
        call()
    assert word in str(err.value)
    assert "\n" not in str(err.value)


# ---------------------------------------------------------------- tabulated loads


def _measured():
    """An invented measured load: a series R–L–C seen through 0.3 m of 50 Ω air line, via scikit-rf."""
    freq = np.linspace(400e6, 470e6, 36)
    med = skrf.media.DefinedGammaZ0(
        skrf.Frequency.from_f(freq, unit="Hz"), z0_port=50.0, z0=50.0, gamma=1j * 2 * np.pi * freq / 299_792_458.0
    )
    zl = series_rlc(freq, 35.0, 40e-9, 4e-12)
    ntwk = med.line(0.3, "m") ** med.load((zl - 50) / (zl + 50))
    ntwk.name = "invented_antenna"
    return freq, ntwk


def test_tabulated_load_reproduces_measured_points_and_interpolates_gamma():
    freq, ntwk = _measured()
    load = TabulatedLoad(freq, ntwk.s[:, 0, 0], 50.0)
    np.testing.assert_allclose(load(freq), ntwk.z[:, 0, 0], rtol=1e-12)  # scikit-rf's Z of the same data
    mid = 0.5 * (freq[:-1] + freq[1:])
    g_mid = 0.5 * (ntwk.s[:-1, 0, 0] + ntwk.s[1:, 0, 0])  # linear interpolation in Γ: midpoint is the mean
    np.testing.assert_allclose(load.gamma_on(mid), g_mid, rtol=0, atol=1e-14)
    assert np.all(np.abs(load.gamma_on(np.linspace(freq[0], freq[-1], 500))) <= 1.0)  # interpolation stays passive


def test_tabulated_from_impedance_round_trip():
    freq = np.linspace(1e6, 30e6, 30)
    z = series_rlc(freq, 20.0, 2e-6, 300e-12)
    load = TabulatedLoad.from_impedance(freq, z, z_ref_ohm=75.0)
    np.testing.assert_allclose(load(freq), z, rtol=1e-12)  # identity: Z → Γ → Z


@pytest.mark.parametrize("grid", [np.linspace(390e6, 460e6, 8), np.linspace(410e6, 471e6, 8)])
def test_grid_outside_measured_range_is_an_error(grid):
    freq, ntwk = _measured()
    load = TabulatedLoad(freq, ntwk.s[:, 0, 0], 50.0, source="invented_antenna.s1p")
    with pytest.raises(LoadError) as err:
        load(grid)
    msg = str(err.value)
    assert "invented_antenna.s1p" in msg and "400 MHz" in msg and "470 MHz" in msg and "\n" not in msg


def test_tabulated_load_rejects_bad_data():
    with pytest.raises(LoadError, match="increasing"):
        TabulatedLoad(np.array([2e6, 1e6]), np.array([0.1, 0.2]))
    with pytest.raises(LoadError, match="reflection values"):
        TabulatedLoad(np.array([1e6, 2e6]), np.array([0.1]))


# ---------------------------------------------------------------- Touchstone


def test_skrf_writer_our_reader(tmp_path):
    freq, ntwk = _measured()
    ntwk.write_touchstone(filename="invented_antenna", dir=str(tmp_path))
    load = read_one_port(tmp_path / "invented_antenna.s1p")
    assert load.z_ref_ohm == 50.0
    np.testing.assert_allclose(load.freq_hz, freq, rtol=1e-12)
    # scikit-rf as an independent reference: its own Z of the data it wrote
    np.testing.assert_allclose(load(freq), ntwk.z[:, 0, 0], rtol=1e-9)


def test_our_reader_keeps_reference_impedance(tmp_path):
    freq, ntwk = _measured()
    ntwk75 = ntwk.copy()
    ntwk75.renormalize(75.0)
    ntwk75.write_touchstone(filename="ref75", dir=str(tmp_path))
    load = read_one_port(tmp_path / "ref75.s1p")
    assert load.z_ref_ohm == 75.0
    np.testing.assert_allclose(load(freq), ntwk.z[:, 0, 0], rtol=1e-9)  # the load's Z does not depend on reference


def test_our_writer_skrf_reader_one_port(tmp_path):
    freq, ntwk = _measured()
    out = write_touchstone(tmp_path / "match.s1p", freq, ntwk.s[:, 0, 0], 50.0, ["invented data", "second line"])
    back = skrf.Network(str(out))
    np.testing.assert_allclose(back.f, freq, rtol=1e-12)  # scikit-rf's reader as an independent reference
    np.testing.assert_allclose(back.s[:, 0, 0], ntwk.s[:, 0, 0], rtol=0, atol=1e-9)
    head = out.read_text().splitlines()
    assert head[0] == "! invented data" and head[1] == "! second line"
    assert "invented data" in back.comments
    assert list(tmp_path.iterdir()) == [out]  # no temporary file left behind
    load = read_one_port(out)  # and our own reader agrees after interpolation at the measured points
    np.testing.assert_allclose(load(freq), ntwk.z[:, 0, 0], rtol=1e-9)


def test_our_writer_skrf_reader_two_port(tmp_path):
    freq, _ = _measured()
    med = skrf.media.DefinedGammaZ0(
        skrf.Frequency.from_f(freq, unit="Hz"), z0_port=50.0, z0=50.0, gamma=1j * 2 * np.pi * freq / 299_792_458.0
    )
    two = med.line(0.2, "m", z0=75.0) ** med.shunt_delay_open(0.1, "m")
    out = write_touchstone(tmp_path / "net.s2p", freq, two.s, 50.0, ["invented"])
    back = skrf.Network(str(out))
    np.testing.assert_allclose(back.s, two.s, rtol=0, atol=1e-9)  # scikit-rf's reader as an independent reference
    assert back.nports == 2


def test_writer_overwrites_atomically(tmp_path):
    freq, ntwk = _measured()
    path = tmp_path / "a.s1p"
    write_touchstone(path, freq, np.zeros(freq.size), 50.0)
    write_touchstone(path, freq, ntwk.s[:, 0, 0], 50.0)
    np.testing.assert_allclose(skrf.Network(str(path)).s[:, 0, 0], ntwk.s[:, 0, 0], atol=1e-9)  # scikit-rf reader
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a.s1p"]


def test_writer_rejects_wrong_extension(tmp_path):
    freq, ntwk = _measured()
    with pytest.raises(TouchstoneError, match=r"\.s1p"):
        write_touchstone(tmp_path / "a.s2p", freq, ntwk.s[:, 0, 0])


def test_missing_file_is_an_error(tmp_path):
    path = tmp_path / "nowhere.s1p"
    with pytest.raises(TouchstoneError) as err:
        read_one_port(path)
    assert str(path) in str(err.value) and "not found" in str(err.value)


@pytest.mark.parametrize(
    "text",
    [
        "this is not a touchstone file\n1 2 3\n",
        "# MHz S RI R 50\n400 0.1\n410 abc def\n",
        "",
    ],
    ids=["prose", "bad-numbers", "empty"],
)
def test_malformed_file_is_an_error(tmp_path, text):
    path = tmp_path / "broken.s1p"
    path.write_text(text)
    with pytest.raises(TouchstoneError) as err:
        read_one_port(path)
    msg = str(err.value)
    assert str(path) in msg and "\n" not in msg and "Traceback" not in msg


def test_two_port_file_is_not_a_load(tmp_path):
    freq, _ = _measured()
    s = np.zeros((freq.size, 2, 2), dtype=complex)
    s[:, 0, 1] = s[:, 1, 0] = 1.0
    out = write_touchstone(tmp_path / "thru.s2p", freq, s)
    with pytest.raises(TouchstoneError) as err:
        read_one_port(out)
    assert "thru.s2p" in str(err.value) and "2 ports" in str(err.value)


def test_file_without_touchstone_extension_is_an_error(tmp_path):
    path = tmp_path / "load.txt"
    path.write_text("# MHz S RI R 50\n400 0.1 0.2\n")
    with pytest.raises(TouchstoneError) as err:
        read_one_port(path)
    assert str(path) in str(err.value) and ".s1p" in str(err.value)


# ---------------------------------------------------------------- hostile and unusual Touchstone files


def _ts(tmp_path, name: str, text: str):
    p = tmp_path / name
    p.write_text(text, encoding="ascii")
    return p


def test_reference_resistance_zero_or_negative_refused(tmp_path):
    for r in ("0", "-50"):
        p = _ts(tmp_path, f"r{r}.s1p", f"! invented\n# MHz S RI R {r}\n400 0.1 0.2\n410 0.1 0.3\n")
        with pytest.raises(TouchstoneError) as info:
            read_one_port(p)
        assert str(info.value) == (f"{p}: the option line's reference resistance R {r} must be a positive "
                                   "number of ohms")


def test_active_load_refused_naming_the_first_frequency(tmp_path):
    # |S11| = 1.5 at 410 MHz: a passive load cannot reflect more than it receives (physical identity)
    p = _ts(tmp_path, "active.s1p", "! invented\n# MHz S MA R 50\n400 0.5 10\n410 1.5 20\n420 1.2 30\n")
    with pytest.raises(TouchstoneError) as info:
        read_one_port(p)
    assert str(info.value).startswith(f"{p}: an active load, |S11| = 1.5 at 410 MHz")


def test_z_format_file_read_as_scikit_rf_reads_it(tmp_path):
    # Version-1 Z data is normalised to R: 1.2 − j1.6 at R 50 is 60 − j80 Ω (Pozar's Example 5.2 load)
    p = _ts(tmp_path, "z.s1p", "! invented\n# MHz Z RI R 50\n400 1.2 -1.6\n410 1.0 0.5\n420 0.4 0.1\n")
    ours = read_one_port(p)
    ref = skrf.Network(str(p))  # scikit-rf as the independent reader of the same file
    np.testing.assert_allclose(ours(ours.freq_hz), ref.z[:, 0, 0], rtol=1e-12)
    assert ours(np.array([400e6]))[0] == pytest.approx(60 - 80j)


def test_y_format_files(tmp_path):
    # Version 2.0: Y data in siemens, not normalised; scikit-rf reads it as written.
    v2 = _ts(tmp_path, "y2.s1p", "! invented\n[Version] 2.0\n# MHz Y RI R 50\n[Number of Ports] 1\n"
             "[Number of Frequencies] 2\n[Network Data]\n400 0.012 -0.016\n410 0.016 -0.008\n[End]\n")
    ours = read_one_port(v2)
    ref = skrf.Network(str(v2))  # scikit-rf as the independent reader
    np.testing.assert_allclose(ours(ours.freq_hz), ref.z[:, 0, 0], rtol=1e-12)
    assert ours(np.array([400e6]))[0] == pytest.approx(1 / (0.012 - 0.016j))  # identity Z = 1/Y: 30 + j40 Ω
    # Version 1: Y data is normalised to the reference admittance 1/R, so y = 1 is a matched load (Γ = 0)
    # and y = 0.6 − j0.8 is Y = (0.6 − j0.8)/50 S, Z = 30 + j40 Ω (physical identities of the format).
    # scikit-rf 2.2 multiplies version-1 Y data by R instead of dividing; we follow the format.
    v1 = _ts(tmp_path, "y1.s1p", "! invented\n# MHz Y RI R 50\n400 1.0 0.0\n410 0.6 -0.8\n")
    got = read_one_port(v1)
    assert abs(got.gamma[0]) < 1e-12
    assert got(np.array([410e6]))[0] == pytest.approx(30 + 40j)
    # the same load written as a version-1 Z file reads the same (z = 1/y = 0.6 + j0.8)
    z1 = _ts(tmp_path, "z1.s1p", "! invented\n# MHz Z RI R 50\n400 1.0 0.0\n410 0.6 0.8\n")
    np.testing.assert_allclose(read_one_port(z1).gamma, got.gamma, atol=1e-12)


@pytest.mark.parametrize(
    ("name", "content", "fragment"),
    [
        ("empty.s1p", "", "file is empty"),
        ("text.txt", "# MHz S RI R 50\n400 0.1 0.2\n", "not a Touchstone file name"),
        ("two.s2p", "# MHz S RI R 50\n400 0.1 0.2 0.3 0.4 0.5 0.6 0.7 0.8\n", "has 2 ports"),
        ("junk.s1p", "# MHz S RI R 50\n400 x y\n", "not a readable Touchstone file"),
        ("nan.s1p", "# MHz S RI R 50\n400 nan 0.2\n410 0.1 0.2\n", ""),
        ("latin.s1p", "! caf\xe9\n# MHz S RI R 50\n400 0.1 0.2\n", "other than ASCII"),
    ],
)
def test_every_touchstone_problem_names_the_file(tmp_path, name, content, fragment):
    p = tmp_path / name
    p.write_bytes(content.encode("latin-1"))
    with pytest.raises(TouchstoneError) as info:
        read_one_port(p)
    msg = str(info.value)
    assert msg.startswith(f"{p}: ") and fragment in msg and "\n" not in msg


def test_load_errors_are_bad_input_not_bugs():
    from optmatch.errors import OptmatchError

    assert issubclass(LoadError, OptmatchError) and issubclass(TouchstoneError, OptmatchError)
