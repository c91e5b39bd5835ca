"""Closed-form matching solutions for one load at one frequency (textbook stub and transformer designs).

All lengths are electrical, in fractions of the guided wavelength (``_wl``), within [0, 0.5).
Networks are listed from the load outwards, the same order the engine walks them.

The geometry is worked on reflection-coefficient angles rather than ``tan(βd)``, so lengths near
λ/4 (where the impedance form blows up) need no special cases.  Conventions, normalised to the
system impedance: moving a length ``d`` towards the source multiplies Γ by ``exp(-j4πd)``; a
shunt stub of electrical angle βl adds susceptance ``tan(βl)`` (open) or ``-cot(βl)`` (short); a
series stub adds reactance ``-cot(βl)`` (open) or ``tan(βl)`` (short).
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass
from typing import Literal

from optmatch.domain.network import LINE_STAGES
from optmatch.engine.cascade import Stage

Topology = Literal["shunt_stub", "series_stub", "double_stub", "quarter_wave"]
ElementKind = Literal["line", "shunt_stub", "series_stub"]
End = Literal["open", "short"]

ENDS: tuple[End, End] = ("open", "short")
_MATCHED_TOL = 1e-12  # |Γ| below which the load counts as already matched
_LOSSLESS_TOL = 1e-12  # normalised resistance below which the load counts as purely reactive


@dataclass(frozen=True)
class SolvedElement:
    """One element of a closed-form network.

    role: what the element does in its topology (``line``, ``stub``, ``load_line``, ``stub_load``,
    ``spacing``, ``stub_input``, ``transformer``).
    kind: ``line``, ``shunt_stub`` or ``series_stub``; end: ``open``/``short`` for stubs, else None.
    length_wl: electrical length in guided wavelengths, [0, 0.5); z0_ohm: characteristic impedance.
    """

    role: str
    kind: ElementKind
    end: End | None
    length_wl: float
    z0_ohm: float


@dataclass(frozen=True)
class Solution:
    """A network that matches the load exactly at the design frequency.

    branch: which of the topology's solution branches (0 or 1; see each solver).
    elements: from the load outwards.
    """

    topology: Topology
    branch: int
    elements: tuple[SolvedElement, ...]
    note: str = ""

    @property
    def total_length_wl(self) -> float:
        """Sum of all element lengths (wavelengths)."""
        return float(sum(e.length_wl for e in self.elements))


@dataclass(frozen=True)
class SpotResult:
    """All closed-form solutions of one topology for one load.

    matchable: False when the topology cannot match this load (reason in ``note``).
    solutions: shortest total length first; empty when unmatchable or already matched.
    min_load_line_wl: double stub only: the shortest load-side line (from the load, [0, 0.5))
    that takes the load out of the forbidden region; None for other topologies or loads that
    no double stub can match.
    """

    topology: Topology
    matchable: bool
    solutions: tuple[Solution, ...]
    note: str = ""
    min_load_line_wl: float | None = None


# --------------------------------------------------------------------------- helpers


def _wrap(length_wl: float) -> float:
    """Fold a length into [0, 0.5) (lines and stubs repeat every half wavelength)."""
    r = length_wl % 0.5
    return 0.0 if r > 0.5 - 1e-13 else r


def _gamma(zl_ohm: complex, z0_ohm: float) -> complex:
    """Load reflection coefficient against z0 (an infinite load gives Γ = 1)."""
    zl = complex(zl_ohm)
    if cmath.isinf(zl):
        return 1.0 + 0.0j
    return (zl - z0_ohm) / (zl + z0_ohm)


def _check_z0(z0_ohm: float) -> float:
    z0 = float(z0_ohm)
    if not (math.isfinite(z0) and z0 > 0.0):
        raise ValueError(f"system impedance must be a positive finite number of ohms, got {z0_ohm!r}")
    return z0


def _screen(topology: Topology, zl_ohm: complex, z0_ohm: float) -> SpotResult | None:
    """Result for loads no topology needs or can handle (matched, reactive, active), else None."""
    zl = complex(zl_ohm)
    if cmath.isnan(zl):
        raise ValueError(f"load impedance is not a number: {zl_ohm!r}")
    if cmath.isinf(zl):
        return SpotResult(
            topology, False, (), "load is an open circuit (purely reactive): no lossless network can match it"
        )
    r = zl.real / z0_ohm
    if r < -_LOSSLESS_TOL:
        return SpotResult(
            topology, False, (), "load has negative resistance (active): passive matching does not apply"
        )
    if r <= _LOSSLESS_TOL:
        return SpotResult(
            topology, False, (), "load is purely reactive (|Γ| = 1): no lossless network can match it"
        )
    if abs(_gamma(zl, z0_ohm)) < _MATCHED_TOL:
        return SpotResult(topology, True, (), "load already matched (Γ = 0): no network needed")
    return None


def _shunt_stub_length(susceptance: float, end: End) -> float:
    """Length of a shunt stub with normalised input susceptance ``susceptance``."""
    if end == "open":  # tan(βl) = b
        return _wrap(math.atan2(susceptance, 1.0) / (2.0 * math.pi))
    return _wrap(math.atan2(1.0, -susceptance) / (2.0 * math.pi))  # -cot(βl) = b


def _series_stub_length(reactance: float, end: End) -> float:
    """Length of a series stub with normalised input reactance ``reactance``."""
    if end == "short":  # tan(βl) = x
        return _wrap(math.atan2(reactance, 1.0) / (2.0 * math.pi))
    return _wrap(math.atan2(1.0, -reactance) / (2.0 * math.pi))  # -cot(βl) = x


def _sorted(solutions: list[Solution]) -> tuple[Solution, ...]:
    return tuple(sorted(solutions, key=lambda s: (s.total_length_wl, s.branch)))


# --------------------------------------------------------------------------- single stubs


def _single_stub(zl_ohm: complex, z0_ohm: float, shunt: bool) -> SpotResult:
    topology: Topology = "shunt_stub" if shunt else "series_stub"
    z0 = _check_z0(z0_ohm)
    early = _screen(topology, zl_ohm, z0)
    if early is not None:
        return early
    g = _gamma(zl_ohm, z0)
    rho, theta_l = abs(g), cmath.phase(g)
    # the unit-conductance circle is |Γ|² + Re Γ = 0, the unit-resistance circle |Γ|² - Re Γ = 0
    alpha = math.acos(-rho if shunt else rho)
    candidates = []
    for theta in (alpha, -alpha):
        d = _wrap((theta_l - theta) / (4.0 * math.pi))
        # imaginary part of y (shunt) or z (series) where the line ends on the unit circle
        im = (-2.0 if shunt else 2.0) * rho * math.sin(theta) / (1.0 - rho * rho)
        candidates.append((d, im))
    candidates.sort()
    kind: ElementKind = "shunt_stub" if shunt else "series_stub"
    word = "susceptance" if shunt else "reactance"
    out = []
    for branch, (d, im) in enumerate(candidates):
        for end in ENDS:
            length = _shunt_stub_length(-im, end) if shunt else _series_stub_length(-im, end)
            elements = (
                SolvedElement("line", "line", None, d, z0),
                SolvedElement("stub", kind, end, length, z0),
            )
            note = f"line to the unit circle, then a {end} stub of normalised {word} {-im:+.4f}"
            out.append(Solution(topology, branch, elements, note))
    return SpotResult(topology, True, _sorted(out))


def shunt_stub(zl_ohm: complex, z0_ohm: float = 50.0) -> SpotResult:
    """Series line from the load, then a shunt stub (open and short ends, both branches).

    branch 0 has the shorter line, branch 1 the longer.  Lines and stubs have Z0 = ``z0_ohm``.
    """
    return _single_stub(zl_ohm, z0_ohm, shunt=True)


def series_stub(zl_ohm: complex, z0_ohm: float = 50.0) -> SpotResult:
    """Series line from the load, then a series stub (open and short ends, both branches).

    branch 0 has the shorter line, branch 1 the longer.  Lines and stubs have Z0 = ``z0_ohm``.
    """
    return _single_stub(zl_ohm, z0_ohm, shunt=False)


# --------------------------------------------------------------------------- double stub


def _rotate(gamma: complex, length_wl: float) -> complex:
    """Γ seen a line of ``length_wl`` further towards the source."""
    return gamma * cmath.exp(-4j * math.pi * length_wl)


def _admittance(gamma: complex) -> complex:
    return (1.0 - gamma) / (1.0 + gamma)


def double_stub_limit(spacing_wl: float) -> float:
    """Largest normalised conductance at the load-end stub that a double stub can match."""
    s = math.sin(2.0 * math.pi * spacing_wl)
    return 1.0 / (s * s)


def _check_spacing(spacing_wl: float) -> float:
    s = float(spacing_wl)
    if not math.isfinite(s) or s <= 0.0 or abs(math.sin(2.0 * math.pi * s)) < 1e-6:
        raise ValueError(
            f"double stub spacing must be positive and not a multiple of 0.5 wavelength, got {spacing_wl!r}"
        )
    return s


def _min_load_line(gamma_l: complex, g_max: float) -> float:
    """Shortest line from the load after which the conductance is at most ``g_max``.

    On the |Γ| = ρ circle, g = (1 - ρ²) / (1 + 2ρ cos θ + ρ²) ≤ g_max ⇔ cos θ ≥ κ; moving towards
    the source turns θ clockwise, so the first allowed angle reached is θ = acos(κ).
    """
    rho = abs(gamma_l)
    if rho == 0.0:
        return 0.0
    kappa = ((1.0 - rho * rho) / g_max - 1.0 - rho * rho) / (2.0 * rho)
    if kappa <= -1.0:
        return 0.0
    alpha = math.acos(min(kappa, 1.0))
    theta = cmath.phase(gamma_l) % (2.0 * math.pi)
    if theta <= alpha or theta >= 2.0 * math.pi - alpha:
        return 0.0
    return _wrap((theta - alpha) / (4.0 * math.pi))


def double_stub(
    zl_ohm: complex,
    z0_ohm: float = 50.0,
    spacing_wl: float = 0.125,
    load_line_wl: float = 0.0,
) -> SpotResult:
    """Two shunt stubs ``spacing_wl`` apart, the first after a load-side line of ``load_line_wl``.

    Elements from the load: ``load_line`` (only when ``load_line_wl`` > 0), ``stub_load``,
    ``spacing``, ``stub_input``; both stubs share one end type (open and short both returned).
    branch 0 is the root with the larger load-end stub susceptance, branch 1 the smaller.
    Loads whose conductance at the first stub exceeds 1 / sin²(2π·spacing) cannot be matched
    (the forbidden region); the result then has ``matchable`` False and ``min_load_line_wl``
    gives the shortest load-side line that cures it.
    """
    topology: Topology = "double_stub"
    z0 = _check_z0(z0_ohm)
    spacing = _check_spacing(spacing_wl)
    load_line = float(load_line_wl)
    if not math.isfinite(load_line) or load_line < 0.0:
        raise ValueError(
            f"load-side line length must be a non-negative number of wavelengths, got {load_line_wl!r}"
        )
    early = _screen(topology, zl_ohm, z0)
    if early is not None:
        return early
    g_max = double_stub_limit(spacing)
    gamma_l = _gamma(zl_ohm, z0)
    min_line = _min_load_line(gamma_l, g_max)
    gamma_a = _rotate(gamma_l, load_line)
    y_a = _admittance(gamma_a)
    g = y_a.real
    # points of constant conductance g: Γ1 = c + r e^{jφ}; after the spacing line they must sit on
    # the unit-conductance circle |Γ2|² + Re Γ2 = 0, which is A cos φ + B sin φ = C
    c, r = -g / (1.0 + g), 1.0 / (1.0 + g)
    psi = 4.0 * math.pi * spacing
    a_coef = r * (2.0 * c + math.cos(psi))
    b_coef = r * math.sin(psi)
    c_coef = -(c * c + r * r + c * math.cos(psi))
    amp = math.hypot(a_coef, b_coef)
    ratio = c_coef / amp
    if abs(ratio) > 1.0 + 1e-12:
        note = (
            f"load-end conductance {g:.4f} exceeds the limit {g_max:.4f} for spacing {spacing:.4f} wavelength "
            f"(forbidden region); the shortest load-side line that makes it matchable is {min_line:.6f} wavelength"
        )
        return SpotResult(topology, False, (), note, min_line)
    spread = math.acos(max(-1.0, min(1.0, ratio)))
    base = math.atan2(b_coef, a_coef)
    roots = []
    for phi in (base + spread, base - spread):
        gamma_1 = c + r * cmath.exp(1j * phi)
        b_stub1 = _admittance(gamma_1).imag - y_a.imag
        b_stub2 = -_admittance(_rotate(gamma_1, spacing)).imag
        roots.append((b_stub1, b_stub2))
    roots.sort(reverse=True)
    out = []
    for branch, (b1, b2) in enumerate(roots):
        for end in ENDS:
            elements = []
            if load_line > 0.0:
                elements.append(SolvedElement("load_line", "line", None, _wrap(load_line), z0))
            elements += [
                SolvedElement("stub_load", "shunt_stub", end, _shunt_stub_length(b1, end), z0),
                SolvedElement("spacing", "line", None, _wrap(spacing), z0),
                SolvedElement("stub_input", "shunt_stub", end, _shunt_stub_length(b2, end), z0),
            ]
            note = f"{end} stubs of normalised susceptance {b1:+.4f} (load end) and {b2:+.4f} (input end)"
            out.append(Solution(topology, branch, tuple(elements), note))
    return SpotResult(topology, True, _sorted(out), min_load_line_wl=min_line)


# --------------------------------------------------------------------------- quarter-wave


def quarter_wave(zl_ohm: complex, z0_ohm: float = 50.0) -> SpotResult:
    """Line to a voltage maximum or minimum (where Z is real), then a λ/4 section of √(Z0·R).

    Elements from the load: ``line`` (length 0 for a real load on the matching side) and
    ``transformer`` (0.25 wavelength, Z0 = √(z0·R)).  branch 0 goes to the voltage maximum
    (R = Z0·VSWR), branch 1 to the voltage minimum (R = Z0/VSWR).  A real load therefore gives
    the plain transformer Z1 = √(Z0·RL) with a zero-length line.
    """
    topology: Topology = "quarter_wave"
    z0 = _check_z0(z0_ohm)
    early = _screen(topology, zl_ohm, z0)
    if early is not None:
        return early
    g = _gamma(zl_ohm, z0)
    rho, theta_l = abs(g), cmath.phase(g) % (2.0 * math.pi)
    vswr = (1.0 + rho) / (1.0 - rho)
    out = []
    for branch, (target, r_ohm, where) in enumerate(
        ((0.0, z0 * vswr, "voltage maximum"), (math.pi, z0 / vswr, "voltage minimum"))
    ):
        d = _wrap((theta_l - target) / (4.0 * math.pi))
        z1 = math.sqrt(z0 * r_ohm)
        elements = (
            SolvedElement("line", "line", None, d, z0),
            SolvedElement("transformer", "line", None, 0.25, z1),
        )
        note = f"line to the {where} (R = {r_ohm:.4g} ohm), then a quarter-wave section of {z1:.4g} ohm"
        out.append(Solution(topology, branch, elements, note))
    return SpotResult(topology, True, _sorted(out))


# --------------------------------------------------------------------------- all, and engine form


def all_solutions(
    zl_ohm: complex,
    z0_ohm: float = 50.0,
    spacing_wl: float = 0.125,
    load_line_wl: float = 0.0,
) -> tuple[SpotResult, ...]:
    """Every topology's result for one load: shunt stub, series stub, double stub, quarter-wave."""
    return (
        shunt_stub(zl_ohm, z0_ohm),
        series_stub(zl_ohm, z0_ohm),
        double_stub(zl_ohm, z0_ohm, spacing_wl, load_line_wl),
        quarter_wave(zl_ohm, z0_ohm),
    )


SPEED_OF_LIGHT_M_PER_S = 299_792_458.0


def to_engine(solution: Solution, f0_hz: float) -> tuple[list[Stage], list[dict[str, float | bool]]]:
    """Engine stages and scalar parameters for a solution designed at ``f0_hz`` (lossless lines).

    delay (s) = length_wl / f0_hz; the velocity factor does not enter the delay.
    """
    if not (math.isfinite(f0_hz) and f0_hz > 0.0):
        raise ValueError(f"design frequency must be a positive number of hertz, got {f0_hz!r}")
    stages, params = [], []
    for e in solution.elements:
        stages.append(LINE_STAGES[e.kind])
        p: dict[str, float | bool] = {"z0": e.z0_ohm, "delay": e.length_wl / f0_hz}
        if e.kind != "line":
            p["short"] = e.end == "short"
        params.append(p)
    return stages, params
