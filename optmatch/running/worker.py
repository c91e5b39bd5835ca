"""Workers: processes that run studies.

* :class:`StudyWorker` is one process of a batch.  It takes whole studies from the list (by claiming
  them, :mod:`optmatch.running.claims`), runs each and writes its results folder itself.  When every
  remaining study is taken by another process, it helps one of them (adds trials to its storage, writes
  nothing), so workers share a study only when fewer studies than workers remain; with ``share`` they
  all work on one study at a time.  Everything it does is told to an :class:`Events` receiver.
* :func:`join_files` is ``optmatch worker FILE…``: it adds trials to studies in a shared storage (from
  another process or machine) until each study's budget is met, and writes no results folder.
"""

from __future__ import annotations

import _thread
import json
import os
import sys
import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import IO

import optuna
from optuna.storages import BaseStorage

from optmatch.errors import OptmatchError
from optmatch.outputs.document import ResultsFileError, read_summary
from optmatch.running.alternatives import search_study
from optmatch.running.claims import claim_study
from optmatch.running.results import results_dir, write_results
from optmatch.running.search import enqueue_seeds, open_study, study_seeds
from optmatch.running.storage import fail_stale, open_storage
from optmatch.running.storage_url import is_url, scrub
from optmatch.studyfile.loader import Study, StudyFileError, load_study

PARENT_POLL_S = 1.0


# ---------------------------------------------------------------- one study


def prepare(study: Study, storage: BaseStorage) -> optuna.Study:
    """Open ``study`` in ``storage``, fail and requeue its stale trials, queue seeds if it is new."""
    ost = open_study(study, storage)
    fail_stale(ost)
    enqueue_seeds(ost, study.problem, study_seeds(study.problem), study.search.trials)
    return ost


def finished_before(study: Study, folder: Path, ost: optuna.Study) -> dict | None:
    """The outcome of an earlier run, when its results are written for these inputs and for every
    complete trial in the storage; None when the study has work (or writing) left."""
    path = folder / "summary.json"
    if not path.is_file():
        return None
    try:
        doc = read_summary(path)
    except ResultsFileError:  # an older layout or a damaged file: run (and rewrite) the study
        return None
    complete = len(ost.get_trials(deepcopy=False, states=(optuna.trial.TrialState.COMPLETE,)))
    if doc.inputs_digest != study.digest or doc.search.trials_complete != complete:
        return None
    return {"status": "done", "message": "results already complete", "verdict": doc.verdict,
            "best_margin_db": doc.best_margin_db, "trials_complete": complete,
            "elapsed_s": float(doc.search.elapsed_s or 0.0)}


# ---------------------------------------------------------------- events


class Events:
    """Receives what a worker does (the default ignores it)."""

    def started(self, name: str) -> None: ...

    def progress(self, name: str, done: int, total: int, best: float | None) -> None: ...

    def finished(self, name: str, result: dict) -> None:
        """``result``: ``status`` (``done`` or ``error``), ``message``, and for ``done`` the
        ``verdict``, ``best_margin_db``, ``trials_complete`` and ``elapsed_s`` (s)."""


class JsonLineEvents(Events):
    """Events as JSON lines on a stream (a helper of a batch tells its parent this way)."""

    def __init__(self, stream: IO[str]) -> None:
        self.stream = stream
        self.lock = threading.Lock()

    def _send(self, doc: dict) -> None:
        with self.lock:
            self.stream.write(json.dumps(doc) + "\n")
            self.stream.flush()

    def started(self, name: str) -> None:
        self._send({"event": "started", "name": name})

    def progress(self, name: str, done: int, total: int, best: float | None) -> None:
        self._send({"event": "progress", "name": name, "done": done, "total": total, "best": best})

    def finished(self, name: str, result: dict) -> None:
        self._send({"event": "finished", "name": name, "result": result})


def replay_event(line: str, events: Events) -> bool:
    """Pass one JSON line written by :class:`JsonLineEvents` on to ``events``; False if it is not one."""
    try:
        doc = json.loads(line)
        kind, name = doc["event"], str(doc["name"])
        if kind == "started":
            events.started(name)
        elif kind == "progress":
            events.progress(name, int(doc["done"]), int(doc["total"]), doc.get("best"))
        elif kind == "finished":
            events.finished(name, dict(doc["result"]))
        else:
            return False
    except (ValueError, KeyError, TypeError):
        return False
    return True


