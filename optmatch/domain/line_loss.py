"""Cable attenuation (dB/100 m, as data sheets give it) to the engine's whole-line loss figures.

Model: a(f) = kc·√f + kd·f in dB/100 m, the conductor (skin-effect) term growing as √f and the
dielectric term as f.  ``kc`` is in dB/100 m/√Hz and ``kd`` in dB/100 m/Hz.  The engine wants
the whole line's attenuation in nepers: α·ℓ = loss_c·√f + loss_d·f, with 1 dB = ln(10)/20 Np.
"""

from __future__ import annotations

import math

import numpy as np

NEPER_PER_DB = math.log(10.0) / 20.0


class LineLossError(ValueError):
    """Attenuation figures that the √f + f model cannot take (one-line message)."""


def _check_point(f_hz: float, a_db: float, label: str) -> tuple[float, float]:
    f, a = float(f_hz), float(a_db)
    if not math.isfinite(f) or f <= 0.0:
        raise LineLossError(f"{label}: frequency must be positive (got {f_hz!r} Hz)")
    if not math.isfinite(a) or a < 0.0:
        raise LineLossError(f"{label}: attenuation must be non-negative (got {a_db!r} dB/100 m)")
    return f, a


def fit_loss_one_point(f_hz: float, a_db_per_100m: float) -> tuple[float, float]:
    """(kc, kd) from one data-sheet figure, taking all of the loss as conductor loss (kd = 0)."""
    f, a = _check_point(f_hz, a_db_per_100m, "attenuation point")
    return a / math.sqrt(f), 0.0


def fit_loss_two_point(
    f1_hz: float, a1_db_per_100m: float, f2_hz: float, a2_db_per_100m: float
) -> tuple[float, float]:
    """(kc, kd) of a(f) = kc·√f + kd·f through two data-sheet figures (f in Hz, a in dB/100 m).

    Raises :class:`LineLossError` if the two frequencies coincide or the figures would need a
    negative term (loss growing slower than √f or faster than f between the points).
    """
    f1, a1 = _check_point(f1_hz, a1_db_per_100m, "first attenuation point")
    f2, a2 = _check_point(f2_hz, a2_db_per_100m, "second attenuation point")
    if f1 == f2:
        raise LineLossError(f"the two attenuation points share the frequency {f1:g} Hz")
    s1, s2 = math.sqrt(f1), math.sqrt(f2)
    det = s1 * f2 - s2 * f1  # = √(f1 f2)·(√f2 − √f1)
    kc = (a1 * f2 - a2 * f1) / det
    kd = (s1 * a2 - s2 * a1) / det
    fmax, amax = max(f1, f2), max(a1, a2)
    tiny = 1e-12 * amax  # rounding: a term this small is zero
    if kc * math.sqrt(fmax) < -tiny or kd * fmax < -tiny:
        how = "slower than √f" if kd < 0 else "faster than f"
        raise LineLossError(
            f"attenuation {a1:g} dB/100 m at {f1:g} Hz and {a2:g} dB/100 m at {f2:g} Hz grows {how}; "
            "check the figures"
        )
    return max(kc, 0.0), max(kd, 0.0)


def attenuation_db_per_100m(freq_hz: np.ndarray, kc: float, kd: float) -> np.ndarray:
    """a(f) = kc·√f + kd·f (dB/100 m) on ``freq_hz`` (Hz)."""
    f = np.asarray(freq_hz, dtype=float)
    return kc * np.sqrt(f) + kd * f


def line_loss_params(
    length_m: float | np.ndarray, kc: float, kd: float
) -> tuple[float | np.ndarray, float | np.ndarray]:
    """(loss_c, loss_d) for the engine: whole-line nepers per √Hz and per Hz for ``length_m``.

    ``length_m`` may be an array (one length per candidate); the results then are arrays too.
    """
    scale = np.asarray(length_m, dtype=float) / 100.0 * NEPER_PER_DB
    if np.ndim(scale) == 0:
        return float(kc * scale), float(kd * scale)
    return kc * scale, kd * scale
