"""The robustness view of a design: tolerance Monte Carlo (yield) and sensitivities.

Each build draws, per line or stub, a cut error (m), a velocity-factor error and a Z0 error, and
per lumped part a value error, all uniform within ± their tolerance.  Z0 and VF tolerances come
from the cable catalog where the element names a cable; the study may set or override them.
Units: m, fractions (0.02 = 2 %), dB.

With several loads every build is tried on every load: the yield is the weighted share of
(build, load) pairs that meet the mask, and the percentiles are over those pairs.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from optmatch.domain.design import Design
from optmatch.domain.network import Choice
from optmatch.domain.problem import Problem
from optmatch.units import C0

DEFAULT_CUT_M = 1e-3  # ±1 mm: a careful hand cut against a rule (common practice, no source)


@dataclass(frozen=True)
class Spread:
    """Build tolerances: ``cut_m`` (±m on every cable section), ``z0_rel`` and ``vf_rel`` (± fraction;
    None = the cable's own, 0 where it has none), ``parts_rel`` (± fraction on lumped values),
    ``samples`` builds, ``seed``."""

    cut_m: float = DEFAULT_CUT_M
    z0_rel: float | None = None
    vf_rel: float | None = None
    parts_rel: float = 0.0
    samples: int = 500
    seed: int = 0


@dataclass(frozen=True)
class Sensitivity:
    """Margin change (dB) per unit error of one element: per mm of cut, per % of VF, per % of Z0
    (lines and stubs) or per % of value (lumped)."""

    index: int
    db_per_mm: float | None
    db_per_pct_vf: float | None
    db_per_pct_z0: float | None
    db_per_pct_value: float | None


@dataclass(frozen=True)
class Robustness:
    """Monte Carlo result: share of builds meeting the mask, margin percentiles (dB), sensitivities.

    With several loads: the share and percentiles are over builds × loads (weighted by the loads'
    weights), and ``load_yields`` holds each load's own share of builds (the problem's order)."""

    yield_frac: float
    samples: int
    margin_p5_db: float
    margin_p50_db: float
    margin_min_db: float
    sensitivities: tuple[Sensitivity, ...]
    load_yields: tuple[float, ...] = ()

    def as_dict(self) -> dict:
        d = dict(self.__dict__)
        d["sensitivities"] = [s.__dict__ for s in self.sensitivities]
        return d


def _element_tolerances(problem: Problem, design: Design | Choice, spread: Spread) -> list[tuple[float, float]]:
    """(z0_rel, vf_rel) per element from the spread or the chosen medium."""
    choice = design.choice if isinstance(design, Design) else design
    out = []
    for i, el in enumerate(problem.network.elements):
        if not el.is_line_like:
            out.append((0.0, 0.0))
            continue
        med = el.media[choice.medium[i]]
        z0_rel = spread.z0_rel if spread.z0_rel is not None else med.z0_tol_rel
        vf_rel = spread.vf_rel if spread.vf_rel is not None else med.vf_tol_rel
        out.append((z0_rel, vf_rel))
    return out


def perturbed_params(problem: Problem, design: Design, cut_m: np.ndarray, vf_rel: np.ndarray,
                     z0_rel: np.ndarray, value_rel: np.ndarray) -> list[dict]:
    """Engine parameters of builds of ``design`` with errors per build and element, each (n, elements).

    A cable section of physical length ℓ becomes ℓ + cut at VF·(1 + vf_rel) and Z0·(1 + z0_rel);
    its loss scales with its length; connector allowances are left as they are.
    """
    nominal = problem.network.engine_params(design.vector(), design.choice)
    out: list[dict] = []
    for i, (el, p) in enumerate(zip(problem.network.elements, nominal, strict=True)):
        if not el.is_line_like:
            out.append({"value": float(np.ravel(p["value"])[0]) * (1.0 + value_rel[:, i])})
            continue
        vf = el.media[design.choice.medium[i]].vf
        cable_delay = float(np.ravel(p["delay"])[0]) - el.extra_delay
        metres = cable_delay * vf * C0
        new_metres = np.maximum(metres + cut_m[:, i], 0.0)
        new_vf = vf * (1.0 + vf_rel[:, i])
        q = dict(p)
        q["delay"] = new_metres / (new_vf * C0) + el.extra_delay
        q["z0"] = float(np.ravel(p["z0"])[0]) * (1.0 + z0_rel[:, i])
        ratio = new_metres / metres if metres > 0 else np.zeros_like(new_metres)
        for key in ("loss_c", "loss_d"):
            if key in p:
                q[key] = float(np.ravel(p[key])[0]) * ratio
        out.append(q)
    return out


def sensitivities(problem: Problem, design: Design) -> tuple[Sensitivity, ...]:
    """Central differences of the margin: ±0.5 mm cut, ±0.5 % VF, Z0 and lumped value, per element."""
    m = len(problem.network.elements)
    rows: list[tuple[int, int, float]] = []  # (element, quantity, step)
    for i, el in enumerate(problem.network.elements):
        if el.is_line_like:
            rows += [(i, 0, 0.5e-3), (i, 1, 0.005), (i, 2, 0.005)]
        else:
            rows.append((i, 3, 0.005))
    k = 2 * len(rows)
    errs = np.zeros((4, k, m))
    for r, (i, q, h) in enumerate(rows):
        errs[q, 2 * r, i] = h
        errs[q, 2 * r + 1, i] = -h
    margins = problem.margins_of(perturbed_params(problem, design, errs[0], errs[1], errs[2], errs[3]))
    out: dict[int, dict[str, float]] = {}
    scale = {0: 1e-3, 1: 0.01, 2: 0.01, 3: 0.01}  # per mm, per %
    names = {0: "db_per_mm", 1: "db_per_pct_vf", 2: "db_per_pct_z0", 3: "db_per_pct_value"}
    for r, (i, q, h) in enumerate(rows):
        slope = (margins[2 * r] - margins[2 * r + 1]) / (2 * h) * scale[q]
        out.setdefault(i, {})[names[q]] = float(slope)
    return tuple(Sensitivity(i, out[i].get("db_per_mm"), out[i].get("db_per_pct_vf"),
                             out[i].get("db_per_pct_z0"), out[i].get("db_per_pct_value")) for i in sorted(out))


@dataclass(frozen=True)
class Draws:
    """Build errors, one row per simulated build and one column per element, each (K, elements):
    cut (m), velocity-factor and Z0 errors (fractions), lumped value errors (fractions)."""

    cut_m: np.ndarray
    vf_rel: np.ndarray
    z0_rel: np.ndarray
    value_rel: np.ndarray

    @property
    def samples(self) -> int:
        return self.cut_m.shape[0]


def draw_errors(problem: Problem, choice: Choice, spread: Spread, samples: int,
                rng: np.random.Generator) -> Draws:
    """``samples`` builds' errors, uniform within ± each tolerance (cut, then VF, Z0, value)."""
    m = len(problem.network.elements)
    tol = _element_tolerances(problem, choice, spread)
    line_like = np.array([el.is_line_like for el in problem.network.elements])

    def draw(width: np.ndarray) -> np.ndarray:
        return rng.uniform(-1.0, 1.0, (samples, m)) * width

    cut = draw(np.where(line_like, spread.cut_m, 0.0))
    vf = draw(np.array([t[1] for t in tol]))
    z0 = draw(np.array([t[0] for t in tol]))
    value = draw(np.where(line_like, 0.0, spread.parts_rel))
    return Draws(cut, vf, z0, value)