# ---------------------------------------------------------------- batch worker


class StudyWorker:
    """One process of a batch working through ``studies`` (see the module notes)."""

    def __init__(self, studies: Sequence[Study], out_root: Path, storage_url: str | None = None,
                 share: bool = False, events: Events | None = None) -> None:
        self.studies = list(studies)
        self.out_root = Path(out_root)
        self.storage_url = storage_url
        self.share = share
        self.events = events or Events()
        self._database: BaseStorage | None = None

    def _folder(self, study: Study) -> Path:
        return results_dir(study, self.out_root)

    def _storage_for(self, study: Study) -> BaseStorage:
        """The study's storage: its journal, or the one database connection this worker keeps."""
        if self.storage_url is not None and is_url(self.storage_url):
            if self._database is None:
                self._database = open_storage(self.storage_url, self._folder(study))
            return self._database
        return open_storage(self.storage_url, self._folder(study))

    def _message(self, exc: BaseException) -> str:
        return scrub(" ".join(str(exc).split()) or type(exc).__name__, self.storage_url)

    def run(self) -> None:
        """Work until every study is done here or taken by a live process that has been helped."""
        finished: set[str] = set()
        helped: set[str] = set()
        while True:
            pending = [s for s in self.studies if s.problem.name not in finished]
            if not pending:
                return
            candidates = pending[:1] if self.share else pending
            taken = False
            for study in candidates:
                claim = claim_study(self._folder(study), study.problem.name)
                if claim is not None:
                    with claim:
                        self.own(study)
                    finished.add(study.problem.name)
                    taken = True
                    break
            if taken:
                continue
            unhelped = [s for s in candidates if s.problem.name not in helped]
            if not unhelped:  # each is run by a live process, which writes its results
                finished.update(s.problem.name for s in candidates)
                continue
            self.help(unhelped[0])
            helped.add(unhelped[0].problem.name)

    def own(self, study: Study) -> None:
        """Run ``study`` (its claim is held here) and write its results folder."""
        name = study.problem.name
        folder = self._folder(study)
        try:
            storage = self._storage_for(study)
            ost = prepare(study, storage)
            before = finished_before(study, folder, ost)
            if before is not None:
                self.events.finished(name, before)
                return
            self.events.started(name)
            start = time.monotonic()
            outcome = search_study(study, storage, progress=lambda d, t, b: self.events.progress(name, d, t, b))
            outcome = replace(outcome, elapsed_s=time.monotonic() - start)
            _, doc = write_results(study, outcome, self.out_root)
        except (OptmatchError, ValueError, OSError) as exc:
            self.events.finished(name, {"status": "error", "message": self._message(exc)})
            return
        self.events.finished(name, {"status": "done", "message": "", "verdict": doc.verdict,
                                    "best_margin_db": doc.best_margin_db,
                                    "trials_complete": outcome.trials_complete, "elapsed_s": outcome.elapsed_s})

    def help(self, study: Study) -> None:
        """Add trials to ``study``, which another process runs, until no slot of its budget is left."""
        name = study.problem.name
        try:
            search_study(study, self._storage_for(study),
                         progress=lambda d, t, b: self.events.progress(name, d, t, b), owner=False)
        except (OptmatchError, ValueError, OSError) as exc:
            print(f"optmatch: error: helping {name}: {self._message(exc)}", file=sys.stderr, flush=True)


# ---------------------------------------------------------------- optmatch worker


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
    outcome = search_study(study, storage, progress=progress, owner=False)
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
            out.append(WorkerResult(Path(path), name, 0, None, scrub(" ".join(str(exc).split()), storage_url)))
    return out


def stop_with_parent(parent_pid: int) -> threading.Thread:
    """Interrupt this process (as Ctrl-C would) once ``parent_pid`` is no longer its parent.

    A helper started by ``batch`` must not outlive a killed batch; the interrupted trial is marked
    failed and the study resumes on the next run.
    """

    def watch() -> None:
        while os.getppid() == parent_pid:
            time.sleep(PARENT_POLL_S)
        _thread.interrupt_main()

    thread = threading.Thread(target=watch, name="optmatch-parent-watch", daemon=True)
    thread.start()
    return thread


__all__ = ["Events", "JsonLineEvents", "StudyWorker", "WorkerResult", "finished_before", "join_files",
           "join_study", "prepare", "replay_event", "stop_with_parent"]
