"""The results folder of one study: ``results/<study>/`` with summary.json, designs.csv, plots,
Touchstone files, the cut list and summary.md.

The summary document (:class:`~optmatch.outputs.document.SummaryDoc`) is built here once, with one
``performance()`` call per design, and every file is written from it.  With a drive power, the
designs are ranked within their ratings first: every distinct design the search kept is checked
(in rank order, until enough within ratings are found) and a design over a rating ranks below
every design within them.

Every file is written atomically (temporary file, then rename); ``summary.json`` is written last
and lists the SHA-256 of every other file, so a reader can tell a consistent set.
"""

from __future__ import annotations

import hashlib
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from optmatch import __version__
from optmatch.domain.design import Design, Performance, bare_load, describe, worst_and_each
from optmatch.domain.tolerance import monte_carlo
from optmatch.io.atomic import write_json_atomic, write_text_atomic
from optmatch.io.paths import child_path
from optmatch.outputs.cutlist import cut_list_csv, cut_list_markdown
from optmatch.outputs.document import (
    FAIL,
    FAIL_RATING,
    PASS,
    Choice,
    DesignDoc,
    FeasibilityDoc,
    LoadCase,
    LoadMargin,
    LoadPoint,
    LoadView,
    MaskSegment,
    ParetoPoint,
    PowerCheck,
    SearchDoc,
    SummaryDoc,
    to_json,
    vswr_of_rl,
)
from optmatch.outputs.network_export import export_touchstone
from optmatch.outputs.plots import Caption, plot_pareto, plot_return_loss, plot_return_loss_loads, plot_smith
from optmatch.outputs.tables import (
    MANY_LOADS,
    design_rows,
    matched_input_files,
    summary_markdown,
    write_designs_csv,
)
from optmatch.outputs.variants import VARIANTS_JSON, carried_variants
from optmatch.running.alternatives import Compared, compare
from optmatch.running.build import build_sheet, power_check, rating_warnings, stock_warnings
from optmatch.running.search import SearchOutcome
from optmatch.studyfile.loader import Study

PLOTTED_DESIGNS = 3
INVENTED = re.compile(r"\binvented\b", re.IGNORECASE)
TOUCHSTONE_HEAD_BYTES = 65536  # the header comments are read from the start of the file only


def results_dir(study: Study, out_root: Path) -> Path:
    """``<out_root>/<study name>``, refused unless it lies inside ``out_root`` (io/paths.py)."""
    return child_path(out_root, study.problem.name)


# ---------------------------------------------------------------- the study's own facts


def _says_invented(path: Path) -> bool:
    try:
        with path.open("rb") as fh:
            head = fh.read(TOUCHSTONE_HEAD_BYTES).decode("utf-8", errors="replace")
    except OSError:
        return False
    return any(INVENTED.search(line) for line in head.splitlines() if line.lstrip().startswith("!"))


def data_is_invented(study: Study) -> bool:
    """Whether the study says its data is invented: its description contains the word ``invented``,
    or a comment line (``!``) of one of its Touchstone load files does."""
    if INVENTED.search(study.description or ""):
        return True
    paths = [src.path for src in study.loads if src.path is not None]
    if not study.loads:
        load = study.raw.get("load")
        name = load.get("touchstone") if isinstance(load, Mapping) else None
        if isinstance(name, str):
            paths.append(Path(name) if Path(name).is_absolute() else study.path.parent / name)
    return any(_says_invented(path) for path in paths)


def _load_source(study: Study) -> str:
    load = study.raw.get("load")
    if isinstance(load, Mapping):
        return "; ".join(f"{k}: {v}" for k, v in load.items())
    return "not described"


def mask_doc(study: Study) -> tuple[MaskSegment, ...]:
    """The mask as resolved (Hz, dB), with each requirement's VSWR."""
    return tuple(MaskSegment(f_lo_hz=s.f_lo, f_hi_hz=s.f_hi, min_rl_db=s.min_rl_db, max_vswr=vswr_of_rl(s.min_rl_db),
                             max_loss_db=s.max_loss_db, points=1 if s.f_lo == s.f_hi else int(s.points))
                 for s in study.problem.grid.segments)


