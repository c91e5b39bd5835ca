"""Trims of the fitted as-built network that bring it back onto the mask.

Rules of the bench (common practice, no source): a piece can only get shorter; an open stub is
trimmed at its open end; a short stub (re-shorted) or a line (re-terminated) only when the user
allows it.  The trims maximise the margin of the fitted build against the study's mask; trims under
:data:`MIN_TRIM_MM` are dropped (a hand trim is not finer), and so is any trim that adds less than
:data:`NEGLIGIBLE_DB` to the margin.  The order is the largest single effect first.

When no trim reaches the mask, each piece in turn is re-cut to the best length (longer or shorter,
up to the study's own length bound for it) with the trims re-solved around it, and the best such
recut is proposed.  Lengths in mm, margins in dB.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np

from optmatch.bench.asbuilt import Piece
from optmatch.bench.fit import Fit
from optmatch.units import C0

MIN_TRIM_MM = 0.5  # finer trims are not made by hand (our own value; a cut is good to about ±1 mm)
KEEP_MM = 1.0  # a trimmed piece keeps at least this much cable
NEGLIGIBLE_DB = 0.05  # a trim must add at least this much margin to be worth making (our own value)
SPREAD_DRAWS = 256  # builds drawn from the fit's covariance for the spread of a predicted margin
COARSE_BUDGET = 20000  # candidates in the first, coarse pass over the trims (bounded work)
RESOLUTION_MM = 0.02  # the search refines trims down to this step


@dataclass(frozen=True)
class TrimRules:
    """Which pieces may be trimmed besides open stubs.  Ready-made stock pieces never are (they carry
    connectors); a recut may replace one."""

    short_stubs: bool = False
    lines: bool = False

    def allows(self, piece: Piece) -> bool:
        if piece.stock:
            return False
        if piece.kind == "line":
            return self.lines
        return piece.end == "open" or self.short_stubs


@dataclass(frozen=True)
class PieceTrim:
    """One piece of the plan: fitted ``error_mm`` ± ``sigma_mm``, its fitted length ``built_mm``, the
    ``trim_mm`` to take off, the ``new_mm`` length after, the margin change ``effect_db`` of this trim
    made alone first, the ``step`` in the order (1 = first; 0 = leave it) and whether it ``may`` be
    trimmed under the rules."""

    piece: Piece
    error_mm: float
    sigma_mm: float
    built_mm: float
    trim_mm: float
    new_mm: float
    effect_db: float
    step: int
    may: bool


@dataclass(frozen=True)
class Recut:
    """Re-cut ``piece`` to ``length_mm`` (others as built): predicted ``margin_db`` ± ``margin_sigma_db``."""

    piece: Piece
    length_mm: float
    margin_db: float
    margin_sigma_db: float = 0.0

    @property
    def restores(self) -> bool:
        return self.margin_db >= 0.0


@dataclass(frozen=True)
class TrimPlan:
    """``pieces`` (load outwards), margins of the fitted build before and after the trims (dB) and
    ``x_after`` the unknowns after the trims.  When the trims cannot reach the mask: ``recut``, the
    piece to cut again, and ``recut_plan``, the whole plan with that recut (its trims re-solved)."""

    pieces: tuple[PieceTrim, ...]
    margin_before_db: float
    margin_after_db: float
    x_after: np.ndarray
    recut: Recut | None
    recut_plan: TrimPlan | None = None
    margin_after_sigma_db: float = 0.0

    @property
    def restores(self) -> bool:
        return self.margin_after_db >= 0.0

    @property
    def steps(self) -> list[PieceTrim]:
        """The trims to make, in order."""
        return sorted((t for t in self.pieces if t.step), key=lambda t: t.step)


def _directions(d: int) -> np.ndarray:
    """Pattern of search directions: every ±1/0 combination up to 3 unknowns, the axes beyond."""
    if d <= 3:
        dirs = np.array([v for v in itertools.product((-1.0, 0.0, 1.0), repeat=d) if any(v)])
    else:
        dirs = np.vstack([np.eye(d), -np.eye(d)])
    return dirs


def maximise(score: Callable[[np.ndarray], np.ndarray], lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """The point of the box [lo, hi] (d,) with the highest ``score`` (batched: (n, d) → (n,)).

    A coarse grid of at most :data:`COARSE_BUDGET` points, then a pattern search from the best
    four, halving the step down to :data:`RESOLUTION_MM`.
    """
    d = lo.size
    levels = max(2, int(COARSE_BUDGET ** (1.0 / d)))
    axes = [np.linspace(a, b, max(2, min(levels, int((b - a) / 0.1) + 1))) if b > a else np.array([a])
            for a, b in zip(lo, hi, strict=True)]
    grid = np.array(list(itertools.product(*axes)))
    vals = score(grid)
    order = np.argsort(-vals)[:4]
    pts, best = grid[order], vals[order]
    step = np.array([(ax[1] - ax[0]) if ax.size > 1 else 0.0 for ax in axes])
    dirs = _directions(d)
    while np.max(step) > RESOLUTION_MM:
        cand = np.clip((pts[:, None, :] + dirs[None, :, :] * step).reshape(-1, d), lo, hi)
        v = score(cand).reshape(pts.shape[0], dirs.shape[0])
        k = np.argmax(v, axis=1)
        better = v[np.arange(pts.shape[0]), k] > best + 1e-12
        if not np.any(better):
            step = step / 2.0
            continue
        moved = cand.reshape(pts.shape[0], dirs.shape[0], d)[np.arange(pts.shape[0]), k]
        pts = np.where(better[:, None], moved, pts)
        best = np.where(better, v[np.arange(pts.shape[0]), k], best)
    return pts[int(np.argmax(best))]


class _Lengths:
    """Trims of the ``free`` pieces (mm, ≥ 0) and optionally a new length for one ``recut`` piece,
    applied to the fitted unknowns ``x0``."""

    def __init__(self, fit: Fit, free: list[int], recut: int | None = None) -> None:
        self.model, self.x0 = fit.model, np.asarray(fit.x, dtype=float)
        self.free = [k for k in free if k != recut]
        self.recut = recut
        self.built = self.model.lengths_mm(self.x0)[0]

    def bounds(self, longest_mm: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
        lo = [0.0] * len(self.free)
        hi = [max(0.0, self.built[k] - KEEP_MM) for k in self.free]
        if self.recut is not None:
            lo.append(KEEP_MM)
            hi.append(max(longest_mm, KEEP_MM))
        return np.array(lo), np.array(hi)

    def x(self, v: np.ndarray) -> np.ndarray:
        """Unknowns (n, p) for settings ``v`` (n, d): trims, then the recut length."""
        v = np.atleast_2d(v)
        xs = np.repeat(self.x0.reshape(1, -1), v.shape[0], axis=0)
        for j, k in enumerate(self.free):
            xs[:, k] -= v[:, j]
        if self.recut is not None:
            xs[:, self.recut] = v[:, -1] - self.model.pieces[self.recut].nominal_mm
        return xs

    def score(self, v: np.ndarray) -> np.ndarray:
        return self.model.margins(self.x(v))

    def solve(self, longest_mm: float = 0.0) -> np.ndarray:
        """The best settings, rounded to 0.1 mm, with trims too small to make or to matter dropped;
        a recut piece may be up to ``longest_mm`` long."""
        lo, hi = self.bounds(longest_mm)
        if lo.size == 0 or np.all(hi <= lo):
            return lo
        v = np.round(maximise(self.score, lo, hi), 1)
        nt = len(self.free)
        v[:nt][v[:nt] < MIN_TRIM_MM] = 0.0
        for j in np.argsort(v[:nt]):  # drop trims that buy (almost) nothing, smallest first
            if v[j] == 0.0:
                continue
            without = v.copy()
            without[j] = 0.0
            kept, dropped = self.score(np.vstack([v, without]))
            if kept - dropped < NEGLIGIBLE_DB:
                v = without
        return v


def _longest_mm(fit: Fit, k: int) -> float:
    """The longest recut of piece ``k`` (mm): the study's upper length bound for that element at the
    cable's fitted VF, or, for an element of fixed length, a quarter more than designed or built."""
    model = fit.model
    piece = model.pieces[k]
    el = model.problem.network.elements[piece.index]
    built = float(model.lengths_mm(fit.x)[0][k])
    longest = 1.25 * max(built, piece.nominal_mm)
    option = model.design.choice.medium[piece.index]
    if el.length is not None and not el.length.fixed and el.piece(option) is None:
        vf = piece.vf
        if piece.cable in model.cables:
            vf *= 1.0 + fit.x[len(model.pieces) + model.cables.index(piece.cable)] / 100.0
        hi = el.length.hi
        longest = max(longest, 1e3 * (hi if el.length_basis == "physical" else hi * vf * C0))
    return longest


