"""Fit the as-built network to a bench measurement of its input reflection.

Unknowns (see :mod:`optmatch.bench.asbuilt`): a length error per piece (mm), a velocity-factor
scale per cable that has two or more pieces (%) and a Z0 scale per cable (%), each bounded.  scipy's
bounded least squares (trust-region reflective) minimises the real and imaginary parts of
Γ_model − Γ_measured over the measured band, each divided by the measurement's scatter, together
with gentle priors:

* length errors: a soft-L1 penalty of scale :data:`CUT_PRIOR_MM`.  Most pieces are cut right to a
  millimetre and a few are off by more (a miscut, or an open stub cut long to be trimmed), so the
  penalty grows only like √|δ| for large errors and does not spread one piece's error over the others;
* VF scales: a normal prior of :data:`VF_PRIOR_PCT` (reel-to-reel spread of a few per cent,
  common practice, no source); Z0 scales: a normal prior of :data:`Z0_PRIOR_PCT`.  Both are bounded
  at :data:`SCALE_BOUND_SIGMAS` prior σ: a fit that needs more is not believed.

The priors matter only where the measurement cannot decide: a cut error and a VF change both shift
a piece's delay, so the measurement fixes the delays and the priors split each cable's common
shift (VF) from the pieces' own (cuts).

Standard errors come from the Jacobian J of the normalised residuals at the solution:
cov = (JᵀJ / s² + prior precision)⁻¹ with s² the residual variance, i.e. σ² = s²·diag((JᵀJ)⁻¹)
wherever the data decide.  The verdict compares the residual's rms with the measurement's own
scatter (:mod:`optmatch.bench.scatter`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from scipy.optimize import least_squares

from optmatch.bench.asbuilt import BuildModel
from optmatch.bench.scatter import scatter as estimate_scatter

CUT_PRIOR_MM = 0.5  # soft-L1 scale of the length-error prior (our own value: half a hand-cut's ±1 mm)
VF_PRIOR_PCT = 3.0  # normal prior σ of a cable's VF scale (common practice: a few per cent, no source)
Z0_PRIOR_PCT = 2.0  # normal prior σ of a cable's Z0 scale (common practice: ±1-2 Ω on 50 Ω, no source)
CUT_BOUND_MM = 15.0  # length errors are bounded by ±max(15 mm, 20 % of the piece) (our own values)
CUT_BOUND_FRAC = 0.2
SCALE_BOUND_SIGMAS = 3.0  # VF and Z0 scales within 3 prior σ: ±9 % and ±6 % (our own value)
SCATTER_FLOOR = 0.002  # |Γ| per part: no fit is judged against less (our own value, about −54 dB)
EXPLAINED_RATIO = 3.0  # residual rms / scatter up to this: the model explains the measurement
ROUGH_RATIO = 6.0  # ... up to this: it explains it roughly; above: it does not (our own values)
MAX_FIT_POINTS = 2001  # longer traces are thinned evenly (bounded work)
MIN_FIT_POINTS = 11
_STEP = 1e-3  # central-difference steps (mm and %)

Verdict = Literal["explained", "rough", "not explained"]


@dataclass(frozen=True)
class Fit:
    """The fitted as-built network.

    ``x`` (p,) and ``sigma`` (p,): fitted errors and their standard errors (mm, then %), ``cov`` (p, p)
    their covariance; ``at_bound``:
    which sit on their bound; ``freq`` (F,) Hz with ``gamma_measured`` and ``gamma_fitted`` (F,);
    ``residual_rms``: rms of the real and imaginary residuals (|Γ| units); ``scatter``: the
    measurement's own (before the floor); ``ratio`` = residual_rms / max(scatter, floor).
    """

    model: BuildModel
    x: np.ndarray
    sigma: np.ndarray
    cov: np.ndarray
    at_bound: tuple[bool, ...]
    freq: np.ndarray
    gamma_measured: np.ndarray
    gamma_fitted: np.ndarray
    zload: np.ndarray
    residual_rms: float
    scatter: float
    ratio: float
    verdict: Verdict

    @property
    def errors_mm(self) -> np.ndarray:
        return self.x[: len(self.model.pieces)]

    @property
    def errors_sigma_mm(self) -> np.ndarray:
        return self.sigma[: len(self.model.pieces)]

    @property
    def vf_scale_pct(self) -> np.ndarray:
        """Fitted VF scale (%) per cable of ``model.cables``."""
        return self.x[len(self.model.pieces): len(self.model.pieces) + len(self.model.cables)]

    @property
    def vf_sigma_pct(self) -> np.ndarray:
        return self.sigma[len(self.model.pieces): len(self.model.pieces) + len(self.model.cables)]

    @property
    def z0_scale_pct(self) -> np.ndarray:
        """Fitted Z0 scale (%) per cable of ``model.z0_cables``."""
        return self.x[len(self.model.pieces) + len(self.model.cables):]

    @property
    def z0_sigma_pct(self) -> np.ndarray:
        return self.sigma[len(self.model.pieces) + len(self.model.cables):]

    @property
    def pieces_at_bound(self) -> list[int]:
        """Element indices of pieces whose fitted length error sits on its bound."""
        return [p.index for p, b in zip(self.model.pieces, self.at_bound, strict=False) if b]

    @property
    def explained(self) -> bool:
        return self.verdict != "not explained"


def bounds(model: BuildModel) -> tuple[np.ndarray, np.ndarray]:
    """Lower and upper bounds of the unknowns (mm, then %)."""
    lo, hi = [], []
    for p in model.pieces:
        reach = max(CUT_BOUND_MM, CUT_BOUND_FRAC * p.nominal_mm)
        lo.append(max(-reach, -(p.nominal_mm - 0.1)))
        hi.append(reach)
    scales = _scale_sigmas(model) * SCALE_BOUND_SIGMAS
    return np.concatenate([lo, -scales]), np.concatenate([hi, scales])


def _scale_sigmas(model: BuildModel) -> np.ndarray:
    """Prior σ (%) of the VF scales, then of the Z0 scales."""
    return np.array([VF_PRIOR_PCT] * len(model.cables) + [Z0_PRIOR_PCT] * len(model.z0_cables))


def _prior(x: np.ndarray, n_pieces: int, scale_sigmas: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Prior residuals and their derivatives (diagonal) at ``x`` (p,)."""
    z = x[:n_pieces] / CUT_PRIOR_MM
    root = np.sqrt(1.0 + z * z)
    r_cut = np.sign(z) * np.sqrt(2.0 * (root - 1.0))
    # d/dz of sign(z)·√(2(√(1+z²)−1)) = |z| / (root · r) → 1 at z = 0
    with np.errstate(divide="ignore", invalid="ignore"):
        d_cut = np.where(np.abs(z) < 1e-8, 1.0, np.abs(z) / (root * np.abs(r_cut)))
    return (np.concatenate([r_cut, x[n_pieces:] / scale_sigmas]),
            np.concatenate([d_cut / CUT_PRIOR_MM, 1.0 / scale_sigmas]))


