"""The measurement's own scatter: how much a measured reflection trace jitters from point to point.

Method: a fourth difference along frequency, d_k = Γ_k − 4Γ_{k+1} + 6Γ_{k+2} − 4Γ_{k+3} + Γ_{k+4},
is zero for any cubic, so it removes the smooth response (locally, over five neighbouring points)
and keeps the point-to-point roughness.  For white noise of standard deviation σ in each of the
real and imaginary parts, each part of d_k has standard deviation σ·√70 (1² + 4² + 6² + 4² + 1² = 70).
σ is then taken from the median absolute value of all parts (median |d| = 0.6745·σ√70 for a
normal distribution), which a few spikes or a sharp resonance cannot drag far.

The estimate is of the white part of the noise only; slow drift and calibration error do not show
in it.  On a sparse grid across a fast-moving response the smooth part leaks in and the estimate
reads high, which makes the verdict more lenient, never stricter.
"""

from __future__ import annotations

import numpy as np

_D4 = np.array([1.0, -4.0, 6.0, -4.0, 1.0])
_GAUSS_MAD = 0.6744897501960817  # median |z| of a standard normal z (the 75th percentile)
MIN_POINTS = len(_D4) + 4


def scatter(gamma: np.ndarray) -> float:
    """Per-part (real or imaginary) noise σ of a reflection trace ``gamma`` (F,), |Γ| units.

    Needs at least :data:`MIN_POINTS` points, roughly evenly spaced.
    """
    g = np.asarray(gamma, dtype=complex).reshape(-1)
    if g.size < MIN_POINTS:
        raise ValueError(f"at least {MIN_POINTS} points are needed to estimate the scatter, got {g.size}")
    d = np.convolve(g, _D4, mode="valid")
    parts = np.concatenate([d.real, d.imag])
    return float(np.median(np.abs(parts)) / (_GAUSS_MAD * np.sqrt(np.sum(_D4**2))))