def load_view(study: Study, alone: Performance, load: int = 0, source: str | None = None) -> LoadView:
    """The bare load (the ``load``-th of several) at the band's low edge, centre and high edge, and
    its margin against the mask."""
    freq = alone.freq
    centre = int(np.argmin(np.abs(freq - study.problem.grid.centre)))
    zl = study.problem.zloads[load]
    points = []
    for label, k in (("low edge", 0), ("centre", centre), ("high edge", freq.size - 1)):
        z = complex(zl[k])
        rl = float(alone.return_loss_db[k])
        points.append(LoadPoint(label=label, freq_hz=float(freq[k]), r_ohm=z.real, x_ohm=z.imag, return_loss_db=rl,
                                vswr=vswr_of_rl(rl)))
    return LoadView(source=_load_source(study) if source is None else source, points=tuple(points),
                    unmatched_margin_db=alone.margin_db,
                    worst_return_loss_db=alone.worst_rl_db, worst_freq_hz=float(freq[alone.worst_index]),
                    meets_mask=alone.margin_db >= 0.0)


# ---------------------------------------------------------------- ranking within ratings


@dataclass(frozen=True)
class Rated:
    """Designs in their final order, each with its power check (None without a drive power), and the
    best design that meets the mask but is over a rating (if the ratings pushed any down)."""

    designs: list[tuple[Design, PowerCheck | None]]
    over_rating_passing: int
    best_over: tuple[Design, PowerCheck] | None


def rank_within_ratings(study: Study, candidates: Sequence[Design], keep: int) -> Rated:
    """The ``keep`` designs to report: within every rating first (in the search's order), then the
    rest.  Candidates are checked in order until ``keep`` within ratings are found."""
    if study.drive_w is None:
        return Rated([(d, None) for d in candidates[:keep]], 0, None)
    within: list[tuple[Design, PowerCheck | None]] = []
    over: list[tuple[Design, PowerCheck]] = []
    for d in candidates:
        if len(within) >= keep:
            break
        pc = power_check(study, d)
        assert pc is not None
        (within if pc.within else over).append((d, pc))
    passing_over = [(d, pc) for d, pc in over if d.margin_db >= 0.0]
    ordered = within + list(over)
    return Rated(ordered[:keep], len(passing_over), passing_over[0] if passing_over else None)


def verdict_of(margin_db: float, power: PowerCheck | None) -> str:
    """PASS, FAIL (misses the mask) or FAIL rating (meets the mask, over a rating)."""
    if not margin_db >= 0.0:
        return FAIL
    if power is not None and not power.within:
        return FAIL_RATING
    return PASS


def design_doc(study: Study, design: Design, perf: Performance, rank: int, power: PowerCheck | None,
               each: Sequence[Performance] = (), alternative: str = "") -> DesignDoc:
    """Everything about one design, from its one :func:`performance` evaluation (``perf``; with
    several loads, ``each`` load's, and ``perf`` is the worst load's).  ``study``: the study of the
    network it belongs to; ``alternative``: that network's name in a study with alternatives."""
    problem = study.problem
    robustness = monte_carlo(problem, design, study.spread)
    per_load: tuple[LoadMargin, ...] = ()
    share = met = worst = None
    if problem.several:
        yields = robustness.load_yields or (None,) * problem.n_loads
        per_load = tuple(LoadMargin(load=name, margin_db=pf.margin_db, worst_return_loss_db=pf.worst_rl_db,
                                    worst_freq_hz=float(pf.freq[pf.worst_index]), meets_mask=pf.margin_db >= 0.0,
                                    yield_frac=y)
                         for name, pf, y in zip(problem.names, each, yields, strict=True))
        margins = np.array([[lm.margin_db for lm in per_load]])
        share = float(problem.share_of(margins)[0])
        met = int(np.sum(margins >= 0.0))
        worst = per_load[int(np.argmin(margins[0]))].load
    return DesignDoc(
        rank=rank, verdict=verdict_of(design.margin_db, power), margin_db=design.margin_db,
        worst_return_loss_db=perf.worst_rl_db, worst_freq_hz=float(perf.freq[perf.worst_index]),
        max_network_loss_db=float(np.nanmax([np.nanmax(pf.network_loss_db) for pf in (each or [perf])])),
        total_length_wl=design.length_wl,
        trial=design.trial, choice=Choice(tuple(design.choice.medium), tuple(design.choice.short)),
        u=tuple(float(x) for x in design.u), elements=tuple(describe(problem, design)),
        robustness=robustness, power=power, load_margins=per_load, share=share, loads_met=met, worst_load=worst,
        alternative=alternative,
    )