def _thin(n: int) -> np.ndarray:
    """Indices of at most MAX_FIT_POINTS evenly spread points out of ``n``."""
    if n <= MAX_FIT_POINTS:
        return np.arange(n)
    return np.unique(np.round(np.linspace(0, n - 1, MAX_FIT_POINTS)).astype(int))


def verdict_of(ratio: float, at_bound: bool) -> Verdict:
    if at_bound or not np.isfinite(ratio) or ratio > ROUGH_RATIO:
        return "not explained"
    return "explained" if ratio <= EXPLAINED_RATIO else "rough"


def fit_build(model: BuildModel, freq_hz: np.ndarray, gamma_measured: np.ndarray, zload_ohm: np.ndarray) -> Fit:
    """Fit ``model`` to the measured input reflection ``gamma_measured`` (F,), against the system
    impedance, at ``freq_hz`` (F,), with the load ``zload_ohm`` (F,) at those frequencies."""
    f_all = np.asarray(freq_hz, dtype=float)
    g_all = np.asarray(gamma_measured, dtype=complex)
    z_all = np.asarray(zload_ohm, dtype=complex)
    if f_all.size < MIN_FIT_POINTS:
        raise ValueError(f"at least {MIN_FIT_POINTS} measured points are needed for a fit, got {f_all.size}")
    raw_scatter = estimate_scatter(g_all)
    sn = max(raw_scatter, SCATTER_FLOOR)
    keep = _thin(f_all.size)
    f, gm, zl = f_all[keep], g_all[keep], z_all[keep]
    n_pieces, p = len(model.pieces), model.n_params
    lo, hi = bounds(model)
    sigmas = _scale_sigmas(model)

    def data(xs: np.ndarray) -> np.ndarray:
        """Normalised data residuals of builds xs (n, p), shaped (n, 2F)."""
        d = (model.gamma(xs, f, zl) - gm) / sn
        return np.concatenate([d.real, d.imag], axis=1)

    def fun(x: np.ndarray) -> np.ndarray:
        return np.concatenate([data(x.reshape(1, -1))[0], _prior(x, n_pieces, sigmas)[0]])

    def jac(x: np.ndarray) -> np.ndarray:
        steps = np.eye(p) * _STEP
        rows = data(np.vstack([x + steps, x - steps]))
        jd = ((rows[:p] - rows[p:]) / (2.0 * _STEP)).T  # (2F, p)
        return np.vstack([jd, np.diag(_prior(x, n_pieces, sigmas)[1])])

    if p == 0:
        best_x = np.zeros(0)
    else:
        starts = [np.zeros(p)]
        best = least_squares(fun, starts[0], jac=jac, bounds=(lo, hi), method="trf", x_scale="jac")
        if np.sqrt(np.mean(best.fun[: 2 * f.size] ** 2)) > EXPLAINED_RATIO:
            # a poor fit from the design itself: try a few other starts (each unknown pushed halfway
            # to a bound, one at a time) before judging
            for k in range(p):
                for side in (lo[k], hi[k]):
                    x0 = np.zeros(p)
                    x0[k] = 0.5 * side
                    trial = least_squares(fun, x0, jac=jac, bounds=(lo, hi), method="trf", x_scale="jac")
                    if trial.cost < best.cost:
                        best = trial
        best_x = best.x

    x = np.asarray(best_x, dtype=float)
    resid = data(x.reshape(1, -1))[0] * sn
    residual_rms = float(np.sqrt(np.mean(resid**2)))
    cov = np.zeros((p, p))
    if p:
        j = jac(x)
        jd, jp = j[: 2 * f.size], j[2 * f.size:]
        dof = max(2 * f.size - p, 1)
        s2 = max(float(np.sum((resid / sn) ** 2)) / dof, 1e-12)
        precision = jd.T @ jd / s2 + jp.T @ jp
        cov = np.linalg.pinv(precision)
        cov = 0.5 * (cov + cov.T)
    sigma = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    span = hi - lo
    at_bound = tuple(bool(v) for v in (np.minimum(x - lo, hi - x) < 1e-3 * span)) if p else ()
    ratio = residual_rms / sn
    gamma_fit = model.gamma(x.reshape(1, -1), f_all, z_all)[0]
    return Fit(model=model, x=x, sigma=sigma, cov=cov, at_bound=at_bound, freq=f_all, gamma_measured=g_all,
               gamma_fitted=gamma_fit, zload=z_all, residual_rms=residual_rms, scatter=raw_scatter, ratio=ratio,
               verdict=verdict_of(ratio, any(at_bound)))
