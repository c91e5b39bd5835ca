"""Run every study file of a folder, resumably, with optional helper processes.

Order of work: every study file is read first (a broken one is recorded with its one-line error
and the others go on); every good study is opened in its storage, its stale trials are failed and
queued again, and its closed-form seeds are queued if it is new.  Then ``workers - 1`` helper
processes (``optmatch worker``) start on the same list of files and this process works through it
too; several processes share each study's storage, and the budget counts complete trials in the
storage, so a rerun after an interruption continues where the last one stopped.

After each study this process writes its results folder, ``batch.json`` (the state of every study)
and the batch report, so a partial night still leaves a report.
"""

from __future__ import annotations

import json
import os
import re
import signal
import subprocess
import sys
import time
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path

import optuna
from optuna.storages import BaseStorage

from optmatch.errors import OptmatchError
from optmatch.io.atomic import write_json_atomic
from optmatch.outputs.report import write_report
from optmatch.running.alternatives import search_study
from optmatch.running.results import results_dir, write_results
from optmatch.running.search import enqueue_seeds, open_study, study_seeds
from optmatch.running.storage import fail_stale, is_url, live_running, open_database, open_storage
from optmatch.studyfile.loader import Study, StudyFileError, load_study

STATE_NAME = "batch.json"
STUDY_SUFFIXES = (".yaml", ".yml")
HELPER_POLL_S = 0.2
HELPER_STOP_S = 30.0


class BatchError(OptmatchError):
    """The batch as a whole cannot run (no study files, unreachable shared storage)."""


@dataclass
class StudyEntry:
    """One study file of the batch and how it went.

    ``status``: ``pending``, ``running``, ``done``, ``error`` or ``interrupted``.
    """

    file: str
    name: str
    status: str = "pending"
    message: str = ""
    verdict: str | None = None
    best_margin_db: float | None = None
    trials_complete: int = 0
    trials_budget: int = 0
    time_budget_s: float | None = None
    elapsed_s: float = 0.0
    study: Study | None = field(default=None, repr=False)

    def as_dict(self) -> dict:
        doc = asdict(self)
        doc.pop("study")
        return doc


class BatchListener:
    """Receives the batch's events (the command line shows them; the default ignores them)."""

    def batch_started(self, entries: list[StudyEntry]) -> None: ...

    def study_started(self, entry: StudyEntry) -> None: ...

    def study_progress(self, entry: StudyEntry, done: int, total: int, best: float | None) -> None: ...

    def study_finished(self, entry: StudyEntry) -> None: ...


def find_study_files(folder: Path) -> list[Path]:
    """Study files directly in ``folder`` (``*.yaml``, ``*.yml``), sorted by name."""
    folder = Path(folder)
    if not folder.is_dir():
        raise BatchError(f"{folder}: not a folder")
    files = sorted(p for p in folder.iterdir() if p.suffix in STUDY_SUFFIXES and p.is_file())
    if not files:
        raise BatchError(f"{folder}: no study files (*.yaml) found")
    return files


def one_line(problems: list[str], path: Path) -> str:
    """Every problem of one file on one line, the file named once (``file:LINE: ...`` as ``line LINE: ...``)."""
    shown = str(path)
    rest = [re.sub(r"^:(\d+): ", r"line \1: ", p.removeprefix(shown)).removeprefix(": ") for p in problems]
    return f"{shown}: " + "; ".join(rest)


def read_entries(files: list[Path]) -> list[StudyEntry]:
    """Read every file; broken files and reused study names become ``error`` entries."""
    entries: list[StudyEntry] = []
    owner: dict[str, str] = {}
    for path in files:
        try:
            study = load_study(path)
        except StudyFileError as exc:
            entries.append(StudyEntry(str(path), path.stem, "error", one_line(exc.problems, path)))
            continue
        name = study.problem.name
        if name in owner:
            entries.append(StudyEntry(str(path), name, "error",
                                      f"{path}: name: {name!r} is already used by {owner[name]}"))
            continue
        owner[name] = str(path)
        entries.append(StudyEntry(str(path), name, trials_budget=study.search.trials,
                                  time_budget_s=study.search.time_s, study=study))
    return entries


def _complete_count(ost: optuna.Study) -> int:
    return len(ost.get_trials(deepcopy=False, states=(optuna.trial.TrialState.COMPLETE,)))


def _finished_before(entry: StudyEntry, folder: Path, ost: optuna.Study) -> bool:
    """Results already written for these inputs and for every complete trial in the storage."""
    try:
        doc = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return False
    assert entry.study is not None
    if doc.get("inputs_digest") != entry.study.digest:
        return False
    if doc.get("search", {}).get("trials_complete") != _complete_count(ost):
        return False
    entry.verdict = doc.get("verdict")
    entry.best_margin_db = doc.get("best_margin_db")
    entry.trials_complete = doc["search"]["trials_complete"]
    entry.elapsed_s = float(doc["search"].get("elapsed_s") or 0.0)
    return True


def prepare(study: Study, storage: BaseStorage) -> optuna.Study:
    """Open ``study`` in ``storage``, fail and requeue its stale trials, queue seeds if it is new."""
    ost = open_study(study, storage)
    fail_stale(ost)
    enqueue_seeds(ost, study.problem, study_seeds(study.problem), study.search.trials)
    return ost


