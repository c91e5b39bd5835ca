"""Theoretical figures a design is measured against: the Chebyshev equal-ripple transformer and the
Bode–Fano limit for RC and RL loads.

Sources: D. M. Pozar, Microwave Engineering, 4th ed., sec. 5.7 (Chebyshev multisection
transformer, small-reflection theory) and sec. 5.9 (Bode–Fano criterion).
"""

from __future__ import annotations

import math

NP_TO_DB = 20.0 / math.log(10.0)


def chebyshev_sec_theta_m(z_load: float, z_sys: float, sections: int, gamma_max: float) -> float:
    """sec θm of an N-section Chebyshev transformer with passband ripple ``gamma_max``.

    Pozar sec. 5.7: sec θm = cosh[(1/N)·acosh(|ln(ZL/Z0)| / (2Γm))].
    """
    return math.cosh(math.acosh(abs(math.log(z_load / z_sys)) / (2.0 * gamma_max)) / sections)


def chebyshev_bandwidth(z_load: float, z_sys: float, sections: int, gamma_max: float) -> float:
    """Fractional bandwidth Δf/f0 = 2 − 4θm/π of the equal-ripple transformer (Pozar eq. 5.60)."""
    theta_m = math.acos(1.0 / chebyshev_sec_theta_m(z_load, z_sys, sections, gamma_max))
    return 2.0 - 4.0 * theta_m / math.pi


def chebyshev_exact_gamma_max(z_load: float, z_sys: float, sections: int, fractional_bw: float) -> float:
    """Exact passband ripple |Γ|max of the optimum N-section quarter-wave transformer over
    ``fractional_bw`` (commensurate lines, no small-reflection approximation).

    The power-loss ratio 1 + k²·T_N²(cos θ / cos θm) is exactly realisable by stepped lines and is
    the minimax optimum; at θ = 0 it must equal the plain step's mismatch, so
    k = (R − 1) / (2·√R·T_N(sec θm)) and |Γ|max = k/√(1 + k²) with R = ZL/Z0 (G. L. Matthaei,
    L. Young, E. M. T. Jones, Microwave Filters, Impedance-Matching Networks, and Coupling
    Structures, 1964, ch. 6; recalled from memory).
    """
    ratio = max(z_load, z_sys) / min(z_load, z_sys)
    theta_m = math.pi / 4.0 * (2.0 - fractional_bw)
    t_n = math.cosh(sections * math.acosh(1.0 / math.cos(theta_m)))
    k = (ratio - 1.0) / (2.0 * math.sqrt(ratio) * t_n)
    return k / math.sqrt(1.0 + k * k)


def bode_fano_rc_min_gamma(r_ohm: float, c_f: float, f_lo: float, f_hi: float) -> float:
    """Least possible in-band |Γ| (flat over f_lo..f_hi) for a parallel RC load.

    ∫ ln(1/|Γ|) dω ≤ π/(RC)  ⇒  |Γ| ≥ exp(−π / (R C Δω)).
    """
    return math.exp(-math.pi / (r_ohm * c_f * 2.0 * math.pi * (f_hi - f_lo)))


def bode_fano_rl_min_gamma(r_ohm: float, l_h: float, f_lo: float, f_hi: float) -> float:
    """Least possible in-band |Γ| for a series RL load: ∫ ln(1/|Γ|) dω ≤ πR/L."""
    return math.exp(-math.pi * r_ohm / (l_h * 2.0 * math.pi * (f_hi - f_lo)))


def gamma_to_return_loss_db(gamma: float) -> float:
    """Return loss (dB) of a reflection magnitude."""
    return -NP_TO_DB * math.log(gamma)
