"""``optmatch check FILE`` and ``optmatch run FILE``."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from optmatch.cli.terminal import console, progress, table
from optmatch.studyfile.loader import StudyFileError, check_study, load_study

EXIT_FAILS_MASK = 1


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("check", help="validate a study file and run nothing",
                       description="Validate a study file; report every problem found, run nothing.")
    p.add_argument("file", type=Path)
    p.set_defaults(handler=run_check)

    p = sub.add_parser("run", help="run one study and write results/<name>/",
                       description="Run one study (resuming it if it was interrupted) and write its results.")
    p.add_argument("file", type=Path)
    p.add_argument("--out", type=Path, default=Path("results"), help="results root folder (default results/)")
    p.add_argument("--storage", default=None,
                   help="optuna storage URL (default: a journal file in the study's results folder)")
    p.add_argument("--json", action="store_true", help="print summary.json to stdout at the end")
    p.add_argument("--quiet", action="store_true", help="no progress bar or table")
    p.set_defaults(handler=run_run)


def run_check(args: argparse.Namespace) -> int:
    problems = check_study(args.file)
    if problems:
        for line in problems:
            print(line, file=sys.stderr)
        return 2
    print(f"{args.file}: ok")
    return 0


def print_designs(doc: dict) -> None:
    """Closing table of the best designs."""
    out = console()
    tab = table("rank", "verdict", "elements (load outwards)", "margin dB", "worst RL dB", "at MHz", "length λ",
                "yield", title=f"{doc['study']}: best designs, ranked by {doc.get('ranked_by', 'margin')}")
    for d in doc["designs"]:
        parts = []
        for e in d["elements"]:
            if e["kind"] == "lumped":
                parts.append(f"{e['connection']} {e['part'].upper()} {e['value']:.3g}")
            else:
                label = e["kind"].replace("_stub", " stub") + (f" ({e['end']})" if e["end"] else "")
                parts.append(f"{label} {e['electrical_deg']:.1f}° {e['z0_ohm']:.0f}Ω")
        tab.add_row(str(d["rank"]), "PASS" if d["passes"] else "FAIL", " · ".join(parts),
                    f"{d['margin_db']:+.2f}", f"{d['worst_return_loss_db']:.2f}",
                    f"{d['worst_freq_hz'] / 1e6:.2f}", f"{d['total_length_wl']:.3f}",
                    f"{100 * d['robustness']['yield_frac']:.0f}%" if d.get("robustness") else "–")
    out.print(tab)
    out.print("yield: share of simulated builds (cut, velocity-factor and Z0 spreads) that still meet the mask")
    for w in doc.get("warnings", []):
        out.print(f"[bold red]warning:[/] {w}")


def run_run(args: argparse.Namespace) -> int:
    import optuna

    from optmatch.running.pipeline import run_study

    optuna.logging.set_verbosity(optuna.logging.ERROR)  # an interrupted trial is not a traceback
    study = load_study(args.file)
    feasibility = study.problem.feasibility()  # the ceiling, said before the search
    if not (args.quiet or args.json) or not feasibility.feasible:
        console(stderr=args.quiet or args.json).print(feasibility.statement())
    if args.quiet:
        folder, doc = run_study(study, args.out, args.storage, progress_fn=None)
    else:
        with progress() as prog:
            task = prog.add_task(study.problem.name, total=study.search.trials, status="")

            def report(done: int, total: int, best: float | None) -> None:
                status = "" if best is None else (f"best yield {100 * best:.0f} %" if study.search.objective == "yield"
                                                  else f"best margin {best:+.2f} dB")
                prog.update(task, completed=done, total=total, status=status)

            folder, doc = run_study(study, args.out, args.storage, progress_fn=report)
    if args.json:
        print(json.dumps(doc, indent=2, default=str))
    elif not args.quiet:
        print_designs(doc)
        console().print(f"results: {folder}")
        if (folder / "cut_list.md").exists():
            console().print(f"cut list: {folder / 'cut_list.md'}")
    return 0 if doc["verdict"] == "PASS" else EXIT_FAILS_MASK


__all__ = ["StudyFileError", "register"]
