"""The results folder of one study: ``results/<study>/`` with summary.json, designs.csv, plots,
Touchstone files and summary.md.

Every file is written atomically (temporary file, then rename); ``summary.json`` is written last
and lists the SHA-256 of every other file, so a reader can tell a consistent set.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np

from optmatch import __version__
from optmatch.domain.design import Design, describe, performance
from optmatch.domain.tolerance import monte_carlo
from optmatch.io.atomic import write_json_atomic, write_text_atomic
from optmatch.outputs.cutlist import cut_list_csv, cut_list_markdown
from optmatch.outputs.network_export import export_touchstone
from optmatch.outputs.plots import plot_pareto, plot_return_loss, plot_smith
from optmatch.outputs.tables import design_rows, summary_markdown, write_designs_csv
from optmatch.running.build import build_view
from optmatch.running.search import SearchOutcome
from optmatch.studyfile.loader import Study

PLOTTED_DESIGNS = 3


def results_dir(study: Study, out_root: Path) -> Path:
    """``<out_root>/<study name>``."""
    return Path(out_root) / study.problem.name


def _mask_doc(study: Study) -> list[dict]:
    segs = study.raw.get("mask", {}).get("segments", [])
    return [dict(s) for s in segs]


def design_doc(study: Study, design: Design, rank: int) -> dict:
    """Everything about one design, JSON-ready."""
    perf = performance(study.problem, design)
    elements = [e.as_dict() for e in describe(study.problem, design)]
    return {
        "rank": rank,
        "margin_db": design.margin_db,
        "passes": design.margin_db >= 0.0,
        "worst_return_loss_db": perf.worst_rl_db,
        "worst_freq_hz": float(perf.freq[perf.worst_index]),
        "max_network_loss_db": float(np.nanmax(perf.network_loss_db)),
        "total_length_wl": design.length_wl,
        "trial": design.trial,
        "choice": {"medium": list(design.choice.medium), "short": list(design.choice.short)},
        "u": list(design.u),
        "elements": elements,
        "robustness": monte_carlo(study.problem, design, study.spread).as_dict(),
    }


def summary_document(study: Study, outcome: SearchOutcome, warnings: list[str]) -> dict:
    """The content of summary.json (without the file hashes)."""
    designs = [design_doc(study, d, k + 1) for k, d in enumerate(outcome.designs)]
    best = designs[0] if designs else None
    build, build_warnings = build_view(study, outcome.designs[0]) if outcome.designs else (None, [])
    warnings = list(warnings) + build_warnings
    return {
        "study": study.problem.name,
        "description": study.description,
        "file": str(study.path),
        "inputs_digest": study.digest,
        "optmatch_version": __version__,
        "inputs": study.raw,
        "system_ohm": study.problem.z_sys,
        "reference_hz": study.problem.f_ref,
        "mask": _mask_doc(study),
        "feasibility": study.problem.feasibility().as_dict(),
        "verdict": "PASS" if best and best["passes"] else "FAIL",
        "best_margin_db": best["margin_db"] if best else None,
        "ranked_by": outcome.ranked_by,
        "designs": designs,
        "pareto": [{"margin_db": d.margin_db, "total_length_wl": d.length_wl, "trial": d.trial}
                   for d in outcome.pareto],
        "search": {
            "trials_complete": outcome.trials_complete,
            "evaluations": outcome.evaluations,
            "elapsed_s": outcome.elapsed_s,
            "trial_time_s": outcome.trial_time_s,
            "stopped_early": outcome.stopped_early,
            "seeds": [s.origin for s in outcome.seeds],
            "settings": dict(study.search.__dict__),
        },
        "warnings": warnings,
        "tolerance": dict(study.spread.__dict__),
        "cut_list": build,
    }


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def write_results(study: Study, outcome: SearchOutcome, out_root: Path,
                  warnings: list[str] | None = None) -> tuple[Path, dict]:
    """Write the whole results folder; returns its path and the summary document written."""
    warnings = list(warnings or [])
    folder = results_dir(study, out_root)
    folder.mkdir(parents=True, exist_ok=True)
    problem = study.problem
    doc = summary_document(study, outcome, warnings)
    files: list[Path] = []
    if outcome.designs:
        perfs = [(f"#{k + 1}", performance(problem, d)) for k, d in enumerate(outcome.designs[:PLOTTED_DESIGNS])]
        files.append(plot_return_loss(perfs, problem.grid, folder / "return_loss.png",
                                      segments=list(problem.grid.segments)))
        files.append(plot_smith(perfs, folder / "smith.png", problem.z_sys,
                                min_rl_db=float(problem.grid.min_rl_db.max())))
        files += list(export_touchstone(problem, outcome.designs[0], folder))
    if outcome.pareto:
        front = [(d.margin_db, d.length_wl) for d in outcome.pareto]
        files.append(plot_pareto(outcome.all_points, front, folder / "pareto.png"))
    files.append(write_designs_csv(design_rows(problem, outcome.designs), folder / "designs.csv"))
    if doc.get("cut_list"):
        files.append(write_text_atomic(folder / "cut_list.md", cut_list_markdown(doc["cut_list"], problem.name,
                                                                                 problem.f_ref)))
        files.append(write_text_atomic(folder / "cut_list.csv", cut_list_csv(doc["cut_list"])))
    files.append(write_text_atomic(folder / "summary.md", summary_markdown(doc)))
    doc["files"] = {p.name: _sha256(p) for p in files}
    write_json_atomic(folder / "summary.json", doc)
    return folder, doc
