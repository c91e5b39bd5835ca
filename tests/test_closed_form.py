"""Closed-form matching solutions against textbook examples and the Γ = 0 identity."""

from __future__ import annotations

import math

import numpy as np
import pytest

from optmatch.domain.closed_form import (
    Solution,
    SpotResult,
    all_solutions,
    double_stub,
    double_stub_limit,
    quarter_wave,
    series_stub,
    shunt_stub,
    to_engine,
)
from optmatch.engine import evaluate
from optmatch.units import length_views

F0_HZ = 100e6


def _gamma_at_f0(solution: Solution, zl: complex, z0: float) -> float:
    stages, params = to_engine(solution, F0_HZ)
    return float(np.abs(evaluate(stages, params, np.array([F0_HZ]), zl, z_sys=z0).gamma[0, 0]))


def _pairs(result: SpotResult, end: str) -> list[tuple[float, ...]]:
    """Per solution with this stub end: (line or load-end stub length, stub length)."""
    out = []
    for s in result.solutions:
        stubs = [e for e in s.elements if e.kind != "line"]
        if stubs[0].end != end:
            continue
        if s.topology == "double_stub":
            out.append((stubs[0].length_wl, stubs[1].length_wl))
        else:
            out.append((s.elements[0].length_wl, stubs[0].length_wl))
    return sorted(out)


# --------------------------------------------------------------------------- textbook examples


def test_single_shunt_stub_textbook_example():
    res = shunt_stub(60 - 80j, 50.0)
    (d1, l1), (d2, l2) = _pairs(res, "short")
    # Pozar, Microwave Engineering, 4th ed., Example 5.2 (recalled from memory): d = 0.110λ, short stub 0.095λ
    assert d1 == pytest.approx(0.110, abs=0.001)
    assert l1 == pytest.approx(0.095, abs=0.001)
    # Pozar, Microwave Engineering, 4th ed., Example 5.2 (recalled from memory): d = 0.259λ, short stub 0.405λ
    assert d2 == pytest.approx(0.259, abs=0.001)
    assert l2 == pytest.approx(0.405, abs=0.001)


def test_single_series_stub_textbook_example():
    res = series_stub(100 + 80j, 50.0)
    (d1, l1), (d2, l2) = _pairs(res, "open")
    # Pozar, Microwave Engineering, 4th ed., Example 5.3 (recalled from memory): d = 0.120λ, open stub 0.397λ
    assert d1 == pytest.approx(0.120, abs=0.001)
    assert l1 == pytest.approx(0.397, abs=0.001)
    # Pozar, Microwave Engineering, 4th ed., Example 5.3 (recalled from memory): d = 0.463λ, open stub 0.103λ
    assert d2 == pytest.approx(0.463, abs=0.001)
    assert l2 == pytest.approx(0.103, abs=0.001)


def test_double_stub_textbook_example():
    res = double_stub(60 - 80j, 50.0, spacing_wl=0.125)
    assert res.matchable
    (a1, b1), (a2, b2) = _pairs(res, "open")
    # Pozar, Microwave Engineering, 4th ed., Example 5.4 (recalled from memory), open stubs λ/8 apart,
    # first stub at the load: load-end stub 0.146λ with input-end stub 0.204λ ...
    assert a1 == pytest.approx(0.146, abs=0.001)
    assert b1 == pytest.approx(0.204, abs=0.001)
    # ... or load-end stub 0.482λ with input-end stub 0.350λ (same example)
    assert a2 == pytest.approx(0.482, abs=0.001)
    assert b2 == pytest.approx(0.350, abs=0.001)


def test_quarter_wave_real_load_formula():
    res = quarter_wave(100.0, 50.0)
    direct = [s for s in res.solutions if s.elements[0].length_wl == 0.0]
    assert len(direct) == 1
    transformer = direct[0].elements[1]
    # Pozar, Microwave Engineering, 4th ed., sec. 5.5, quarter-wave transformer Z1 = sqrt(Z0 RL) = 70.71 Ω
    assert transformer.z0_ohm == pytest.approx(70.71, abs=0.01)
    # quarter-wave transformer length λ/4 (same section)
    assert transformer.length_wl == pytest.approx(0.25, abs=1e-12)


def test_quarter_wave_complex_load_lands_on_real_impedance():
    zl, z0 = 60 - 80j, 50.0
    rho = abs((zl - z0) / (zl + z0))
    vswr = (1 + rho) / (1 - rho)
    res = quarter_wave(zl, z0)
    r_of = {s.branch: s.elements[1].z0_ohm ** 2 / z0 for s in res.solutions}
    # Pozar, Microwave Engineering, 4th ed., sec. 2.3: R at a voltage maximum is Z0·VSWR, at a minimum Z0/VSWR
    assert r_of[0] == pytest.approx(z0 * vswr, rel=1e-9)
    assert r_of[1] == pytest.approx(z0 / vswr, rel=1e-9)


# --------------------------------------------------------------------------- physical identity


def _loads(seed: int = 7, n: int = 30) -> list[complex]:
    rng = np.random.default_rng(seed)
    r = 50.0 * np.exp(rng.uniform(np.log(0.05), np.log(20.0), n))
    x = rng.uniform(-300.0, 300.0, n)
    edge = [25 - 25j, 100.0, 25.0, 50 + 1e-3j, 1e4 + 1j, 0.1 + 0j, 50 + 50j, 20 - 500j]
    return [complex(a, b) for a, b in zip(r, x, strict=True)] + edge


