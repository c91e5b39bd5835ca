"""Return-loss masks, the frequency grid they imply, and the margin objective.

Units: Hz and dB.  A mask is a list of segments, each with a minimum return loss and
optionally a maximum network loss; the margin is the worst case over the grid of
(return loss − requirement), also taking the loss limit into account, negative when failing.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

DEFAULT_POINTS = 41


@dataclass(frozen=True)
class Segment:
    """One band of the mask: ``f_lo``..``f_hi`` (Hz) must show at least ``min_rl_db`` of return loss;
    the network may lose at most ``max_loss_db`` (None = no limit).  ``vswr`` is the requirement as
    the study gave it when it was a VSWR (``min_rl_db`` is then its return loss), for display."""

    f_lo: float
    f_hi: float
    min_rl_db: float
    max_loss_db: float | None = None
    points: int = DEFAULT_POINTS
    vswr: float | None = None


@dataclass(frozen=True)
class Grid:
    """Frequency grid (Hz) with the requirement at each point.

    ``rl_weight`` = 10^(min_rl/10) so that margin = −10·log10(max |Γ|²·w); ``loss_weight`` likewise
    = 10^(−max_loss/10) (0 where there is no limit).
    """

    freq: np.ndarray
    min_rl_db: np.ndarray
    max_loss_db: np.ndarray  # +inf where unlimited
    rl_weight: np.ndarray
    loss_weight: np.ndarray
    segments: tuple[Segment, ...] = ()

    @property
    def has_loss_limit(self) -> bool:
        return bool(np.any(np.isfinite(self.max_loss_db)))

    @property
    def centre(self) -> float:
        """Centre of the span covered by the mask (Hz), the reference for closed-form seeds."""
        return 0.5 * (float(self.freq.min()) + float(self.freq.max()))


def build_grid(segments: list[Segment]) -> Grid:
    """Concatenate uniform grids of every segment; at each point the strictest covering segment holds."""
    if not segments:
        raise ValueError("a mask needs at least one segment")
    points: set[float] = set()
    for seg in segments:
        if not (0 < seg.f_lo <= seg.f_hi):
            raise ValueError(f"segment {seg.f_lo}..{seg.f_hi} Hz: frequencies must be positive and ascending")
        n = 1 if seg.f_lo == seg.f_hi else max(int(seg.points), 2)
        points.update(float(f) for f in np.linspace(seg.f_lo, seg.f_hi, n))
    freq = np.array(sorted(points))
    req = np.full(freq.size, -np.inf)
    lim = np.full(freq.size, np.inf)
    for seg in segments:
        inside = (freq >= seg.f_lo) & (freq <= seg.f_hi)
        req[inside] = np.maximum(req[inside], seg.min_rl_db)
        if seg.max_loss_db is not None:
            lim[inside] = np.minimum(lim[inside], seg.max_loss_db)
    finite = np.isfinite(lim)
    loss_w = np.where(finite, 10.0 ** (-np.where(finite, lim, 0.0) / 10.0), 0.0)
    return Grid(freq=freq, min_rl_db=req, max_loss_db=lim, rl_weight=10.0 ** (req / 10.0), loss_weight=loss_w,
                segments=tuple(segments))


def margin_terms(gamma_sq: np.ndarray, delivered: np.ndarray | None, grid: Grid) -> np.ndarray:
    """Per-point shortfall ratio r(f) ≥ 0 with margin = −10·log10(max_f r), shape (N, F).

    r = |Γ|²·10^(req/10) for the return loss, and (accepted/delivered)·10^(−max_loss/10) for the
    loss limit; the larger of the two at each point counts.
    """
    r = gamma_sq * grid.rl_weight
    if delivered is not None and grid.has_loss_limit:
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = (1.0 - gamma_sq) / delivered
        ratio = np.where(np.isfinite(ratio), ratio, np.inf)
        r = np.maximum(r, ratio * grid.loss_weight)
    return r


def margin_db(gamma_sq: np.ndarray, delivered: np.ndarray | None, grid: Grid) -> np.ndarray:
    """Margin in dB per candidate (worst case over the grid); positive means the mask is met."""
    worst = np.max(margin_terms(gamma_sq, delivered, grid), axis=-1)
    with np.errstate(divide="ignore"):
        return -10.0 * np.log10(worst)


def worst_point(gamma_sq: np.ndarray, grid: Grid) -> tuple[int, float]:
    """Index of the grid point with the least return-loss clearance, and the return loss there (dB)."""
    with np.errstate(divide="ignore"):
        rl = -10.0 * np.log10(gamma_sq)
    idx = int(np.argmin(rl - grid.min_rl_db))
    return idx, float(rl[idx])
