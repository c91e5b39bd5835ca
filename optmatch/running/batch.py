"""Run every study file of a folder, resumably, with several worker processes.

Order of work: the batch takes the results root (``<out>/.batch.lock``; a second batch there is
refused, naming the first), removes the temporary files killed writes left there, and reads every
study file (a broken one is recorded with its one-line error and the others go on).  Then
``workers - 1`` helper processes start on the same studies (forked, or as fresh interpreters: see
:mod:`optmatch.running.helpers`) and this process works through them too: each worker takes whole
studies, runs them and writes their results folders itself
(:class:`~optmatch.running.worker.StudyWorker`).  Workers share a study only when fewer studies than
workers remain, or with ``share``.

Helpers tell this process what they do as JSON lines on a pipe; this process alone writes
``batch.json`` (the state of every study, atomically) after every study that ends, and the batch
report at the start, at the end and at most every :data:`REPORT_EVERY_S` in between, so a partial
night still leaves a report.  A rerun skips studies whose results are complete
and resumes the others from their storage; each resumed study gets only the time left of its time
budget.

The storage URL reaches helpers through their memory or environment (never a command line), and
``batch.json`` names it without its password.  With several workers, every worker caps the
numerical libraries' thread pools at its share of the cores (:mod:`optmatch.running.cores`).
"""

from __future__ import annotations

import json
import re
import threading
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path

from optmatch.errors import OptmatchError
from optmatch.io.atomic import remove_orphan_temp_files, write_json_atomic
from optmatch.outputs.report import REPORT_HTML, REPORT_MD, write_report
from optmatch.running import helpers
from optmatch.running.claims import BATCH_CLAIM, REPORT_TARGETS, Claim, holder, try_claim
from optmatch.running.cores import pool_threads, threads_per_worker
from optmatch.running.helpers import ForkedHelper, Helper, InterpreterHelper
from optmatch.running.results import results_dir
from optmatch.running.storage import StorageError, open_database
from optmatch.running.storage_url import is_url, scrub, shown
from optmatch.running.worker import Events, StudyWorker, prepare, replay_event
from optmatch.studyfile.loader import Study, StudyFileError, load_study

STATE_NAME = "batch.json"
STUDY_SUFFIXES = (".yaml", ".yml")
HELPER_STOP_S = 30.0
REPORT_EVERY_S = 30.0  # while studies end, the report is rewritten at most this often (batch.json always)


class BatchError(OptmatchError):
    """The batch as a whole cannot run (no study files, unreachable shared storage, results root busy)."""


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
    """Receives the batch's events (the command line shows them; the default ignores them).
    Events from helper processes arrive on other threads, one at a time."""

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
        entries.append(StudyEntry(str(path), name, trials_budget=study.trial_budget,
                                  time_budget_s=study.search.time_s, study=study))
    return entries


def _looks_done(study: Study, out_root: Path) -> bool:
    """Results written for these inputs with the whole trial budget (a cheap guess, no storage opened)."""
    try:
        doc = json.loads((results_dir(study, out_root) / "summary.json").read_text(encoding="utf-8"))
        return doc["inputs_digest"] == study.digest and doc["search"]["trials_complete"] >= study.search.trials
    except (OSError, ValueError, KeyError, TypeError):
        return False


