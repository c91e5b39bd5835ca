"""Inner search for one set of discrete choices: a vectorised population search over the unit
cube, then an exact minimax polish of the best few (SLSQP on the per-point shortfalls, with exact
gradients from the engine's tangent walk).

Pure numerics (numpy, scipy); the objective is any function mapping unit vectors (n, d) to a
score per row (higher is better), so whole generations go through the engine as one batch.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.optimize import minimize

Objective = Callable[[np.ndarray], np.ndarray]


@dataclass(frozen=True)
class InnerResult:
    """Best unit vectors found (best first) with their scores, and the evaluation count."""

    u: np.ndarray
    score: np.ndarray
    evaluations: int


def population_search(
    score: Objective,
    dim: int,
    rng: np.random.Generator,
    seeds: np.ndarray | None = None,
    population: int = 64,
    generations: int = 60,
    stall: int | None = None,
) -> InnerResult:
    """Differential evolution, best/1/bin (R. Storn and K. Price, 1997): each trial point is the best
    point plus F·(x_r1 − x_r2), F drawn in [0.5, 1] every generation, crossed with its parent at
    rate :data:`CROSSOVER`; a coordinate pushed outside [0, 1] is drawn afresh, uniformly, which
    keeps the population exploring.  (This finds the narrow basins of multi-stub networks far more
    often than an adaptive current-to-pbest variant did; see benchmarks/search.py.)

    ``seeds`` (k, dim) enter the first generation; the rest is a Latin hypercube sample.  With
    ``stall``, the search ends early once the population has settled in one basin: the best score
    has gained less than :data:`STALL_GAIN` over that many generations and every coordinate spans
    less than :data:`STALL_SPREAD`.
    """
    pop_n = max(population, 8)
    # Latin hypercube initial sample
    cut = (rng.permuted(np.tile(np.arange(pop_n), (dim, 1)), axis=1).T + rng.random((pop_n, dim))) / pop_n
    pop = cut
    if seeds is not None and len(seeds):
        k = min(len(seeds), pop_n // 2)
        pop[:k] = np.clip(seeds[:k], 0.0, 1.0)
    fit = score(pop)
    evals = pop_n
    history = [float(np.max(fit))]
    for _ in range(generations):
        if (stall is not None and len(history) > stall and history[-1] - history[-1 - stall] < STALL_GAIN
                and float(np.max(np.ptp(pop, axis=0))) < STALL_SPREAD):
            break
        best = pop[int(np.argmax(fit))]
        f = rng.uniform(0.5, 1.0)
        r1 = rng.integers(0, pop_n, pop_n)
        r2 = rng.integers(0, pop_n, pop_n)
        mutant = best + f * (pop[r1] - pop[r2])
        outside = (mutant < 0.0) | (mutant > 1.0)
        mutant = np.where(outside, rng.random(mutant.shape), mutant)
        cross = rng.random((pop_n, dim)) < CROSSOVER
        cross[np.arange(pop_n), rng.integers(0, dim, pop_n)] = True
        trial = np.where(cross, mutant, pop)
        trial_fit = score(trial)
        evals += pop_n
        better = trial_fit >= fit
        pop = np.where(better[:, None], trial, pop)
        fit = np.where(better, trial_fit, fit)
        history.append(float(np.max(fit)))
    order = np.argsort(-fit)
    return InnerResult(u=pop[order], score=fit[order], evaluations=evals)


def _epigraph_cost(z: np.ndarray) -> float:
    """The bound ``t`` of the epigraph form (the last coordinate), which the polish minimises."""
    return z[-1]


def minimax_polish(
    shortfall: Callable[[np.ndarray], np.ndarray],
    u0: np.ndarray,
    step: float = 1e-7,
    max_iter: int = 40,
) -> tuple[np.ndarray, int]:
    """Exact minimax refinement: minimise t subject to shortfall_k(u) ≤ t at every grid point k.

    ``shortfall(u (n, d)) -> (n, F)`` in dB (the score is ``-max_k``).  SLSQP over (u, t) with the
    constraint Jacobian by forward differences, one batch of d + 1 points per iteration.
    Returns the better of the start and the result, and the evaluations used.
    """
    d = u0.size
    evals = 0
    eye = np.eye(d) * step
    cache: dict[bytes, tuple[np.ndarray, np.ndarray]] = {}

    def values(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        nonlocal evals
        key = x.tobytes()
        if key not in cache:
            pts = np.vstack([x, np.clip(x + eye, 0.0, 1.0)])
            vals = shortfall(pts)
            evals += d + 1
            h = np.diag(pts[1:] - x)
            h = np.where(np.abs(h) > 0, h, step)
            cache.clear()
            cache[key] = (vals[0], ((vals[1:] - vals[0]) / h[:, None]).T)
        return cache[key]

    def cons(z: np.ndarray) -> np.ndarray:
        return z[-1] - values(z[:-1])[0]

    def cons_jac(z: np.ndarray) -> np.ndarray:
        jac = values(z[:-1])[1]
        return np.hstack([-jac, np.ones((jac.shape[0], 1))])

    start = np.asarray(u0, dtype=float)
    t0 = float(np.max(shortfall(start[None, :])[0]))
    evals += 1
    z0 = np.append(start, t0)

    def cost_grad(z: np.ndarray) -> np.ndarray:
        return np.eye(d + 1)[-1]

    res = minimize(  # type: ignore[call-overload]  # scipy-stubs want a scalar constraint; SLSQP takes ours
        _epigraph_cost, z0, jac=cost_grad, method="SLSQP",
        bounds=[(0.0, 1.0)] * d + [(None, None)],
        constraints=[{"type": "ineq", "fun": cons, "jac": cons_jac}],
        options={"maxiter": max_iter, "ftol": 1e-10})
    x = np.clip(res.x[:-1], 0.0, 1.0)
    t = float(np.max(shortfall(x[None, :])[0]))
    evals += 1
    return (x, evals) if t < t0 else (start, evals)


ShortfallGrad = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]
CROSSOVER = 0.7  # share of coordinates a trial point takes from its mutant
STALL_GAIN = 1e-3  # a population gaining less than this over STALL_GENERATIONS has settled
STALL_GENERATIONS = 10
STALL_SPREAD = 0.05  # ... and whose points all lie within this of each other (unit cube, per coordinate)
RESTART_GROWTH = 1.5  # each restart's population is this much larger (up to RESTART_MAX times the first)
RESTART_MAX = 3
RESTART_MIN_GENERATIONS = 12  # a restart needs at least this many generations of budget left
BASIN_APART = 0.05  # polish picks at least this far apart (unit-cube max norm): one per basin
POLISH_WITHIN_DB = 1.0  # polish only picks within this of the best unpolished score
POLISH_REACH = 0.1  # the exact polish stays within this of its start (unit cube): a local refinement
FLOOR_DB = 10.0  # polish: points this far below the start's worst point are held at that floor


def _floored(vals: np.ndarray, grads: np.ndarray, floor: float) -> tuple[np.ndarray, np.ndarray]:
    """Shortfalls held at ``floor`` from below, gradient zero there: deep nulls of |Γ| (whose dB
    slopes are huge) then cannot spoil the linearised subproblem, and the worst point, which is
    far above the floor, is unchanged."""
    low = vals < floor
    return np.where(low, floor, vals), np.where(low[:, None], 0.0, grads)


def _polish_one(shortfall: Callable[[np.ndarray], np.ndarray], shortfall_grad: ShortfallGrad,
                u0: np.ndarray, s0: np.ndarray, g0: np.ndarray, max_iter: int,
                ftol: float, hold: np.ndarray | None = None) -> tuple[np.ndarray, int]:
    """One start of :func:`minimax_polish_exact`, given its shortfalls ``s0`` and gradients ``g0``;
    ``hold`` (F,) marks points that must stay at or below 0 dB (met) as well."""
    d = u0.size
    evals = 0
    t0 = float(np.max(s0))
    floor = t0 - FLOOR_DB
    held = hold is not None and bool(np.any(hold))
    low = min(floor, -FLOOR_DB) if held else floor  # held points need their values down to -FLOOR_DB
    v_start, g_start = _floored(s0, g0, low)
    vals_at: dict[bytes, np.ndarray] = {u0.tobytes(): v_start}
    grad_at: dict[bytes, np.ndarray] = {u0.tobytes(): g_start}

    def values(x: np.ndarray) -> np.ndarray:
        nonlocal evals
        key = x.tobytes()
        if key not in vals_at:
            vals_at.clear()
            vals_at[key] = np.maximum(shortfall(x[None, :])[0], low)
            evals += 1
        return vals_at[key]

    def grads(x: np.ndarray) -> np.ndarray:
        nonlocal evals
        key = x.tobytes()
        if key not in grad_at:
            v, g = shortfall_grad(x[None, :])
            evals += 1
            vv, gg = _floored(v[0], g[0], low)
            grad_at.clear()
            grad_at[key] = gg
            vals_at.clear()
            vals_at[key] = vv
        return grad_at[key]

    def cons(z: np.ndarray) -> np.ndarray:
        return z[-1] - np.maximum(values(np.clip(z[:-1], 0.0, 1.0)), floor)

    def cons_jac(z: np.ndarray) -> np.ndarray:
        x = np.clip(z[:-1], 0.0, 1.0)
        jac = grads(x)  # fills the values' cache too
        jac = np.where((values(x) < floor)[:, None], 0.0, jac)
        return np.hstack([-jac, np.ones((jac.shape[0], 1))])

    constraints = [{"type": "ineq", "fun": cons, "jac": cons_jac}]
    if held:
        def cons_held(z: np.ndarray) -> np.ndarray:
            return -values(np.clip(z[:-1], 0.0, 1.0))[hold]

        def cons_held_jac(z: np.ndarray) -> np.ndarray:
            jac = grads(np.clip(z[:-1], 0.0, 1.0))[hold]
            return np.hstack([-jac, np.zeros((jac.shape[0], 1))])

        constraints.append({"type": "ineq", "fun": cons_held, "jac": cons_held_jac})
    cost = np.eye(d + 1)[-1]

    def cost_grad(z: np.ndarray) -> np.ndarray:
        return cost

    res = minimize(  # type: ignore[call-overload]  # scipy-stubs want a scalar constraint; SLSQP takes ours
        _epigraph_cost, np.append(u0, t0), jac=cost_grad, method="SLSQP",
        bounds=[(max(0.0, x0 - POLISH_REACH), min(1.0, x0 + POLISH_REACH)) for x0 in u0] + [(None, None)],
        constraints=constraints,
        options={"maxiter": max_iter, "ftol": ftol})
    x = np.clip(res.x[:-1], 0.0, 1.0)
    v = values(x)
    better = float(np.max(v)) < t0 and (not held or float(np.max(v[hold])) <= 0.0)
    return (x if better else u0.copy()), evals


HoldFn = Callable[[np.ndarray], np.ndarray]


def minimax_polish_exact(
    shortfall: Callable[[np.ndarray], np.ndarray],
    shortfall_grad: ShortfallGrad,
    u0: np.ndarray,
    max_iter: int = 40,
    ftol: float = 1e-10,
    hold: HoldFn | None = None,
) -> tuple[np.ndarray, int]:
    """Exact minimax refinement of every start in ``u0`` (m, d), with exact gradients.

    Per start: minimise t subject to shortfall_k(u) ≤ t at every grid point k (SLSQP over (u, t)),
    within :data:`POLISH_REACH` of the start (the population search has found the basin).
    ``shortfall(u (n, d)) -> (n, F)`` gives the values (line-search points need no more) and
    ``shortfall_grad(u) -> (values (n, F), gradients (n, F, d))`` the constraint Jacobian in one
    engine call, where forward differences took d + 1.  (One SLSQP problem holding every start as
    a block was tried: its subproblem grows with the square of the starts and it needed more
    iterations, so each start gets its own.)  ``hold(shortfalls (F,)) -> (F,) bool``, when given,
    marks the points of a start that must also stay met (shortfall ≤ 0 dB) on the way.  Returns,
    per start, the better of the start and the result, and the evaluations used.
    """
    u0 = np.atleast_2d(np.asarray(u0, dtype=float))
    s0, g0 = shortfall_grad(u0)
    evals = u0.shape[0]
    out = u0.copy()
    for a in range(u0.shape[0]):
        out[a], used = _polish_one(shortfall, shortfall_grad, u0[a], s0[a], g0[a], max_iter, ftol,
                                   hold(s0[a]) if hold is not None else None)
        evals += used
    return out, evals


def _penalised(score: Objective, known: np.ndarray | None, radius: float, depth_db: float) -> Objective:
    """``score`` less ``depth_db`` within ``radius`` (max norm) of any of the ``known`` points."""
    if known is None or not len(known):
        return score
    known = np.atleast_2d(known)

    def penalised(u: np.ndarray) -> np.ndarray:
        near = np.min(np.max(np.abs(u[:, None, :] - known[None, :, :]), axis=2), axis=1)
        return score(u) - depth_db * (near <= radius)

    return penalised


def _restarted_search(score: Objective, dim: int, rng: np.random.Generator, seeds: np.ndarray | None,
                      population: int, generations: int, avoid: np.ndarray | None, avoid_radius: float,
                      avoid_db: float) -> InnerResult:
    """Population searches within one budget of ``population`` × (``generations`` + 1) evaluations:
    when a population settles (:data:`STALL_GENERATIONS`), its best joins the basins to avoid and a
    larger population (:data:`RESTART_GROWTH`) starts afresh elsewhere.  Every population's points
    are returned, ranked by the plain ``score``."""
    budget = population * (generations + 1)
    used = 0
    size = population
    found: list[np.ndarray] = []
    pools: list[np.ndarray] = []
    while True:
        gens = budget // size - 1 if pools else generations
        if pools and gens < RESTART_MIN_GENERATIONS:
            break
        known = [np.atleast_2d(avoid)] if avoid is not None and len(avoid) else []
        known += [np.array(found)] if found else []
        avoided = np.vstack(known) if known else None
        res = population_search(_penalised(score, avoided, avoid_radius, avoid_db), dim, rng,
                                seeds if not pools else None, size, max(gens, 0), stall=STALL_GENERATIONS)
        used += res.evaluations
        budget -= res.evaluations
        pools.append(res.u)
        found.append(res.u[0])
        size = min(int(size * RESTART_GROWTH), RESTART_MAX * population)
    allu = np.vstack(pools)
    plain = score(allu)
    order = np.argsort(-plain, kind="stable")
    return InnerResult(u=allu[order], score=plain[order], evaluations=used + len(plain))


def inner_search(
    score: Objective,
    shortfall: Callable[[np.ndarray], np.ndarray],
    dim: int,
    rng: np.random.Generator,
    seeds: np.ndarray | None = None,
    population: int = 64,
    generations: int = 60,
    polish_top: int = 3,
    shortfall_grad: ShortfallGrad | None = None,
    avoid: np.ndarray | None = None,
    avoid_radius: float = 0.08,
    avoid_db: float = 20.0,
    hold: HoldFn | None = None,
) -> InnerResult:
    """Population search, then an exact minimax polish of the best ``polish_top`` distinct points;
    results best first.

    With ``shortfall_grad`` (values and exact gradients of the per-point shortfalls), the picks are
    one per basin (:data:`BASIN_APART` apart, within :data:`POLISH_WITHIN_DB` of the best) and go to
    :func:`minimax_polish_exact`; without it, the older :func:`minimax_polish` by forward
    differences polishes the best points 1e-3 apart (kept as the benchmark's reference).

    ``avoid`` (k, dim): designs found before for the same choice; the population search's score
    loses ``avoid_db`` within ``avoid_radius`` (max norm) of each, so the population settles in
    other basins.  ``hold`` goes to :func:`minimax_polish_exact` (points each polish must keep
    met).  Results are ranked by the plain ``score``.
    """
    if dim == 0:
        u = np.zeros((1, 0))
        return InnerResult(u=u, score=score(u), evaluations=1)
    res = _restarted_search(score, dim, rng, seeds, population, generations, avoid, avoid_radius, avoid_db)
    evals = res.evaluations
    picked: list[np.ndarray] = []
    apart = BASIN_APART if shortfall_grad is not None else 1e-3
    within = POLISH_WITHIN_DB if shortfall_grad is not None else np.inf
    for cand, sc in zip(res.u, res.score, strict=True):
        if sc < res.score[0] - within:
            break
        if all(np.max(np.abs(cand - p)) > apart for p in picked):
            picked.append(cand)
        if len(picked) >= polish_top:
            break
    if seeds is not None and len(seeds):
        # a seed's basin may be narrow-band: also polish the best point far from every seed
        far = [c for c in res.u if np.min(np.max(np.abs(seeds - c), axis=1)) > 0.15]
        if far and all(np.max(np.abs(far[0] - p)) > 1e-3 for p in picked):
            picked.append(far[0])
    polished = []
    if shortfall_grad is not None:
        x, used = minimax_polish_exact(shortfall, shortfall_grad, np.array(picked), hold=hold)
        evals += used
        polished = list(x)
    else:
        for cand in picked:
            x, used = minimax_polish(shortfall, cand)
            evals += used
            polished.append(x)
    allu = np.vstack([np.array(polished), res.u])
    allscore = np.concatenate([score(np.array(polished)), res.score])
    evals += len(polished)
    order = np.argsort(-allscore, kind="stable")
    return InnerResult(u=allu[order], score=allscore[order], evaluations=evals)