def _mhz(hz: float) -> str:
    return f"{hz / 1e6:.3f} MHz"


def verdict_line(verdict: str, designs: Sequence[DesignDoc], load: LoadView, rated: Rated,
                 drive_w: float | None) -> str:
    """The study's verdict and its reason, in one line."""
    if load.meets_mask and designs and designs[0].load_margins:
        return (f"PASS: no network needed: every bare load meets the mask, the worst by "
                f"{load.unmatched_margin_db:+.2f} dB; the designs found are listed all the same")
    if load.meets_mask:
        return (f"PASS: no network needed: the bare load meets the mask by {load.unmatched_margin_db:+.2f} dB "
                f"(worst return loss {load.worst_return_loss_db:.2f} dB at {_mhz(load.worst_freq_hz)}); "
                "the designs found are listed all the same")
    if not designs:
        return "FAIL: the search produced no design"
    best = designs[0]
    if best.load_margins and verdict == FAIL:
        n = len(best.load_margins)
        weighted = (f" ({100 * best.share:.0f} % of the weight)" if best.share is not None
                    and abs(best.share - (best.loads_met or 0) / n) > 1e-9 else "")
        return (f"FAIL: the best design meets the mask on {best.loads_met} of {n} loads{weighted}; it misses on "
                f"{best.worst_load} by {-best.margin_db:.2f} dB (worst return loss {best.worst_return_loss_db:.2f} dB "
                f"at {_mhz(best.worst_freq_hz)})")
    if verdict == PASS:
        ratings = f", within every rating at {drive_w:g} W" if drive_w is not None else ""
        if best.load_margins:
            return (f"PASS: the best design meets the mask on all {len(best.load_margins)} loads, by "
                    f"{best.margin_db:+.2f} dB on the worst ({best.worst_load}){ratings}")
        return f"PASS: the best design meets the mask by {best.margin_db:+.2f} dB{ratings}"
    if verdict == FAIL_RATING:
        assert best.power is not None
        more = f" (and {len(best.power.over_rating) - 1} more)" if len(best.power.over_rating) > 1 else ""
        return (f"FAIL rating: no design within the ratings at {drive_w:g} W meets the mask; the best design meets it "
                f"by {best.margin_db:+.2f} dB but {best.power.over_rating[0]}{more}")
    line = (f"FAIL: the best design misses the mask by {-best.margin_db:.2f} dB (worst return loss "
            f"{best.worst_return_loss_db:.2f} dB at {_mhz(best.worst_freq_hz)})")
    if rated.best_over is not None:
        d, pc = rated.best_over
        line += (f"; {rated.over_rating_passing} design(s) that meet it are over a rating at {drive_w:g} W "
                 f"(the best, {d.margin_db:+.2f} dB: {pc.over_rating[0]})")
    return line


# ---------------------------------------------------------------- the document


@dataclass(frozen=True)
class Built:
    """The summary document with the band figures it was made from (for the plots): each ranked
    design with its performance (the worst load's, with several), the bare load (the worst alone),
    per ranked design the study of the network it belongs to (its alternative's, or the study), and
    with several loads, the best design's performance on each load and every bare load."""

    doc: SummaryDoc
    ranked: list[tuple[Design, Performance]]
    load: Performance
    studies: list[Study]
    best_each: list[Performance] = field(default_factory=list)
    loads_alone: list[Performance] = field(default_factory=list)


