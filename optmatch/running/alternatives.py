"""Topology comparison: a study with ``alternatives:`` searches each named network and ranks across them.

Each alternative is searched exactly as a study file giving that network under ``network:`` would be (same
name, load, mask, search settings and shelf; its own optuna study in the same storage), so a comparison
row equals a separate run of that alternative.  :func:`search_study` is the one entry point for a study
with one network or several; :func:`compare` makes the comparison table from the ranked designs.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from optuna.storages import BaseStorage

from optmatch.domain.design import ElementReport
from optmatch.outputs.document import AlternativeDoc, DesignDoc
from optmatch.running.search import ProgressFn, SearchOutcome, pareto_front, run_search
from optmatch.studyfile.loader import Study


@dataclass(frozen=True)
class Compared(SearchOutcome):
    """The searches of every alternative (``parts``: name and outcome, in the file's order), with the
    totals in the :class:`SearchOutcome` fields (designs: all of them, ranked across)."""

    parts: tuple[tuple[str, SearchOutcome], ...] = ()


def _combined(parts: Sequence[tuple[str, SearchOutcome]], keep: int) -> Compared:
    ranked = sorted((d for _, o in parts for d in (o.distinct or o.designs)),
                    key=lambda d: (-round(d.margin_db, 2), d.length_wl))
    fronts = [d for _, o in parts for d in o.pareto]
    return Compared(
        designs=ranked[:keep], pareto=pareto_front(fronts) if fronts else [],
        all_points=[p for _, o in parts for p in o.all_points],
        trials_complete=sum(o.trials_complete for _, o in parts),
        evaluations=sum(o.evaluations for _, o in parts),
        elapsed_s=sum(o.elapsed_s for _, o in parts), trial_time_s=sum(o.trial_time_s for _, o in parts),
        seeds=[s for _, o in parts for s in o.seeds], stopped_early=any(o.stopped_early for _, o in parts),
        distinct=ranked, parts=tuple(parts))


def search_study(study: Study, storage: BaseStorage | str, progress: ProgressFn | None = None,
                 owner: bool = True) -> SearchOutcome:
    """Run (or resume) the search of a study: its one network, or each alternative in turn (then a
    :class:`Compared`).  ``progress`` sees the trials of all alternatives as one count."""
    if not study.alternatives:
        return run_search(study, storage, progress=progress, owner=owner)
    per = study.search.trials
    total = study.trial_budget
    best: list[float] = []
    parts: list[tuple[str, SearchOutcome]] = []
    for k, alt in enumerate(study.alternatives):

        def report(done: int, _total: int, margin: float | None, base: int = k * per) -> None:
            if progress is None:
                return
            so_far = [*best, *([margin] if margin is not None else [])]
            progress(base + min(done, per), total, max(so_far) if so_far else None)

        outcome = run_search(alt.study, storage, progress=report, owner=owner)
        if outcome.designs:
            best.append(outcome.designs[0].margin_db)
        parts.append((alt.name, outcome))
    return _combined(parts, study.search.keep)


def network_text(study: Study) -> str:
    """The network of a study file in a few words: its template, or the number of elements."""
    net = study.raw.get("network")
    if isinstance(net, dict) and isinstance(net.get("template"), str):
        return str(net["template"]).replace("_", " ")
    n = len(study.problem.network.elements)
    return f"{n} element{'s' if n != 1 else ''}"


def pieces_and_junctions(elements: Sequence[ElementReport]) -> tuple[int, int]:
    """Lines and stubs to build, and the points where they meet one another, the load or the source.

    As the build sheet's assembly counts them: walking from the load, every series element (a line, a
    series stub or a series part) leads to a new point; a shunt stub or part tees onto the point it stands
    at.  So a network has one point more than it has series elements (none when it has no element).
    """
    pieces = sum(1 for e in elements if e.kind != "lumped")
    series = sum(1 for e in elements
                 if not (e.kind == "shunt_stub" or (e.kind == "lumped" and e.connection == "shunt")))
    return pieces, (series + 1 if elements else 0)


def compare(study: Study, designs: Sequence[DesignDoc], outcome: SearchOutcome) -> tuple[AlternativeDoc, ...]:
    """One row per alternative, by its best design among ``designs`` (ranked across alternatives)."""
    if not study.alternatives:
        return ()
    trials = dict(outcome.parts) if isinstance(outcome, Compared) else {}
    rows = []
    for alt in study.alternatives:
        part = trials.get(alt.name)
        n_trials = part.trials_complete if part is not None else 0
        best = next((d for d in designs if d.alternative == alt.name), None)
        if best is None:
            rows.append(AlternativeDoc(alt.name, network_text(alt.study), n_trials))
            continue
        pieces, junctions = pieces_and_junctions(best.elements)
        total_mm = sum((e.physical_m or 0.0) for e in best.elements if e.kind != "lumped") * 1e3
        rows.append(AlternativeDoc(
            name=alt.name, network=network_text(alt.study), trials=n_trials, best_rank=best.rank,
            verdict=best.verdict, best_margin_db=best.margin_db,
            best_yield=best.robustness.yield_frac if best.robustness is not None else None,
            total_length_wl=best.total_length_wl, total_mm=total_mm, pieces=pieces, junctions=junctions))
    return tuple(rows)


__all__ = ["Compared", "compare", "network_text", "pieces_and_junctions", "search_study"]
