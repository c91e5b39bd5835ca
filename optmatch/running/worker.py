"""Join studies from another process or machine: run trials into a shared storage, write nothing else.

A worker adds trials to a study until the study's budget (complete trials in the storage), time
budget or target margin is reached.  Results folders are written by ``run`` or ``batch``.
"""

from __future__ import annotations

import _thread
import os
import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

from optmatch.errors import OptmatchError
from optmatch.running.alternatives import search_study
from optmatch.running.results import results_dir
from optmatch.running.storage import open_storage
from optmatch.studyfile.loader import Study, StudyFileError, load_study

PARENT_POLL_S = 1.0


@dataclass(frozen=True)
class WorkerResult:
    """What one worker did for one study file (``error`` is a one-line message, or empty)."""

    file: Path
    name: str
    trials_complete: int
    best_margin_db: float | None
    error: str = ""


def join_study(study: Study, storage_url: str | None, out_root: Path,
               progress: Callable[[int, int, float | None], None] | None = None) -> WorkerResult:
    """Run trials of ``study`` into its storage until its budget is met."""
    storage = open_storage(storage_url, results_dir(study, out_root))
    outcome = search_study(study, storage, progress=progress)
    best = outcome.designs[0].margin_db if outcome.designs else None
    return WorkerResult(study.path, study.problem.name, outcome.trials_complete, best)


def join_files(files: Sequence[Path], storage_url: str | None, out_root: Path,
               progress: Callable[[str, int, int, float | None], None] | None = None) -> list[WorkerResult]:
    """Join every study file in turn; a broken file or storage is reported and skipped."""
    out: list[WorkerResult] = []
    for path in files:
        try:
            study = load_study(path)
        except StudyFileError as exc:
            out.append(WorkerResult(Path(path), Path(path).stem, 0, None, "; ".join(exc.problems)))
            continue
        name = study.problem.name
        fn = None if progress is None else (lambda d, t, b, n=name: progress(n, d, t, b))
        try:
            out.append(join_study(study, storage_url, out_root, fn))
        except (OptmatchError, ValueError, OSError) as exc:
            out.append(WorkerResult(Path(path), name, 0, None, " ".join(str(exc).split())))
    return out


def stop_with_parent(parent_pid: int) -> threading.Thread:
    """Interrupt this process (as Ctrl-C would) once ``parent_pid`` is no longer its parent.

    A helper started by ``batch`` must not outlive a killed batch; the interrupted trial is marked
    failed by optuna and the study resumes on the next run.
    """

    def watch() -> None:
        while os.getppid() == parent_pid:
            time.sleep(PARENT_POLL_S)
        _thread.interrupt_main()

    thread = threading.Thread(target=watch, name="optmatch-parent-watch", daemon=True)
    thread.start()
    return thread


__all__ = ["WorkerResult", "join_files", "join_study", "stop_with_parent"]