def perturbed_batch(problem: Problem, u: np.ndarray, choice: Choice, draws: Draws) -> list[dict]:
    """Engine parameters of every build of every design: ``u`` (n, dim) designs × ``draws.samples``
    builds, design-major (row = design·K + build); the same rules as :func:`perturbed_params`."""
    u = np.atleast_2d(u)
    n = u.shape[0]
    nominal = problem.network.engine_params(u, choice)
    out: list[dict] = []
    for i, (el, p) in enumerate(zip(problem.network.elements, nominal, strict=True)):
        if not el.is_line_like:
            value = np.broadcast_to(np.asarray(p["value"], dtype=float), (n,))[:, None]
            out.append({"value": (value * (1.0 + draws.value_rel[None, :, i])).ravel()})
            continue
        vf = el.media[choice.medium[i]].vf
        delay = np.broadcast_to(np.asarray(p["delay"], dtype=float), (n,))[:, None]
        metres = (delay - el.extra_delay) * vf * C0
        new_metres = np.maximum(metres + draws.cut_m[None, :, i], 0.0)
        new_vf = vf * (1.0 + draws.vf_rel[None, :, i])
        q = dict(p)
        q["delay"] = (new_metres / (new_vf * C0) + el.extra_delay).ravel()
        z0 = np.broadcast_to(np.asarray(p["z0"], dtype=float), (n,))[:, None]
        q["z0"] = (z0 * (1.0 + draws.z0_rel[None, :, i])).ravel()
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = np.where(metres > 0, new_metres / np.where(metres > 0, metres, 1.0), 0.0)
        for key in ("loss_c", "loss_d"):
            if key in p:
                base = np.broadcast_to(np.asarray(p[key], dtype=float), (n,))[:, None]
                q[key] = (base * ratio).ravel()
        out.append(q)
    return out