def _rated_across(study: Study, outcome: SearchOutcome) -> tuple[list[tuple[str, Study, Design, PowerCheck | None]],
                                                                 Rated]:
    """The designs to report with the study and name of their network: for a study with alternatives,
    ``keep`` per alternative, ranked across them (within the ratings first, then margin, then length)."""
    parts = outcome.parts if isinstance(outcome, Compared) else (("", outcome),)
    entries: list[tuple[str, Study, Design, PowerCheck | None]] = []
    rateds: list[Rated] = []
    for name, part in parts:
        sub = study.alternative(name)
        rated = rank_within_ratings(sub, part.distinct or part.designs, study.search.keep)
        rateds.append(rated)
        entries += [(name, sub, d, pc) for d, pc in rated.designs]
    if len(parts) == 1:
        return entries, rateds[0]
    entries.sort(key=lambda e: (e[3] is not None and not e[3].within, -round(e[2].margin_db, 2), e[2].length_wl))
    overs = [r.best_over for r in rateds if r.best_over is not None]
    best_over = max(overs, key=lambda o: o[0].margin_db) if overs else None
    return entries, Rated([(d, pc) for _, _, d, pc in entries], sum(r.over_rating_passing for r in rateds), best_over)


def build_summary(study: Study, outcome: SearchOutcome, warnings: Sequence[str] = ()) -> Built:
    """Rank, evaluate each design once, and assemble the summary document."""
    problem = study.problem
    entries, rated = _rated_across(study, outcome)
    figures = [worst_and_each(sub.problem, d) for _, sub, d, _ in entries]  # one evaluation per design and load
    each = [ps for _, ps in figures]
    ranked = [(d, worst, pc) for (_, _, d, pc), (worst, _) in zip(entries, figures, strict=True)]
    designs = tuple(design_doc(sub, d, perf, k + 1, pc, ps, name)
                    for k, ((name, sub, _, _), (d, perf, pc), ps) in enumerate(zip(entries, ranked, each, strict=True)))
    cases: tuple[LoadCase, ...] = ()
    alone_each: list[Performance] = []
    if problem.several:
        alone_each = [bare_load(problem, k) for k in range(problem.n_loads)]
        cases = tuple(LoadCase(name=src.name, weight=src.weight, source=src.text,
                               alone=load_view(study, pf, k, src.text))
                      for k, (src, pf) in enumerate(zip(study.loads, alone_each, strict=True)))
        worst = int(np.argmin([pf.margin_db for pf in alone_each]))
        alone = alone_each[worst]
        load = load_view(study, alone, worst, f"{problem.n_loads} loads; the worst alone: {problem.names[worst]} "
                                              f"({study.loads[worst].text})")
    else:
        alone = bare_load(problem)
        load = load_view(study, alone)
    verdict = PASS if load.meets_mask else (designs[0].verdict if designs else FAIL)
    sheet = None
    notes = list(warnings)
    if designs:
        best, perf, power = ranked[0]
        sheet = build_sheet(entries[0][1], best, designs[0].elements, each[0] if problem.several else perf)
        notes += stock_warnings(sheet) + rating_warnings(power)
    doc = SummaryDoc(
        study=problem.name, description=study.description, file=str(study.path), inputs_digest=study.digest,
        optmatch_version=__version__, invented=data_is_invented(study), inputs=study.raw,
        system_ohm=problem.z_sys, reference_hz=problem.f_ref, mask=mask_doc(study), load=load,
        verdict=verdict, verdict_line=verdict_line(verdict, designs, load, rated, study.drive_w),
        no_network_needed=load.meets_mask, ranked_by=outcome.ranked_by,
        feasibility=FeasibilityDoc(**study.problem.feasibility().as_dict()),
        best_margin_db=designs[0].margin_db if designs else None, designs=designs,
        pareto=tuple(ParetoPoint(d.margin_db, d.length_wl, d.trial) for d in outcome.pareto),
        search=SearchDoc(trials_complete=outcome.trials_complete, evaluations=outcome.evaluations,
                         elapsed_s=outcome.elapsed_s, trial_time_s=outcome.trial_time_s,
                         stopped_early=outcome.stopped_early, seeds=tuple(s.origin for s in outcome.seeds),
                         settings=dict(study.search.__dict__)),
        tolerance=study.spread, drive_w=study.drive_w, warnings=tuple(notes), build=sheet,
        alternatives=compare(study, designs, outcome), loads=cases, load_rule=problem.load_rule,
    )
    return Built(doc, [(d, perf) for d, perf, _ in ranked], alone, [sub for _, sub, _, _ in entries],
                 list(each[0]) if each else [], alone_each)


