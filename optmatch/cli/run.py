"""``optmatch check FILE`` and ``optmatch run FILE``."""

from __future__ import annotations

import argparse
from collections.abc import Sequence
from pathlib import Path

from rich.table import Table
from rich.text import Text

from optmatch.cli.check import run_check
from optmatch.cli.terminal import console, progress
from optmatch.outputs.document import SummaryDoc, passes
from optmatch.outputs.tables import (
    ALTERNATIVE_ALIGN,
    ALTERNATIVE_HEAD,
    BUILD_HEAD,
    DESIGN_HEAD,
    LOAD_HEAD,
    LOADS_ALIGN,
    LOADS_HEAD,
    alternative_cells,
    build_cells,
    design_cells,
    load_cells,
    load_margin_align,
    load_margin_cells,
    load_margin_head,
    load_sentence,
    loads_rows,
    loads_sentence,
    mask_text,
)
from optmatch.studyfile.loader import StudyFileError, load_study

EXIT_FAILS_MASK = 1  # the study ran, but its verdict is not PASS (misses the mask, or over a rating)


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
    p.add_argument("--quiet", action="store_true", help="no progress bar or tables: one line with the verdict")
    p.set_defaults(handler=run_run)


def _table(head: Sequence[str], align: str, title: str) -> Table:
    """A terminal table; ``align`` has one letter per column (``l`` wraps, ``r`` is a number)."""
    tab = Table(title=title, show_lines=False, header_style="bold", title_justify="left")
    for col, a in zip(head, align, strict=True):
        tab.add_column(col, justify="right" if a == "r" else "left", no_wrap=a == "r")
    return tab


def _rows(tab: Table, rows: Sequence[Sequence[str]]) -> Table:
    for row in rows:
        tab.add_row(*(Text(str(c)) for c in row))  # user text is never read as markup
    return tab


def print_summary(doc: SummaryDoc) -> None:
    """The closing report: the load(s) alone, the ranked designs (on each load), the build sheet and the verdict."""
    out = console()
    if doc.several_loads:
        rows, left = loads_rows(doc)
        out.print(_rows(_table(LOADS_HEAD, LOADS_ALIGN, f"{doc.study}: the loads alone (no network)"), rows))
        if left:
            out.print(Text(f"(the {len(rows)} worst alone; {left} more in summary.json)"))
        out.print(Text(loads_sentence(doc)))
        out.print(Text(f"mask: {mask_text(doc.mask)}"))
    else:
        out.print(_rows(_table(LOAD_HEAD, "lrrrr", f"{doc.study}: the load alone (no network)"), load_cells(doc.load)))
        out.print(Text(f"mask: {mask_text(doc.mask)}"))
        out.print(Text(load_sentence(doc.load)))
    if doc.alternatives:
        title = f"{doc.study}: alternatives compared (best design of each)"
        out.print(_rows(_table(ALTERNATIVE_HEAD, ALTERNATIVE_ALIGN, title),
                        [alternative_cells(a) for a in doc.alternatives]))
    if doc.designs:
        ranked = f"ranked by {doc.ranked_by}" + (", within the ratings first" if doc.drive_w is not None else "")
        if doc.several_loads:
            ranked += (" of the loads met, then the worst margin" if doc.load_rule == "share" else "") \
                + "; margin: the worst load's"
        out.print(_rows(_table(DESIGN_HEAD, "llrrrrrl", f"{doc.study}: best designs ({ranked})"),
                        [design_cells(d) for d in doc.designs]))
        if doc.several_loads:
            out.print(_rows(_table(load_margin_head(doc), load_margin_align(doc),
                                   f"{doc.study}: margin of each design on each load"),
                            [load_margin_cells(d, doc) for d in doc.designs]))
            out.print("yield: share of simulated builds × loads (cut, velocity-factor and Z0 spreads) that still "
                      "meet the mask")
        else:
            out.print("yield: share of simulated builds (cut, velocity-factor and Z0 spreads) that still meet the mask")
    if doc.build is not None and doc.build.pieces:
        title = (f"build sheet of the design ranked {doc.build.design_rank} "
                 f"(electrical lengths at {doc.reference_hz / 1e6:.3f} MHz)")
        out.print(_rows(_table(BUILD_HEAD, "rllrlrrr", title), build_cells(doc.build)))
        out.print(Text(doc.build.allowances))
        out.print("assembly, from the load to the source:")
        for k, step in enumerate(doc.build.assembly, start=1):
            out.print(Text(f"  {k}. {step}"))
    for w in doc.warnings:
        out.print(Text.assemble(("warning: ", "bold red"), w))
    style = "bold green" if passes(doc.verdict) else "bold red"
    out.print(Text.assemble(("verdict: ", "bold"), (doc.verdict_line, style)))


def run_run(args: argparse.Namespace) -> int:
    import optuna

    from optmatch.running.pipeline import run_study

    optuna.logging.set_verbosity(optuna.logging.ERROR)  # an interrupted trial is not a traceback
    study = load_study(args.file)
    feasibility = study.problem.feasibility()  # the ceiling, said before the search
    if not (args.quiet or args.json) or not feasibility.feasible:
        console(stderr=args.quiet or args.json).print(Text(feasibility.statement()))
    if args.quiet:
        folder, doc = run_study(study, args.out, args.storage, progress_fn=None)
    else:
        with progress() as prog:
            task = prog.add_task(study.problem.name, total=study.trial_budget, status="")

            def report(done: int, total: int, best: float | None) -> None:
                if best is None:
                    status = ""
                elif study.search.objective == "yield":
                    status = f"best yield {100 * best:.0f} %"
                elif study.problem.load_rule == "share" and study.problem.several:
                    status = f"best share of loads met {100 * best:.0f} %"
                else:
                    status = f"best margin {best:+.2f} dB"
                prog.update(task, completed=done, total=total, status=status)

            folder, doc = run_study(study, args.out, args.storage, progress_fn=report)
    if args.json:
        print((folder / "summary.json").read_text(encoding="utf-8"), end="")
    elif args.quiet:
        print(f"{doc.study}: {doc.verdict_line}")
    else:
        print_summary(doc)
        console().print(Text(f"results: {folder}"))
        if (folder / "cut_list.md").exists():
            console().print(Text(f"cut list: {folder / 'cut_list.md'}"))
    return 0 if passes(doc.verdict) else EXIT_FAILS_MASK


__all__ = ["StudyFileError", "register"]