class Batch(Events):
    """One batch run over ``folder`` writing results under ``out_root``."""

    def __init__(self, folder: Path, out_root: Path, storage_url: str | None = None, workers: int = 1,
                 listener: BatchListener | None = None, share: bool = False) -> None:
        if workers < 1:
            raise BatchError(f"--workers: must be at least 1, got {workers}")
        self.folder = Path(folder)
        self.out_root = Path(out_root)
        self.storage_url = storage_url
        self.workers = workers
        self.share = share
        self.listener = listener or BatchListener()
        self.entries: list[StudyEntry] = []
        self.helpers: list[Helper] = []
        self._readers: list[threading.Thread] = []
        self._lock = threading.RLock()
        self._reported = time.monotonic()

    def _entry(self, name: str) -> StudyEntry | None:
        return next((e for e in self.entries if e.name == name and e.study is not None), None)

    # -------------------------------------------------------------- state and report

    def save_state(self, report: bool = True) -> None:
        """Write ``batch.json``, and the report (HTML and markdown) over the results root when
        ``report`` or when the last one is :data:`REPORT_EVERY_S` old."""
        with self._lock:
            self.out_root.mkdir(parents=True, exist_ok=True)
            write_json_atomic(self.out_root / STATE_NAME, {
                "folder": str(self.folder),
                "storage": shown(self.storage_url) if self.storage_url else "journal per study",
                "workers": self.workers, "updated": time.strftime("%Y-%m-%d %H:%M:%S"),
                "studies": [e.as_dict() for e in self.entries]})
            if report or time.monotonic() - self._reported >= REPORT_EVERY_S:
                write_report(self.out_root)
                self._reported = time.monotonic()

    # -------------------------------------------------------------- events (any worker, any thread)

    def started(self, name: str) -> None:
        with self._lock:
            entry = self._entry(name)
            if entry is None:
                return
            entry.status = "running"
            self.listener.study_started(entry)

    def progress(self, name: str, done: int, total: int, best: float | None) -> None:
        with self._lock:
            entry = self._entry(name)
            if entry is not None and entry.status == "running":
                self.listener.study_progress(entry, min(done, total), total, best)

    def finished(self, name: str, result: dict) -> None:
        with self._lock:
            entry = self._entry(name)
            if entry is None or entry.status in ("done", "error"):
                return  # a worker found results another worker had just written
            entry.status = str(result.get("status", "error"))
            entry.message = scrub(str(result.get("message", "")), self.storage_url)
            entry.verdict = result.get("verdict")
            entry.best_margin_db = result.get("best_margin_db")
            entry.trials_complete = int(result.get("trials_complete") or 0)
            entry.elapsed_s = float(result.get("elapsed_s") or 0.0)
            self.listener.study_finished(entry)
            self.save_state(report=False)

    # -------------------------------------------------------------- helpers

    def _start_helpers(self, count: int, claim: Claim) -> None:
        if count < 1:
            return
        logs = self.out_root / "workers"
        logs.mkdir(parents=True, exist_ok=True)
        studies = [e.study for e in self.entries if e.study is not None]
        threads = threads_per_worker(self.workers)
        fork = helpers.can_fork()  # asked once: the readers started below are threads
        for k in range(count):
            log = logs / f"helper-{k + 1}.log"
            if fork:
                self.helpers.append(ForkedHelper(studies, self.out_root, self.storage_url, self.share, threads,
                                                 log, claim.release))
            else:
                self.helpers.append(InterpreterHelper([str(s.path) for s in studies], self.out_root,
                                                      self.storage_url, self.share, threads, log))
        for k, helper in enumerate(self.helpers):
            reader = threading.Thread(target=self._read_events, args=(helper,), name=f"optmatch-helper-{k + 1}",
                                      daemon=True)
            reader.start()
            self._readers.append(reader)

    def _read_events(self, helper: Helper) -> None:
        for line in helper.lines():
            replay_event(line, self)

    def _stop_helpers(self, interrupt: bool) -> None:
        for helper in self.helpers:
            if interrupt:
                helper.interrupt()
        for helper in self.helpers:
            if not helper.wait(timeout=HELPER_STOP_S if interrupt else None):
                helper.kill()
        for reader in self._readers:
            reader.join(timeout=HELPER_STOP_S)

    # -------------------------------------------------------------- the whole batch

    def _check_shared_storage(self) -> None:
        """A database must answer before any worker starts (one clear error instead of one per study)."""
        if self.storage_url is None or not is_url(self.storage_url):
            return
        try:
            storage = open_database(self.storage_url)
        except StorageError as exc:
            raise BatchError(scrub(" ".join(str(exc).split()), self.storage_url)) from None
        storage.engine.dispose()  # no pooled connection is left for a forked helper to inherit

    def _todo(self) -> list[Study]:
        return [e.study for e in self.entries if e.study is not None and e.status in ("pending", "running")]

    def run(self) -> list[StudyEntry]:
        """Run the batch; returns every entry (``error`` entries carry their one-line message)."""
        files = find_study_files(self.folder)
        self.out_root.mkdir(parents=True, exist_ok=True)
        claim = try_claim(self.out_root / BATCH_CLAIM, f"batch {self.folder}")
        if claim is None:
            raise BatchError(f"{self.out_root}: a batch is already running there: "
                             f"{holder(self.out_root / BATCH_CLAIM)}")
        with claim, pool_threads(threads_per_worker(self.workers)):
            return self._run(files, claim)

    def _run(self, files: list[Path], claim: Claim) -> list[StudyEntry]:
        remove_orphan_temp_files(self.out_root, only_targets=frozenset({STATE_NAME, REPORT_HTML, REPORT_MD}))
        self._check_shared_storage()
        self.entries = read_entries(files)
        for e in self.entries:
            if e.study is not None:
                remove_orphan_temp_files(results_dir(e.study, self.out_root), only_targets=REPORT_TARGETS)
        todo = self._todo()
        finished = False
        try:
            with self._lock:  # helpers' events wait until the listener has seen the batch start
                if any(not _looks_done(s, self.out_root) for s in todo):
                    self._start_helpers(self.workers - 1, claim)  # first, so they start as early as this one
                self.listener.batch_started(self.entries)
                self.save_state()
            StudyWorker(todo, self.out_root, self.storage_url, self.share, self).run()
            self._stop_helpers(interrupt=False)
            # A helper that ended early (killed, or a bug: see workers/*.log) left its studies' claims
            # free: take them over here, resuming from their storage.
            left = self._todo()
            if left:
                StudyWorker(left, self.out_root, self.storage_url, self.share, self).run()
            finished = True
        except KeyboardInterrupt:
            with self._lock:
                for e in self.entries:
                    if e.status == "running":
                        e.status, e.message = "interrupted", "stopped by the user; a rerun resumes"
            raise
        finally:
            self._stop_helpers(interrupt=not finished)
            self.save_state()
        return self.entries


def run_batch(folder: Path, out_root: Path, storage_url: str | None = None, workers: int = 1,
              listener: BatchListener | None = None, share: bool = False) -> list[StudyEntry]:
    """Run every study file in ``folder``; see :class:`Batch`."""
    return Batch(folder, out_root, storage_url, workers, listener, share).run()


__all__ = ["Batch", "BatchError", "BatchListener", "StudyEntry", "find_study_files", "prepare",
           "read_entries", "run_batch"]