def summary_document(study: Study, outcome: SearchOutcome, warnings: Sequence[str] = ()) -> SummaryDoc:
    """The summary document of a finished search (see :func:`build_summary`)."""
    return build_summary(study, outcome, warnings).doc


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def write_results(study: Study, outcome: SearchOutcome, out_root: Path,
                  warnings: Sequence[str] | None = None) -> tuple[Path, SummaryDoc]:
    """Write the whole results folder; returns its path and the summary document written."""
    folder = results_dir(study, out_root)
    folder.mkdir(parents=True, exist_ok=True)
    problem = study.problem
    built = build_summary(study, outcome, warnings or ())
    doc = built.doc
    caption = Caption(doc.study, doc.invented)
    files: list[Path] = []
    if built.ranked and problem.several:
        per_load = list(zip(problem.names, built.best_each, strict=True))
        files.append(plot_return_loss_loads("#1", per_load, problem.grid, folder / "return_loss.png",
                                            segments=list(problem.grid.segments), caption=caption, many=MANY_LOADS))
        worst_first = sorted(range(len(per_load)), key=lambda k: per_load[k][1].margin_db)[:MANY_LOADS]
        shown = [(f"#1 on {per_load[k][0]}", per_load[k][1]) for k in sorted(worst_first)]
        worst_alone = min(doc.loads, key=lambda c: c.alone.unmatched_margin_db).name
        files.append(plot_smith(shown, folder / "smith.png", problem.z_sys,
                                min_rl_db=float(problem.grid.min_rl_db.max()), load=built.load, caption=caption,
                                load_label=f"{worst_alone} alone, the worst (no network)"))
        files += list(export_touchstone(built.studies[0].problem, built.ranked[0][0], folder, invented=doc.invented,
                                        per_load=matched_input_files(doc)))
    elif built.ranked:
        perfs = [(f"#{k + 1}", perf) for k, (_, perf) in enumerate(built.ranked[:PLOTTED_DESIGNS])]
        files.append(plot_return_loss(perfs, problem.grid, folder / "return_loss.png",
                                      segments=list(problem.grid.segments), load=built.load, caption=caption))
        files.append(plot_smith(perfs, folder / "smith.png", problem.z_sys,
                                min_rl_db=float(problem.grid.min_rl_db.max()), load=built.load, caption=caption))
        files += list(export_touchstone(built.studies[0].problem, built.ranked[0][0], folder, invented=doc.invented))
    if outcome.pareto:
        front = [(d.margin_db, d.length_wl) for d in outcome.pareto]
        files.append(plot_pareto(outcome.all_points, front, folder / "pareto.png", caption=caption))
    files.append(write_designs_csv(design_rows(doc.designs), folder / "designs.csv"))
    if doc.build is not None:
        files.append(write_text_atomic(folder / "cut_list.md", cut_list_markdown(doc)))
        files.append(write_text_atomic(folder / "cut_list.csv", cut_list_csv(doc.build)))
    files.append(write_text_atomic(folder / "summary.md", summary_markdown(doc)))
    hashes = {p.name: _sha256(p) for p in files}
    variants = carried_variants(folder, doc.study, doc.inputs_digest)  # kept from the explorer, same inputs
    for name in [VARIANTS_JSON, *(f for v in variants for f in v.files)] if variants else []:
        if (folder / name).is_file():
            hashes[name] = _sha256(folder / name)
    doc = replace(doc, files=hashes, variants=variants)
    write_json_atomic(folder / "summary.json", to_json(doc))
    return folder, doc