class Batch:
    """One batch run over ``folder`` writing results under ``out_root``."""

    def __init__(self, folder: Path, out_root: Path, storage_url: str | None = None, workers: int = 1,
                 listener: BatchListener | None = None) -> None:
        if workers < 1:
            raise BatchError(f"--workers: must be at least 1, got {workers}")
        self.folder = Path(folder)
        self.out_root = Path(out_root)
        self.storage_url = storage_url
        self.workers = workers
        self.listener = listener or BatchListener()
        self.entries: list[StudyEntry] = []
        self.helpers: list[subprocess.Popen] = []
        self._storages: dict[str, BaseStorage] = {}
        self._shared: BaseStorage | None = None

    # -------------------------------------------------------------- state and report

    def save_state(self) -> None:
        """Write ``batch.json`` and the report (HTML and markdown) over the results root."""
        self.out_root.mkdir(parents=True, exist_ok=True)
        write_json_atomic(self.out_root / STATE_NAME, {
            "folder": str(self.folder), "storage": self.storage_url or "journal per study",
            "workers": self.workers, "updated": time.strftime("%Y-%m-%d %H:%M:%S"),
            "studies": [e.as_dict() for e in self.entries]})
        write_report(self.out_root)

    # -------------------------------------------------------------- storage

    def _storage_for(self, study: Study) -> BaseStorage:
        if self.storage_url is not None and is_url(self.storage_url):
            if self._shared is None:
                self._shared = open_database(self.storage_url)
            return self._shared
        return open_storage(self.storage_url, results_dir(study, self.out_root))

    def _open(self, entry: StudyEntry) -> bool:
        """Prepare one study; False if it needs no more work or cannot run."""
        assert entry.study is not None
        try:
            storage = self._storage_for(entry.study)
            ost = prepare(entry.study, storage)
        except OptmatchError as exc:
            if self.storage_url is not None and is_url(self.storage_url):
                raise BatchError(" ".join(str(exc).split())) from None
            entry.status, entry.message = "error", " ".join(str(exc).split())
            return False
        self._storages[entry.name] = storage
        if _finished_before(entry, results_dir(entry.study, self.out_root), ost):
            entry.status, entry.message = "done", "results already complete"
            return False
        return True

    # -------------------------------------------------------------- helpers

    def _start_helpers(self, files: list[str]) -> None:
        if self.workers < 2 or not files:
            return
        logs = self.out_root / "workers"
        logs.mkdir(parents=True, exist_ok=True)
        cmd = [sys.executable, "-m", "optmatch", "worker", *files, "--out", str(self.out_root),
               "--parent-pid", str(os.getpid()), "--quiet"]
        if self.storage_url is not None:
            cmd += ["--storage", self.storage_url]
        for k in range(self.workers - 1):
            with open(logs / f"helper-{k + 1}.log", "ab") as log:
                self.helpers.append(subprocess.Popen(cmd, stdin=subprocess.DEVNULL, stdout=log, stderr=log))

    def _helpers_running(self) -> bool:
        return any(p.poll() is None for p in self.helpers)

    def _stop_helpers(self, interrupt: bool) -> None:
        for p in self.helpers:
            if interrupt and p.poll() is None:
                p.send_signal(signal.SIGINT)
        for p in self.helpers:
            try:
                p.wait(timeout=HELPER_STOP_S)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait()

    # -------------------------------------------------------------- one study

    def _run_one(self, entry: StudyEntry) -> None:
        study = entry.study
        assert study is not None
        storage = self._storages[entry.name]
        entry.status = "running"
        self.listener.study_started(entry)
        self.save_state()
        start = time.monotonic()

        def progress(done: int, total: int, best: float | None) -> None:
            self.listener.study_progress(entry, done, total, best)

        outcome = search_study(study, storage, progress=progress)
        if self.helpers:
            # A helper may still be finishing a trial of this study: let it land in the results.
            ost = open_study(study, storage)
            while live_running(ost) and self._helpers_running():
                time.sleep(HELPER_POLL_S)
            outcome = search_study(study, storage)
        elapsed = time.monotonic() - start
        outcome = replace(outcome, elapsed_s=elapsed)
        _, doc = write_results(study, outcome, self.out_root)
        entry.status = "done"
        entry.verdict = doc.verdict
        entry.best_margin_db = doc.best_margin_db
        entry.trials_complete = outcome.trials_complete
        entry.elapsed_s = elapsed

    # -------------------------------------------------------------- the whole batch

    def run(self) -> list[StudyEntry]:
        """Run the batch; returns every entry (``error`` entries carry their one-line message)."""
        self.entries = read_entries(find_study_files(self.folder))
        todo = [e for e in self.entries if e.status == "pending" and self._open(e)]
        self.listener.batch_started(self.entries)
        self.save_state()
        self._start_helpers([e.file for e in todo])
        finished = False
        try:
            for entry in todo:
                try:
                    self._run_one(entry)
                except (OptmatchError, ValueError, OSError) as exc:
                    entry.status, entry.message = "error", " ".join(str(exc).split())
                self.listener.study_finished(entry)
                self.save_state()
            finished = True
        except KeyboardInterrupt:
            for e in self.entries:
                if e.status == "running":
                    e.status, e.message = "interrupted", "stopped by the user; a rerun resumes"
            raise
        finally:
            self._stop_helpers(interrupt=not finished)
            self.save_state()
        return self.entries


def run_batch(folder: Path, out_root: Path, storage_url: str | None = None, workers: int = 1,
              listener: BatchListener | None = None) -> list[StudyEntry]:
    """Run every study file in ``folder``; see :class:`Batch`."""
    return Batch(folder, out_root, storage_url, workers, listener).run()


__all__ = ["Batch", "BatchError", "BatchListener", "StudyEntry", "find_study_files", "prepare",
           "read_entries", "run_batch"]
