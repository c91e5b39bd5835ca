"""``optmatch batch DIR``, ``optmatch worker FILE…`` and ``optmatch report DIR``."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from rich.progress import TaskID
from rich.text import Text

from optmatch.cli.terminal import console, progress, table
from optmatch.outputs.document import passes

EXIT_FAILS_MASK = 1
EXIT_ERRORS = 2


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("batch", help="run every study file in a folder (resumable)",
                       description="Run every study file (*.yaml) in a folder; a rerun continues an "
                                   "interrupted batch. Writes results/<study>/ and the batch report.")
    p.add_argument("folder", type=Path)
    p.add_argument("--workers", type=int, default=1,
                   help="processes working on the studies on this machine (default 1)")
    p.add_argument("--storage", default=None,
                   help="database URL shared with other machines (default: $OPTMATCH_STORAGE, else a journal "
                        "file per study); the environment keeps a password off the command line")
    p.add_argument("--share", action="store_true",
                   help="all workers work on one study at a time (default: each worker takes whole studies)")
    p.add_argument("--out", type=Path, default=Path("results"), help="results root folder (default results/)")
    p.set_defaults(handler=run_batch_command)

    p = sub.add_parser("worker", help="join studies in a shared storage from another process or machine",
                       description="Run trials of the given studies into a shared storage until each "
                                   "study's budget is met. Writes no results folder (run or batch does).")
    p.add_argument("files", type=Path, nargs="+", metavar="FILE")
    p.add_argument("--storage", default=None,
                   help="database URL or journal file (default: $OPTMATCH_STORAGE, else the study's journal "
                        "under --out)")
    p.add_argument("--out", type=Path, default=Path("results"), help="results root holding the journals")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument("--parent-pid", type=int, default=None, help=argparse.SUPPRESS)
    p.add_argument("--batch-events", action="store_true", help=argparse.SUPPRESS)  # a helper of `batch`
    p.add_argument("--share", action="store_true", help=argparse.SUPPRESS)
    p.add_argument("--pool-threads", type=_at_least_one, default=None, help=argparse.SUPPRESS)
    p.set_defaults(handler=run_worker_command)

    p = sub.add_parser("report", help="write the batch report (HTML and markdown) over a results folder",
                       description="Write DIR/report.html and DIR/report.md, one row per study, "
                                   "with a page per study.")
    p.add_argument("folder", type=Path)
    p.set_defaults(handler=run_report_command)


def _at_least_one(text: str) -> int:
    """A count of threads: a whole number, 1 or more."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be at least 1, got {value}")
    return value


def _budget(seconds: float | None) -> str:
    if seconds is None:
        return ""
    return f"budget {int(seconds) // 60}:{int(seconds) % 60:02d}"


def _warn_if_password_on_command_line(given: str | None) -> None:
    """A password typed after --storage is in the shell's process list: say how to keep it out."""
    from optmatch.running.storage_url import ENV_STORAGE, has_password

    if given and has_password(given):
        print(f"optmatch: note: the password given with --storage shows in the process list of this "
              f"machine; put the URL in the {ENV_STORAGE} environment variable instead", file=sys.stderr)


def _quiet_optuna() -> None:
    """optuna logs an interrupted trial with a traceback; the command prints its own one line."""
    import optuna

    optuna.logging.set_verbosity(optuna.logging.ERROR)


def run_batch_command(args: argparse.Namespace) -> int:
    from optmatch.running.batch import BatchListener, StudyEntry, run_batch
    from optmatch.running.storage_url import from_environment

    _quiet_optuna()
    _warn_if_password_on_command_line(args.storage)
    err = console(stderr=True)

    class Display(BatchListener):
        def __init__(self) -> None:
            self.prog = progress()
            self.overall: TaskID | None = None
            self.tasks: dict[str, TaskID] = {}
            self.done: dict[str, int] = {}

        def _overall(self) -> None:
            if self.overall is not None:
                self.prog.update(self.overall, completed=sum(self.done.values()))

        def batch_started(self, entries: list[StudyEntry]) -> None:
            for e in entries:
                if e.status == "error":
                    err.print(f"optmatch: error: {e.message}", markup=False, highlight=False)
            todo = [e for e in entries if e.status == "pending"]
            self.prog.start()
            total = sum(e.trials_budget for e in todo)
            self.overall = self.prog.add_task(f"all {len(todo)} studies", total=max(total, 1), status="")
            for e in todo:
                self.done[e.name] = 0

        def study_started(self, entry: StudyEntry) -> None:
            self.tasks[entry.name] = self.prog.add_task(f"  {entry.name}", total=entry.trials_budget,
                                                        status=_budget(entry.time_budget_s))

        def study_progress(self, entry: StudyEntry, done: int, total: int, best: float | None) -> None:
            if entry.name not in self.tasks:
                return
            status = f"best {best:+.2f} dB" if best is not None else _budget(entry.time_budget_s)
            self.prog.update(self.tasks[entry.name], completed=min(done, total), status=status)
            self.done[entry.name] = min(done, total)
            self._overall()

        def study_finished(self, entry: StudyEntry) -> None:
            task = self.tasks.get(entry.name)
            if task is not None:
                text = entry.verdict or entry.status
                if entry.status == "error":
                    text = "error"
                self.prog.update(task, completed=entry.trials_budget, status=text)
            # A study that stopped on its time budget or target still counts as all its trials.
            self.done[entry.name] = entry.trials_budget
            self._overall()
            if entry.status == "error":
                self.prog.console.print(f"optmatch: error: {entry.message}", markup=False, highlight=False)

        def stop(self) -> None:
            if self.overall is not None:
                self.prog.stop()

    display = Display()
    try:
        entries = run_batch(args.folder, args.out, from_environment(args.storage), args.workers, display,
                            share=args.share)
    finally:
        display.stop()
    _closing_table(entries, args.out)
    if any(e.status != "done" for e in entries):
        return EXIT_ERRORS
    return EXIT_FAILS_MASK if any(not passes(e.verdict) for e in entries) else 0