YIELD_PERCENTILE = 10.0  # the low percentile of the build margins that breaks yield ties


def pair_figures(problem: Problem, margins: np.ndarray, q: float) -> tuple[np.ndarray, np.ndarray]:
    """Yield and the ``q``-th percentile margin (dB) of build × load margins ``margins`` (n, K, L):
    the loads' weights apply (every pair of a load weighs its share over K)."""
    n, k, nl = margins.shape
    w = problem.weights
    y = np.mean(margins >= 0.0, axis=1) @ w
    flat = margins.reshape(n, k * nl)
    if np.allclose(w, w[0]):
        return y, np.percentile(flat, q, axis=1)
    pair_w = np.tile(w, k)
    return y, np.array([np.percentile(row, q, weights=pair_w, method="inverted_cdf") for row in flat])


def yield_scores(problem: Problem, u: np.ndarray, choice: Choice, draws: Draws) -> tuple[np.ndarray, np.ndarray]:
    """Yield (share of builds meeting the mask; with several loads, of builds × loads) and the
    10th-percentile build margin (dB) of every design in ``u`` (n, dim) over the same ``draws``
    (common random numbers), each (n,)."""
    u = np.atleast_2d(u)
    params = perturbed_batch(problem, u, choice, draws)
    if not problem.several:
        margins = problem.margins_of(params).reshape(u.shape[0], draws.samples)
        return np.mean(margins >= 0.0, axis=1), np.percentile(margins, YIELD_PERCENTILE, axis=1)
    lm = problem.load_margins_of(params).reshape(u.shape[0], draws.samples, problem.n_loads)
    return pair_figures(problem, lm, YIELD_PERCENTILE)


def design_yields(problem: Problem, designs: list[Design], spread: Spread) -> list[tuple[float, float]]:
    """(yield, p10 margin dB) of each design on the draws :func:`monte_carlo` uses (same seed and
    samples), so a ranking by yield agrees with the robustness view's figures."""
    out = []
    for d in designs:
        draws = draw_errors(problem, d.choice, spread, spread.samples, np.random.default_rng(spread.seed))
        y, p10 = yield_scores(problem, d.vector(), d.choice, draws)
        out.append((float(y[0]), float(p10[0])))
    return out


def monte_carlo(problem: Problem, design: Design, spread: Spread) -> Robustness:
    """Yield and margin spread of ``spread.samples`` builds of ``design``, plus sensitivities."""
    draws = draw_errors(problem, design.choice, spread, spread.samples, np.random.default_rng(spread.seed))
    n = draws.samples
    params = perturbed_params(problem, design, draws.cut_m, draws.vf_rel, draws.z0_rel, draws.value_rel)
    if problem.several:
        lm = problem.load_margins_of(params)  # (K, L)
        y, p5 = pair_figures(problem, lm[None], 5.0)
        _, p50 = pair_figures(problem, lm[None], 50.0)
        return Robustness(
            yield_frac=float(y[0]), samples=n, margin_p5_db=float(p5[0]), margin_p50_db=float(p50[0]),
            margin_min_db=float(np.min(lm)), sensitivities=sensitivities(problem, design),
            load_yields=tuple(float(v) for v in np.mean(lm >= 0.0, axis=0)))
    margins = problem.margins_of(params)
    return Robustness(
        yield_frac=float(np.mean(margins >= 0.0)),
        samples=n,
        margin_p5_db=float(np.percentile(margins, 5)),
        margin_p50_db=float(np.percentile(margins, 50)),
        margin_min_db=float(np.min(margins)),
        sensitivities=sensitivities(problem, design),
    )
