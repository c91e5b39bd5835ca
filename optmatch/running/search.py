"""The search pipeline: closed-form seeds, optuna's outer loop over discrete choices and restarts,
and the vectorised inner search in each trial.

optuna knows only the discrete dimensions (stub ends, medium choices) and which start a trial
takes (a closed-form seed or a random population); each trial runs thousands of network
evaluations at once through the engine, and keeps its best few designs in the trial's user
attributes, so the storage holds every result and a study can be resumed or shared by workers.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import time
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import optuna
from optuna.storages import BaseStorage

from optmatch.domain.design import Design
from optmatch.domain.network import Choice
from optmatch.domain.optimise import inner_search, population_search
from optmatch.domain.problem import Problem
from optmatch.domain.seeds import Seed, closed_form_seeds
from optmatch.domain.tolerance import Spread, design_yields, draw_errors, yield_scores
from optmatch.running.trials import Limits, run_trials
from optmatch.studyfile.loader import SearchSettings, Study

optuna.logging.set_verbosity(optuna.logging.WARNING)

LENGTH_TIE_BREAK_DB_PER_WL = 1e-3  # a tenth of a wavelength costs 0.0001 dB: ties only
PARETO_WEIGHT_MAX_DB_PER_WL = 20.0
KEEP_PER_TRIAL = 3
KEPT_APART = 0.05  # a trial's kept designs lie at least this far apart (unit cube): one per basin
DISTINCT_U = 0.01  # designs closer than this (unit-cube max norm) are one design
STOCK_SHORTAGE_DB = 100.0  # penalty per stock piece a trial's choice takes beyond the shelf
TABU_RADIUS = 0.08  # a repeated choice's population is pushed this far (unit cube) from known designs
TABU_DB = 20.0  # score taken off within TABU_RADIUS of a known design
IMPROVED_DB = 1e-3  # a known design found again is kept only when at least this much better
YIELD_DRAWS = 64  # tolerance draws per trial for the yield objective (common random numbers)
YIELD_TIE = 0.5 / YIELD_DRAWS  # the p10 term stays below one build's worth of yield
YIELD_P10_SCALE_DB = 3.0
YIELD_SKIP_DB = 3.0  # a new choice whose nominal best fails by more than this skips the yield search
SHARE_TIE_SCALE_DB = 3.0  # the share objective's trial value: share + a term below one load, from the worst margin
MAX_SEEDS = 48  # closed-form seeds kept over every load (after removing near-duplicates)
SEEDS_APART = 0.02  # seeds of one choice closer than this (unit-cube max norm) are one seed
EXACT_GRADIENTS = True  # polish with exact gradients (False: the older forward-difference polish, for benchmarks)

ProgressFn = Callable[[int, int, float | None], None]


@dataclass(frozen=True)
class SearchOutcome:
    """Ranked designs and how the search went."""

    designs: list[Design]
    pareto: list[Design]
    all_points: list[tuple[float, float]]
    trials_complete: int
    evaluations: int
    elapsed_s: float          # this run (s)
    trial_time_s: float       # all complete trials, this run and earlier ones (s)
    seeds: list[Seed]
    stopped_early: bool
    # every distinct design found, ranked (designs: the first keep)
    distinct: list[Design] = field(default_factory=list)
    ranked_by: str = "margin"  # what ranked ``designs``: margin, yield, pareto, or share (of several loads met)


BUDGET_KEYS = ("trials", "time", "keep", "target_margin")


def optuna_study_name(study: Study) -> str:
    """Storage name of a study: its name plus a digest of what defines its trials.

    A changed load, mask, network or search method starts afresh; a changed budget (trials, time,
    designs kept, target) continues the same trials.
    """
    raw = dict(study.raw)
    raw["search"] = {k: v for k, v in dict(raw.get("search") or {}).items() if k not in BUDGET_KEYS}
    h = hashlib.sha256(json.dumps(raw, sort_keys=True, default=str).encode())
    h.update(np.ascontiguousarray(study.problem.zload).tobytes())
    return f"{study.problem.name}-{h.hexdigest()[:12]}"


def _choice_doc(choice: Choice) -> dict:
    return {"medium": list(choice.medium), "short": list(choice.short)}


def _choice_from_doc(doc: dict) -> Choice:
    return Choice(tuple(int(m) for m in doc["medium"]), tuple(bool(s) for s in doc["short"]))


def _starts(seeds: list[Seed]) -> list[str]:
    return ["random"] + [f"seed-{k}" for k in range(len(seeds))]


def _seed_picks(problem: Problem, seed: Seed) -> dict:
    picks: dict = {}
    for name, i, _ in problem.network.choice_space():
        if name.endswith(".medium"):
            picks[name] = seed.choice.medium[i]
        else:
            picks[name] = "short" if seed.choice.short[i] else "open"
    return picks


def known_designs(trial: optuna.Trial, choice: Choice) -> list[dict]:
    """The best design of every complete trial (any worker's) that took the same discrete choice:
    the basins already found for it."""
    doc = _choice_doc(choice)
    out: list[dict] = []
    for t in trial.study.get_trials(deepcopy=False, states=(optuna.trial.TrialState.COMPLETE,)):
        designs = t.user_attrs.get("designs") or []
        if t.user_attrs.get("choice") == doc and designs:
            out.append(max(designs, key=lambda d: d["margin_db"]))
    return out


def _repeats(u: np.ndarray, margin: float, known: list[dict]) -> bool:
    """True when ``u`` lies in a known design's basin (within :data:`TABU_RADIUS`) and is no
    better than it by :data:`IMPROVED_DB`."""
    return any(np.max(np.abs(u - np.array(k["u"])), initial=0.0) <= TABU_RADIUS
               and margin <= k["margin_db"] + IMPROVED_DB for k in known)


def make_objective(problem: Problem, settings: SearchSettings, seeds: list[Seed], use_seeds: bool = True,
                   spread: Spread | None = None):
    """The optuna objective for one study: discrete picks and start → inner search → score.

    A trial whose choice was taken before searches away from the designs those trials found (see
    :data:`TABU_RADIUS`), so repeats add basins instead of re-finding one (not for ``pareto``,
    whose trials differ by their length weight).  With the ``yield``
    objective the nominal search is followed by a population search on the yield over
    :data:`YIELD_DRAWS` tolerance draws fixed for the trial (``spread``), ties broken by the 10th
    percentile build margin, then length.
    """
    space = problem.network.choice_space()
    starts = _starts(seeds) if use_seeds else ["random"]
    pareto = settings.objective == "pareto"
    by_yield = settings.objective == "yield"
    by_share = problem.load_rule == "share"
    spread = spread or Spread()
    nl, nf = problem.n_loads, problem.grid.freq.size

    def hold(s_row: np.ndarray) -> np.ndarray:
        """Points of the loads a polish start meets: the share polish keeps them met."""
        met = np.max(s_row.reshape(nl, nf), axis=1) <= 0.0
        return np.repeat(met, nf)

    def objective(trial: optuna.Trial):
        picks = {name: trial.suggest_categorical(name, options) for name, _, options in space}
        start = trial.suggest_categorical("start", starts)
        weight = trial.suggest_float("length_weight", 0.0, PARETO_WEIGHT_MAX_DB_PER_WL) if pareto else None
        choice = problem.network.choice_from(picks)
        shortage = problem.network.stock_shortage(choice)
        if shortage:  # more stock pieces than the shelf holds: no design, a penalty optuna learns from
            trial.set_user_attr("choice", _choice_doc(choice))
            trial.set_user_attr("designs", [])
            trial.set_user_attr("evaluations", 0)
            trial.set_user_attr("stock_shortage", shortage)
            penalty_db = -STOCK_SHORTAGE_DB * shortage
            return (penalty_db, STOCK_SHORTAGE_DB) if pareto else penalty_db
        rng = np.random.default_rng([settings.seed, trial.number])
        init = None
        if start != "random":
            first = seeds[int(start.split("-")[1])]
            same = [s.u for s in seeds if s.choice == choice and s is not first]
            init = np.vstack([first.u, *same]) if problem.network.dim else None
        penalty = weight if weight is not None else LENGTH_TIE_BREAK_DB_PER_WL
        known = [] if pareto else known_designs(trial, choice)  # Pareto trials differ by their weight
        avoid = np.array([k["u"] for k in known]) if known and problem.network.dim else None

        def score(u: np.ndarray) -> np.ndarray:
            return problem.objective(u, choice) - penalty * problem.length_wl(u, choice)

        def shortfall(u: np.ndarray) -> np.ndarray:
            return problem.shortfalls_db(u, choice) + (penalty * problem.length_wl(u, choice))[:, None]

        def shortfall_grad(u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            return problem.shortfalls_and_grad(u, choice, penalty)

        res = inner_search(score, shortfall, problem.network.dim, rng, seeds=init,
                           population=settings.population, generations=settings.generations,
                           shortfall_grad=shortfall_grad if EXACT_GRADIENTS else None,
                           avoid=avoid, avoid_radius=TABU_RADIUS, avoid_db=TABU_DB,
                           hold=hold if by_share and nl > 1 else None)
        candidates, evaluations = res.u, res.evaluations
        yield_of = None
        if by_yield and problem.network.dim:
            draws = draw_errors(problem, choice, spread, YIELD_DRAWS, np.random.default_rng([settings.seed,
                                                                                               trial.number, 1]))

            def yield_of(u: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
                return yield_scores(problem, u, choice, draws)

            if res.score[0] >= -YIELD_SKIP_DB or avoid is not None:  # else no build can pass: skip
                def yscore(u: np.ndarray) -> np.ndarray:
                    y, p10 = yield_of(u)
                    return (y + YIELD_TIE * (0.5 + 0.5 * np.tanh(p10 / YIELD_P10_SCALE_DB))
                            - 1e-6 * problem.length_wl(u, choice))

                # start from this trial's nominal designs and the basins earlier trials found
                starts_y = _distinct(np.vstack([res.u[:8], *([avoid] if avoid is not None else [])]), 12)
                yres = population_search(yscore, problem.network.dim, rng, seeds=starts_y,
                                         population=settings.population, generations=settings.generations)
                candidates = np.vstack([yres.u, res.u])
                evaluations += yres.evaluations * YIELD_DRAWS
        kept: list[dict] = []
        repeats: list[dict] = []
        for u in candidates:
            if len(kept) >= KEEP_PER_TRIAL:
                break
            snaps = problem.network.snap_candidates(u)  # cut lengths to whole cut steps, re-checked
            u = snaps[int(np.argmax(score(snaps)))] if len(snaps) > 1 else snaps[0]
            if all(np.max(np.abs(u - np.array(k["u"])), initial=0.0) > KEPT_APART for k in kept + repeats):
                length = float(problem.length_wl(u, choice)[0])
                if problem.several:
                    lm = problem.load_margins(u, choice)
                    m = float(np.min(lm))
                    doc = {"u": [float(x) for x in u], "margin_db": m, "length_wl": length,
                           "load_margins_db": [float(x) for x in lm[0]], "share": float(problem.share_of(lm)[0])}
                else:
                    m = float(problem.margins(u, choice)[0])
                    doc = {"u": [float(x) for x in u], "margin_db": m, "length_wl": length}
                if yield_of is not None:
                    y, p10 = yield_of(u[None, :])
                    doc.update(yield_frac=float(y[0]), margin_p10_db=float(p10[0]))
                (repeats if _repeats(u, m, known) else kept).append(doc)
        if not kept:  # nothing new within the budget: the best known design again
            kept = repeats[:1]
        trial.set_user_attr("choice", _choice_doc(choice))
        trial.set_user_attr("designs", kept)
        trial.set_user_attr("evaluations", int(evaluations))
        trial.set_user_attr("avoided", len(known))
        if by_yield and "yield_frac" in kept[0]:
            best = max(kept, key=lambda d: (d["yield_frac"], d["margin_p10_db"], -d["length_wl"]))
            return best["yield_frac"] + YIELD_TIE * (0.5 + 0.5 * np.tanh(best["margin_p10_db"] / YIELD_P10_SCALE_DB))
        if by_share and "share" in kept[0]:
            best = max(kept, key=lambda d: (d["share"], d["margin_db"], -d["length_wl"]))
            return share_value(problem, best["share"], best["margin_db"])
        best = max(kept, key=lambda d: d["margin_db"] - penalty * d["length_wl"])
        if pareto:
            return best["margin_db"], best["length_wl"]
        return best["margin_db"]

    return objective


def share_value(problem: Problem, share: float, margin_db: float) -> float:
    """A trial's value under the share objective: the share, plus a term below one load's share
    that grows with the worst margin (so optuna and the progress bar read the share)."""
    tie = 1e-3 * problem.share_step  # small enough that 100 × value rounds to the share
    return float(share + tie * (0.5 + 0.5 * np.tanh(margin_db / SHARE_TIE_SCALE_DB)))


def _distinct(u: np.ndarray, count: int, apart: float = DISTINCT_U) -> np.ndarray:
    """The first ``count`` rows of ``u`` at least ``apart`` from each other (max norm)."""
    out: list[np.ndarray] = []
    for row in u:
        if all(np.max(np.abs(row - o)) > apart for o in out):
            out.append(row)
        if len(out) >= count:
            break
    return np.array(out)


def open_study(study: Study, storage: BaseStorage | str) -> optuna.Study:
    """Create or load the optuna study for ``study`` in ``storage``."""
    settings = study.search
    sampler = (optuna.samplers.NSGAIISampler(seed=settings.seed) if settings.objective == "pareto"
               else optuna.samplers.TPESampler(seed=settings.seed))
    kwargs: dict = {"directions": ["maximize", "minimize"]} if settings.objective == "pareto" else {
        "direction": "maximize"}
    return optuna.create_study(storage=storage, study_name=optuna_study_name(study), sampler=sampler,
                               load_if_exists=True, **kwargs)


def _complete(ost: optuna.Study) -> list[optuna.trial.FrozenTrial]:
    return [t for t in ost.get_trials(deepcopy=False) if t.state == optuna.trial.TrialState.COMPLETE]


def enqueue_seeds(ost: optuna.Study, problem: Problem, seeds: list[Seed], budget: int) -> None:
    """Queue the first trials, only when the study is new: one seed start per distinct discrete
    choice (seeds sharing a choice share that trial's first population), then one random start
    for each choice no seed covers, within ``budget`` trials."""
    if ost.get_trials(deepcopy=False):
        return
    queued: list[dict] = []
    covered: set = set()
    for k, seed in enumerate(seeds):
        if seed.choice in covered:
            continue
        covered.add(seed.choice)
        queued.append({**_seed_picks(problem, seed), "start": f"seed-{k}"})
    space = problem.network.choice_space()
    for combo in itertools.product(*[options for _, _, options in space]):
        picks = {name: opt for (name, _, _), opt in zip(space, combo, strict=True)}
        if problem.network.choice_from(picks) not in covered:
            queued.append({**picks, "start": "random"})
    for params in queued[:budget]:
        ost.enqueue_trial(params, skip_if_exists=True)


def collect_designs(ost: optuna.Study, problem: Problem | None = None, spread: Spread | None = None,
                    objective: str = "margin") -> tuple[list[Design], list[tuple[float, float]]]:
    """Every design kept by every complete trial, ranked: best margin first, shorter on ties (with
    several loads and the ``share`` rule: the largest share of loads first, then the margin).

    With ``objective`` ``yield`` (and the ``problem`` and ``spread``), the distinct designs are
    ranked by their yield on the robustness view's draws, then the 10th-percentile build margin,
    then length."""
    designs: list[Design] = []
    seen: set[tuple] = set()
    for t in _complete(ost):
        choice = _choice_from_doc(t.user_attrs["choice"])
        for d in t.user_attrs.get("designs", []):
            key = (choice, tuple(round(x, 6) for x in d["u"]))
            if key in seen:
                continue
            seen.add(key)
            designs.append(Design(choice, tuple(d["u"]), d["margin_db"], d["length_wl"], t.number,
                                  tuple(d.get("load_margins_db") or ()), d.get("share")))
    if problem is not None and problem.load_rule == "share" and problem.several:
        designs.sort(key=lambda d: (-round(d.share or 0.0, 9), -round(d.margin_db, 2), d.length_wl, d.trial))
    else:
        designs.sort(key=lambda d: (-round(d.margin_db, 2), d.length_wl, d.trial))
    points = [(d.margin_db, d.length_wl) for d in designs]
    # keep designs a builder would tell apart: another choice, or some value ≥ 1 % of its range away
    distinct: list[Design] = []
    for d in designs:
        u = np.array(d.u)
        if all(d.choice != k.choice or np.max(np.abs(u - np.array(k.u)), initial=0.0) > DISTINCT_U for k in distinct):
            distinct.append(d)
    if objective == "yield" and problem is not None and spread is not None and distinct:
        ys = design_yields(problem, distinct, spread)
        order = sorted(range(len(distinct)), key=lambda i: (-ys[i][0], -round(ys[i][1], 2),
                                                            distinct[i].length_wl, distinct[i].trial))
        distinct = [distinct[i] for i in order]
    return distinct, points


def pareto_front(designs: list[Design]) -> list[Design]:
    """Designs not beaten on both margin (higher) and total length (shorter), by length."""
    front: list[Design] = []
    for d in sorted(designs, key=lambda d: (d.length_wl, -d.margin_db)):
        if not front or d.margin_db > front[-1].margin_db + 1e-9:
            front.append(d)
    return front


def study_seeds(problem: Problem) -> list[Seed]:
    """Closed-form seeds for the load at the grid point nearest the reference frequency; with
    several loads, every load's seeds, taken in turn (the first of each load, then the second, ...),
    less those within :data:`SEEDS_APART` of one already taken with the same choice, at most
    :data:`MAX_SEEDS`."""
    k = int(np.argmin(np.abs(problem.grid.freq - problem.f_ref)))
    if not problem.several:
        return closed_form_seeds(problem.network, complex(problem.zload[k]), problem.z_sys, problem.f_ref)
    each = [closed_form_seeds(problem.network, complex(z[k]), problem.z_sys, problem.f_ref) for z in problem.zloads]
    out: list[Seed] = []
    for rank in range(max((len(s) for s in each), default=0)):
        for name, seeds in zip(problem.names, each, strict=True):
            if rank >= len(seeds) or len(out) >= MAX_SEEDS:
                continue
            seed = seeds[rank]
            if all(seed.choice != o.choice or np.max(np.abs(seed.u - o.u), initial=0.0) > SEEDS_APART for o in out):
                out.append(Seed(seed.choice, seed.u, f"{seed.origin} (load {name})"))
    return out


def run_search(
    study: Study,
    storage: BaseStorage | str,
    progress: ProgressFn | None = None,
    use_seeds: bool = True,
    owner: bool = True,
) -> SearchOutcome:
    """Run (or resume) the study's search until its trial budget, time budget or target is reached.

    ``owner``: this process writes the results and waits for trials other workers still run;
    a helper (``owner=False``) leaves once every remaining trial slot is taken (see ``trials.py``).
    """
    problem, settings = study.problem, study.search
    start_time = time.monotonic()
    seeds = study_seeds(problem) if use_seeds else []
    ost = open_study(study, storage)
    if use_seeds:
        enqueue_seeds(ost, problem, seeds, settings.trials)
    objective = make_objective(problem, settings, seeds, use_seeds, spread=study.spread)
    limits = Limits(settings.trials, settings.time_s, settings.target_margin_db)
    stopped_early = run_trials(ost, objective, limits, progress=progress, owner=owner)
    designs, points = collect_designs(ost, problem, study.spread, settings.objective)
    complete = _complete(ost)
    evaluations = sum(int(t.user_attrs.get("evaluations", 0)) for t in complete)
    return SearchOutcome(
        designs=designs[: settings.keep],
        pareto=pareto_front(designs) if settings.objective == "pareto" else [],
        all_points=points,
        trials_complete=len(complete),
        evaluations=evaluations,
        elapsed_s=time.monotonic() - start_time,
        trial_time_s=sum((t.duration.total_seconds() for t in complete if t.duration is not None), 0.0),
        seeds=seeds,
        stopped_early=stopped_early,
        distinct=designs,
        ranked_by="share" if problem.several and problem.load_rule == "share" else settings.objective,
    )