def _closing_table(entries: list, out: Path) -> None:
    from optmatch.outputs.document import ResultsFileError, read_summary
    from optmatch.outputs.report import loads_met_text

    tab = table("study", "status", "mask", "best margin dB", "loads met (worst)", "trials", "time s", title="batch")
    for e in entries:
        margin = f"{e.best_margin_db:+.2f}" if e.best_margin_db is not None else "–"
        trials = f"{e.trials_complete}/{e.trials_budget}" if e.trials_budget else "–"
        loads = "–"
        summary = out / e.name / "summary.json"
        if e.status == "done" and summary.is_file():
            try:
                loads = loads_met_text(read_summary(summary))
            except ResultsFileError:
                pass
        tab.add_row(Text(e.name), e.status, e.verdict or "–", margin, Text(loads), trials,
                    f"{e.elapsed_s:.0f}" if e.elapsed_s else "–")
    out_console = console()
    out_console.print(tab)
    out_console.print(Text(f"report: {out / 'report.html'}"))


def run_worker_command(args: argparse.Namespace) -> int:
    from optmatch.running.storage_url import from_environment
    from optmatch.running.worker import JsonLineEvents, StudyWorker, join_files, stop_with_parent

    _quiet_optuna()
    if args.parent_pid is not None:
        stop_with_parent(args.parent_pid)
    _warn_if_password_on_command_line(args.storage)
    storage = from_environment(args.storage)
    if args.batch_events:  # a helper of `batch`: take whole studies, tell the parent on stdout
        from optmatch.running.batch import read_entries
        from optmatch.running.cores import pool_threads

        studies = [e.study for e in read_entries(list(args.files)) if e.study is not None]
        with pool_threads(args.pool_threads):
            StudyWorker(studies, args.out, storage, args.share, JsonLineEvents(sys.stdout)).run()
        return 0
    if args.quiet:
        results = join_files(args.files, storage, args.out)
    else:
        with progress() as prog:
            tasks: dict[str, TaskID] = {}

            def report(name: str, done: int, total: int, best: float | None) -> None:
                if name not in tasks:
                    tasks[name] = prog.add_task(name, total=total, status="")
                status = f"best {best:+.2f} dB" if best is not None else ""
                prog.update(tasks[name], completed=min(done, total), total=total, status=status)

            results = join_files(args.files, storage, args.out, report)
    failed = False
    for r in results:
        if r.error:
            failed = True
            print(f"optmatch: error: {r.error}", file=sys.stderr)
        else:
            best = f"{r.best_margin_db:+.2f} dB" if r.best_margin_db is not None else "–"
            print(f"{r.name}: {r.trials_complete} complete trials in the storage, best margin {best}")
    return EXIT_ERRORS if failed else 0


def run_report_command(args: argparse.Namespace) -> int:
    from optmatch.outputs.report import collect_rows, write_report

    if not args.folder.is_dir():
        print(f"optmatch: error: {args.folder}: not a folder", file=sys.stderr)
        return EXIT_ERRORS
    rows, problems = collect_rows(args.folder)
    if not rows:
        for line in problems:
            print(f"optmatch: error: {line}", file=sys.stderr)
        print(f"optmatch: error: {args.folder}: no study results (*/summary.json), journals or batch.json found",
              file=sys.stderr)
        return EXIT_ERRORS
    written = write_report(args.folder)
    for line in written.problems:  # unreadable results files: their rows say so, and the exit code
        print(f"optmatch: error: {' '.join(line.split())}", file=sys.stderr)
    print(f"report: {written.html}  (markdown: {written.markdown})")
    return EXIT_ERRORS if written.problems else 0