def margin_sigma_db(fit: Fit, x: np.ndarray, recut: int | None = None) -> float:
    """Standard deviation (dB) of the margin of build ``x`` (p,) that the fit's own uncertainty
    implies: :data:`SPREAD_DRAWS` builds drawn from N(x, cov), with a fixed seed.  A ``recut`` piece
    is cut anew to a known length, so its length is not drawn (its cable's VF still is)."""
    if not fit.x.size or not np.any(fit.cov):
        return 0.0
    rng = np.random.default_rng(0)
    draws = rng.multivariate_normal(np.zeros(fit.x.size), fit.cov, SPREAD_DRAWS, method="eigh")
    if recut is not None:
        draws[:, recut] = 0.0
    return float(np.std(fit.model.margins(np.asarray(x).reshape(1, -1) + draws)))


def _rows(fit: Fit, lengths: _Lengths, v: np.ndarray, before: float) -> tuple[PieceTrim, ...]:
    model, nt = fit.model, len(lengths.free)
    effects = np.zeros(nt)
    for j in range(nt):
        if v[j] > 0.0:
            alone = np.zeros_like(v)
            alone[j] = v[j]
            if lengths.recut is not None:
                alone[-1] = lengths.built[lengths.recut]
            effects[j] = float(lengths.score(alone)[0]) - before
    ranked = [j for j in np.argsort(-effects, kind="stable") if v[j] > 0.0]
    step_of = {lengths.free[j]: n + 1 for n, j in enumerate(ranked)}
    rows = []
    for k, piece in enumerate(model.pieces):
        free = lengths.free.index(k) if k in lengths.free else None
        cut = float(v[free]) if free is not None else 0.0
        built = float(lengths.built[k])
        rows.append(PieceTrim(
            piece=piece, error_mm=float(fit.errors_mm[k]), sigma_mm=float(fit.errors_sigma_mm[k]),
            built_mm=built, trim_mm=cut, new_mm=built - cut,
            effect_db=float(effects[free]) if free is not None else 0.0, step=step_of.get(k, 0),
            may=free is not None,
        ))
    return tuple(rows)