@pytest.mark.parametrize("z0", [50.0, 75.0])
@pytest.mark.parametrize("spacing", [0.125, 0.375, 0.1, 0.25])
def test_every_solution_gives_zero_reflection(z0, spacing):
    rng = np.random.default_rng(11)
    count = 0
    for zl in _loads():
        load_line = float(rng.uniform(0.0, 0.5))
        results = list(all_solutions(zl, z0, spacing_wl=spacing, load_line_wl=load_line))
        ds = results[2]
        if not ds.matchable:
            results[2] = double_stub(zl, z0, spacing, ds.min_load_line_wl)
        for res in results:
            assert res.matchable, res.note
            ends = {e.end for s in res.solutions for e in s.elements if e.end}
            if res.topology != "quarter_wave":
                assert ends == {"open", "short"}
            totals = [s.total_length_wl for s in res.solutions]
            assert totals == sorted(totals)
            for s in res.solutions:
                assert all(0.0 <= e.length_wl < 0.5 for e in s.elements)
                # physical identity: a closed-form solution gives Γ = 0 at its design frequency
                # (Pozar, Microwave Engineering, 4th ed., ch. 5, definition of a match)
                assert _gamma_at_f0(s, zl, z0) < 1e-9, (res.topology, zl, s)
                count += 1
    assert count > 0


# --------------------------------------------------------------------------- forbidden region


def _first_allowed_length(zl: complex, z0: float, spacing: float, step: float = 1e-5) -> float:
    """Independent grid search with the tan form of the line equation (Pozar eq. 2.44)."""
    d = np.arange(0.0, 0.5, step)
    t = np.tan(2 * np.pi * d)
    zin = z0 * (zl + 1j * z0 * t) / (z0 + 1j * zl * t)
    g = (z0 / zin).real
    # Pozar, Microwave Engineering, 4th ed., sec. 5.3: matchable iff 0 <= y_L <= (1 + t²)/t², t = tan(β·spacing)
    ts = math.tan(2 * math.pi * spacing)
    ok = g <= (1 + ts * ts) / (ts * ts)
    return float(d[np.argmax(ok)])


def test_forbidden_region_reported_and_cured_by_load_line():
    zl, z0, spacing = 10 + 5j, 50.0, 0.125
    res = double_stub(zl, z0, spacing)
    g_load = (z0 / zl).real
    # Pozar, Microwave Engineering, 4th ed., sec. 5.3: the limit for λ/8 spacing is g <= 1/sin²(45°) = 2
    assert double_stub_limit(spacing) == pytest.approx(2.0, rel=1e-12)
    assert g_load > 2.0
    assert not res.matchable and res.solutions == ()
    min_line = res.min_load_line_wl
    # independent fine grid (Pozar eq. 2.44 and sec. 5.3 limit) finds the same shortest cure
    assert min_line == pytest.approx(_first_allowed_length(zl, z0, spacing), abs=2e-5)

    cured = double_stub(zl, z0, spacing, load_line_wl=min_line)
    assert cured.matchable and len(cured.solutions) == 4
    for s in cured.solutions:
        # physical identity: Γ = 0 at the design frequency (Pozar, 4th ed., ch. 5)
        assert _gamma_at_f0(s, zl, z0) < 1e-9

    # a slightly shorter line leaves the load in the forbidden region (Pozar, 4th ed., sec. 5.3 limit)
    assert not double_stub(zl, z0, spacing, load_line_wl=min_line - 0.002).matchable


@pytest.mark.parametrize("spacing", [0.125, 0.375, 0.1])
def test_min_load_line_matches_grid_search(spacing):
    rng = np.random.default_rng(3)
    checked = 0
    for _ in range(20):
        zl = complex(rng.uniform(1.0, 30.0), rng.uniform(-60.0, 60.0))
        res = double_stub(zl, 50.0, spacing)
        if res.matchable:
            assert res.min_load_line_wl == 0.0
            continue
        checked += 1
        # independent grid search with the tan form of the line equation (Pozar, 4th ed., eq. 2.44, sec. 5.3)
        assert res.min_load_line_wl == pytest.approx(_first_allowed_length(zl, 50.0, spacing), abs=2e-5)
    assert checked > 0


# --------------------------------------------------------------------------- edge cases


@pytest.mark.parametrize("zl", [80j, -25j, 0j, complex("inf")])
def test_purely_reactive_load_has_no_solution(zl):
    for res in all_solutions(zl, 50.0):
        # |Γ| = 1 for a lossless load: no lossless network can match it (Pozar, 4th ed., sec. 5.1)
        assert not res.matchable
        assert res.solutions == ()
        assert "reactive" in res.note


def test_matched_load_needs_no_network():
    for res in all_solutions(50.0 + 0j, 50.0):
        # ZL = Z0 gives Γ = 0 (Pozar, 4th ed., eq. 2.35)
        assert res.matchable and res.solutions == ()
        assert "already matched" in res.note


def test_active_load_and_bad_inputs():
    # a negative resistance gives |Γ| > 1; passive lossless matching cannot cancel it (Pozar, 4th ed., eq. 2.35)
    assert not shunt_stub(-10 + 5j, 50.0).matchable
    with pytest.raises(ValueError):
        shunt_stub(60 - 80j, 0.0)
    with pytest.raises(ValueError):
        double_stub(60 - 80j, 50.0, spacing_wl=0.5)
    with pytest.raises(ValueError):
        to_engine(shunt_stub(60 - 80j).solutions[0], -1.0)


def test_physical_length():
    # free-space wavelength at 100 MHz is c/f = 2.998 m; with a velocity factor of 0.66 a quarter wave is
    # 0.4947 m (definition of wavelength and velocity factor; common practice, no source)
    assert length_views(0.25, 100e6, 0.66).m == pytest.approx(0.4947, abs=1e-4)
