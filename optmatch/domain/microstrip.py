"""Printed lines: microstrip characteristic impedance and effective permittivity (quasi-static), and
the strip width and physical length that realise a wanted Z0 and delay.

E. Hammerstad and Ø. Jensen, "Accurate models for microstrip computer-aided design", IEEE MTT-S
International Microwave Symposium Digest, 1980, pp. 407–409: homogeneous-line impedance, effective
permittivity and the strip-thickness correction.  Dispersion is neglected (quasi-static figures),
which suits substrates thin against the wavelength.

Units: m, Ω, s; ``er`` is the substrate's relative permittivity.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from scipy.optimize import brentq

from optmatch.units import C0

ETA0 = 376.730313668  # free-space wave impedance, Ω


@dataclass(frozen=True)
class Substrate:
    """A microstrip substrate: relative permittivity ``er``, height ``h_m`` and copper thickness ``t_m``."""

    er: float
    h_m: float
    t_m: float = 0.0

    def __post_init__(self) -> None:
        if not (self.er >= 1.0 and self.h_m > 0.0 and self.t_m >= 0.0):
            raise ValueError(f"substrate needs er >= 1, h > 0 and t >= 0 (got er={self.er}, h={self.h_m} m, "
                             f"t={self.t_m} m)")


def _z_homogeneous(u: float) -> float:
    """Impedance (Ω) of a strip of normalised width u = w/h in air (H–J eq. 1)."""
    f = 6.0 + (2.0 * math.pi - 6.0) * math.exp(-((30.666 / u) ** 0.7528))
    return ETA0 / (2.0 * math.pi) * math.log(f / u + math.sqrt(1.0 + (2.0 / u) ** 2))


def _er_eff_zero_thickness(u: float, er: float) -> float:
    """Effective permittivity of a zero-thickness strip (H–J eqs. 3–5)."""
    a = (1.0 + math.log((u**4 + (u / 52.0) ** 2) / (u**4 + 0.432)) / 49.0
         + math.log(1.0 + (u / 18.1) ** 3) / 18.7)
    b = 0.564 * ((er - 0.9) / (er + 3.0)) ** 0.053
    return (er + 1.0) / 2.0 + (er - 1.0) / 2.0 * (1.0 + 10.0 / u) ** (-a * b)


def line_properties(width_m: float, sub: Substrate) -> tuple[float, float]:
    """(Z0 in Ω, effective permittivity) of a strip ``width_m`` wide on ``sub`` (quasi-static)."""
    if width_m <= 0:
        raise ValueError(f"strip width must be positive, got {width_m} m")
    u = width_m / sub.h_m
    du1 = 0.0
    if sub.t_m > 0:
        th = sub.t_m / sub.h_m
        coth2 = 1.0 / math.tanh(math.sqrt(6.517 * u)) ** 2
        du1 = th / math.pi * math.log(1.0 + 4.0 * math.e / (th * coth2))
    dur = 0.5 * (1.0 + 1.0 / math.cosh(math.sqrt(sub.er - 1.0))) * du1
    u1, ur = u + du1, u + dur
    zr, z1 = _z_homogeneous(ur), _z_homogeneous(u1)
    e_r = _er_eff_zero_thickness(ur, sub.er)
    return zr / math.sqrt(e_r), e_r * (z1 / zr) ** 2


def width_for_z0(z0_ohm: float, sub: Substrate) -> float:
    """Strip width (m) giving ``z0_ohm`` on ``sub``; raises ValueError if no width between h/1000 and
    100·h does."""
    lo, hi = 1e-3 * sub.h_m, 100.0 * sub.h_m

    def gap(log_w: float) -> float:
        return line_properties(math.exp(log_w), sub)[0] - z0_ohm

    g_lo, g_hi = gap(math.log(lo)), gap(math.log(hi))
    if g_lo < 0 or g_hi > 0:
        z_min, z_max = z0_ohm - g_hi, z0_ohm - g_lo
        raise ValueError(f"Z0 {z0_ohm:g} Ω is outside what this substrate gives "
                         f"({z_min:.1f}–{z_max:.1f} Ω for widths h/1000 to 100·h)")
    return math.exp(brentq(gap, math.log(lo), math.log(hi), xtol=1e-14, rtol=1e-13))


@dataclass(frozen=True)
class PrintedLine:
    """A microstrip realising one line section: width (m), ε_eff, velocity factor and length (m)."""

    z0_ohm: float
    width_m: float
    er_eff: float
    vf: float
    length_m: float


def printed_line(z0_ohm: float, delay_s: float, sub: Substrate) -> PrintedLine:
    """Width and physical length of a microstrip with ``z0_ohm`` and one-way ``delay_s`` on ``sub``."""
    w = width_for_z0(z0_ohm, sub)
    _, e = line_properties(w, sub)
    vf = 1.0 / math.sqrt(e)
    return PrintedLine(z0_ohm, w, e, vf, delay_s * vf * C0)


def velocity_factor(z0_ohm: float, sub: Substrate) -> float:
    """Velocity factor 1/√ε_eff of a microstrip of ``z0_ohm`` on ``sub``."""
    return printed_line(z0_ohm, 0.0, sub).vf