def plan_trims(fit: Fit, rules: TrimRules = TrimRules()) -> TrimPlan:
    """The trims that maximise the margin of the fitted build under ``rules``; when they cannot reach
    the mask, also the best single recut (with the trims re-solved around it)."""
    model = fit.model
    before = float(model.margins(np.asarray(fit.x, dtype=float).reshape(1, -1))[0])
    free = [k for k, p in enumerate(model.pieces) if rules.allows(p)]
    lengths = _Lengths(fit, free)
    v = lengths.solve()
    after = float(lengths.score(v)[0])
    x_after = lengths.x(v)[0]
    plan = TrimPlan(_rows(fit, lengths, v, before), before, after, x_after, None,
                    margin_after_sigma_db=margin_sigma_db(fit, x_after))
    if after >= 0.0:
        return plan
    best: TrimPlan | None = None
    for k in range(len(model.pieces)):
        alt = _Lengths(fit, free, recut=k)
        w = alt.solve(_longest_mm(fit, k))
        margin = float(alt.score(w)[0])
        if best is None or margin > best.margin_after_db:
            best = TrimPlan(_rows(fit, alt, w, before), before, margin, alt.x(w)[0],
                            Recut(model.pieces[k], float(w[-1]), margin))
    if best is None or best.recut is None or best.margin_after_db <= after + NEGLIGIBLE_DB:
        return plan
    spread = margin_sigma_db(fit, best.x_after, model.pieces.index(best.recut.piece))
    recut = replace(best.recut, margin_sigma_db=spread)
    best = replace(best, recut=recut, margin_after_sigma_db=spread)
    return replace(plan, recut=recut, recut_plan=best)
