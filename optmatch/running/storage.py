"""Where trials live: optuna's own storages, never a home-made one.

Default: a journal file per study under ``results/<study>/search.journal`` (several processes on
one machine may share it).  A URL (``postgresql://…``, ``sqlite:///…``) selects a database shared
by workers on several machines.  Anything else given as ``--storage`` is a journal file path.

Dead workers.  Both storages carry a heartbeat: optuna's own for databases; for the journal, which
has none in optuna, :class:`WatchedJournalStorage` records the owner (host, pid, process start
time) and a heartbeat time in each running trial's system attributes.  optuna's optimisation loop
calls :meth:`_get_stale_trial_ids` before every trial; a running trial whose owner process is gone
(same host) or whose heartbeat is older than the grace period (any host) is failed and queued again
by :class:`RetryStaleTrial`.  Completed trials are never touched.

Journal health.  Before a journal is used it is read line by line: a torn last line (a write cut
short by a kill) is moved to ``search.journal.torn`` and cut off, so new records do not glue onto
it; any other unreadable line stops that study with a :class:`StorageError` and the file is left
exactly as it was.
"""

from __future__ import annotations

import copy
import datetime
import json
import os
import socket
import time
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import Any

import optuna
from optuna.storages import BaseStorage, JournalStorage, RDBStorage
from optuna.storages._heartbeat import BaseHeartbeat
from optuna.storages.journal import JournalFileBackend, JournalFileOpenLock
from optuna.trial import FrozenTrial, TrialState

from optmatch.errors import OptmatchError

JOURNAL_NAME = "search.journal"
TORN_SUFFIX = ".torn"
HEARTBEAT_S = 20
GRACE_S = 60
MAX_RETRY = 3
OWNER_KEY = "optmatch:owner"          # {"host", "pid", "birth", "beat"}: who runs the trial, last beat (s)
CONNECT_TIMEOUT_S = 10


class StorageError(OptmatchError):
    """The storage cannot be opened or read."""


def journal_path(folder: Path) -> Path:
    return Path(folder) / JOURNAL_NAME


def is_url(storage: str) -> bool:
    """True for a database URL, False for a journal file path."""
    return "://" in storage


# ---------------------------------------------------------------- process identity


def _birth(pid: int) -> int | None:
    """Start time of process ``pid`` (clock ticks since boot; Linux), None when unknown or gone."""
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    fields = stat[stat.rfind(")") + 2:].split()
    if fields and fields[0] == "Z":  # a zombie has finished: it runs nothing
        return -1
    return int(fields[19]) if len(fields) > 19 else None


def process_alive(pid: int, birth: int | None) -> bool:
    """Whether the process ``pid`` that started at ``birth`` still runs on this host."""
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        pass
    now = _birth(pid)
    if now == -1:
        return False
    return birth is None or now is None or now == birth  # a different start time: pid reused


HOST = socket.gethostname()


def owner_record() -> dict:
    """This process as a trial owner, with a heartbeat time (s since the epoch)."""
    return {"host": HOST, "pid": os.getpid(), "birth": _birth(os.getpid()), "beat": time.time()}


def trial_is_stale(trial: FrozenTrial, grace_s: float, now_s: float | None = None) -> bool:
    """A running trial whose owner is gone (same host) or silent for longer than ``grace_s``."""
    if trial.state != TrialState.RUNNING:
        return False
    now_s = time.time() if now_s is None else now_s
    owner = trial.system_attrs.get(OWNER_KEY)
    if owner is None:
        started = trial.datetime_start.timestamp() if trial.datetime_start else now_s
        return now_s - started > grace_s
    if owner.get("host") == HOST and not process_alive(int(owner["pid"]), owner.get("birth")):
        return True
    return now_s - float(owner.get("beat", 0.0)) > grace_s


# ---------------------------------------------------------------- retry


class RetryStaleTrial:
    """Queue a failed stale trial again with the same parameters (at most ``max_retry`` times).

    Like optuna's retry callback, but the new trial does not inherit the dead owner's record,
    so no other worker mistakes it for stale once it starts.
    """

    def __init__(self, max_retry: int = MAX_RETRY) -> None:
        self.max_retry = max_retry

    def __call__(self, study: optuna.Study, trial: FrozenTrial) -> None:
        history = list(trial.system_attrs.get("retry_history", [])) + [trial.number]
        if len(history) > self.max_retry:
            return
        system_attrs = {"failed_trial": trial.system_attrs.get("failed_trial", trial.number),
                        "retry_history": history}
        study.add_trial(optuna.create_trial(
            state=TrialState.WAITING, params=trial.params, distributions=trial.distributions,
            user_attrs=trial.user_attrs, system_attrs=system_attrs))


# ---------------------------------------------------------------- journal


class _RecordsOwner:
    """Writes the owner record no later than the trial starts running here, so that a worker
    killed at any instant leaves no running trial without an owner: a new trial is created with
    its owner in the same journal record, and a queued trial gets the record just before it is
    claimed (a record on a trial still waiting is harmless; whoever claims it writes their own)."""

    def create_new_trial(self, study_id: int, template_trial: FrozenTrial | None = None) -> int:
        if template_trial is None:
            now = datetime.datetime.now(tz=datetime.timezone.utc)
            template_trial = FrozenTrial(
                number=-1, state=TrialState.RUNNING, value=None, datetime_start=now, datetime_complete=None,
                params={}, distributions={}, user_attrs={}, system_attrs={OWNER_KEY: owner_record()},
                intermediate_values={}, trial_id=-1)
        elif template_trial.state == TrialState.RUNNING and OWNER_KEY not in template_trial.system_attrs:
            template_trial = copy.copy(template_trial)
            template_trial.system_attrs = {**template_trial.system_attrs, OWNER_KEY: owner_record()}
        return super().create_new_trial(study_id, template_trial)  # type: ignore[misc]

    def set_trial_state_values(self, trial_id: int, state: TrialState, values: Any = None) -> bool:
        if state == TrialState.RUNNING:
            self.record_owner(trial_id)
        taken = super().set_trial_state_values(trial_id, state, values)  # type: ignore[misc]
        if taken and state == TrialState.RUNNING:
            self.record_owner(trial_id)  # again: another claimant may have written in between
        return taken

    def record_owner(self, trial_id: int) -> None:
        try:
            self.set_trial_system_attr(trial_id, OWNER_KEY, owner_record())  # type: ignore[attr-defined]
        except optuna.exceptions.UpdateFinishedTrialError:
            pass  # the trial ended between two beats


class WatchedJournalStorage(_RecordsOwner, JournalStorage, BaseHeartbeat):
    """optuna's journal storage with a heartbeat and dead-owner detection (see module notes)."""

    def __init__(self, backend: JournalFileBackend, heartbeat_s: int = HEARTBEAT_S,
                 grace_s: float = GRACE_S,
                 stale_callback: Callable[[optuna.Study, FrozenTrial], None] | None = None) -> None:
        super().__init__(backend)
        self.heartbeat_s = heartbeat_s
        self.grace_s = grace_s
        self.stale_callback = stale_callback if stale_callback is not None else RetryStaleTrial()

    def record_heartbeat(self, trial_id: int) -> None:
        self.record_owner(trial_id)

    def _get_stale_trial_ids(self, study_id: int) -> list[int]:
        now = time.time()
        running = self.get_all_trials(study_id, deepcopy=False, states=(TrialState.RUNNING,))
        return [t._trial_id for t in running if trial_is_stale(t, self.grace_s, now)]

    def get_heartbeat_interval(self) -> int | None:
        return self.heartbeat_s

    def get_heartbeat_stale_trial_callback(self) -> Callable[[optuna.Study, FrozenTrial], None] | None:
        return self.stale_callback


def _journal_lines(path: Path) -> tuple[int, int | None]:
    """(bytes of whole lines, 1-based number of the first unreadable whole line or None)."""
    good = 0
    with open(path, "rb") as fh:
        for number, line in enumerate(fh, start=1):
            if not line.endswith(b"\n"):
                return good, None  # torn tail
            try:
                record = json.loads(line)
            except ValueError:
                return good, number
            if not isinstance(record, dict) or "op_code" not in record:
                return good, number
            good += len(line)
    return good, None


def repair_torn_tail(path: Path, lock: JournalFileOpenLock) -> int:
    """Move a torn last line of the journal to ``<journal>.torn``; returns the bytes moved.

    Raises :class:`StorageError` naming the line when a whole line is unreadable (file untouched).
    """
    if not path.exists():
        return 0
    with lock_held(lock):
        size = path.stat().st_size
        good, bad_line = _journal_lines(path)
        if bad_line is not None:
            raise StorageError(
                f"{path}: line {bad_line} is damaged (not a journal record); the file is left as it is. "
                f"Move it aside to start this study afresh, or restore it from a copy")
        if good == size:
            return 0
        with open(path, "rb") as fh:
            fh.seek(good)
            tail = fh.read()
        with open(str(path) + TORN_SUFFIX, "ab") as side:
            side.write(tail + b"\n")
            side.flush()
            os.fsync(side.fileno())
        with open(path, "r+b") as fh:
            fh.truncate(good)
            fh.flush()
            os.fsync(fh.fileno())
        return len(tail)


class lock_held:  # noqa: N801 - used as a context manager
    """Hold an optuna journal file lock for a ``with`` block."""

    def __init__(self, lock: JournalFileOpenLock) -> None:
        self.lock = lock

    def __enter__(self) -> None:
        if not self.lock.acquire():
            raise StorageError(f"{self.lock._lock_file}: cannot take the journal lock")

    def __exit__(self, *exc: Any) -> None:
        self.lock.release()


def open_journal(path: Path) -> WatchedJournalStorage:
    """The journal storage in file ``path`` (created if absent), checked and repaired first."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    lock = JournalFileOpenLock(str(path))  # lock file: <journal>.lock
    repair_torn_tail(path, lock)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
            backend = JournalFileBackend(str(path), lock_obj=lock)
            return WatchedJournalStorage(backend)
    except Exception as exc:  # optuna raises several kinds for a journal it cannot replay
        raise StorageError(f"{path}: journal cannot be read ({exc.__class__.__name__}: {exc})") from None


# ---------------------------------------------------------------- databases


def _first_line(exc: Exception) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else exc.__class__.__name__


class WatchedDatabaseStorage(_RecordsOwner, RDBStorage):
    """optuna's database storage; its heartbeat also records the owner, so a dead owner on this
    host is seen at once instead of after the grace period."""

    def record_heartbeat(self, trial_id: int) -> None:
        super().record_heartbeat(trial_id)
        self.record_owner(trial_id)

    def _get_stale_trial_ids(self, study_id: int) -> list[int]:
        stale = set(super()._get_stale_trial_ids(study_id))
        running = self.get_all_trials(study_id, deepcopy=False, states=(TrialState.RUNNING,))
        grace = self.grace_period or 2 * (self.heartbeat_interval or HEARTBEAT_S)
        stale.update(t._trial_id for t in running if OWNER_KEY in t.system_attrs and trial_is_stale(t, grace))
        return sorted(stale)


def _shown(url: str) -> str:
    """The URL without its password, for messages."""
    try:
        from sqlalchemy.engine import make_url

        return make_url(url).render_as_string(hide_password=True)
    except Exception:
        return "(unparsable database URL)"


def _with_driver(url: str) -> str:
    """``postgresql://`` with the driver that is installed (SQLAlchemy 2.1 assumes psycopg 3)."""
    if not url.startswith("postgresql://"):
        return url
    import importlib.util

    if importlib.util.find_spec("psycopg") is None and importlib.util.find_spec("psycopg2") is not None:
        return "postgresql+psycopg2://" + url[len("postgresql://"):]
    return url


def open_database(url: str) -> RDBStorage:
    """optuna's database storage with its heartbeat and retry of stale trials."""
    engine_kwargs: dict[str, Any] = {"pool_pre_ping": True}
    if url.startswith("postgresql"):
        engine_kwargs["connect_args"] = {"connect_timeout": CONNECT_TIMEOUT_S}
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
            return WatchedDatabaseStorage(_with_driver(url), heartbeat_interval=HEARTBEAT_S, grace_period=GRACE_S,
                                          heartbeat_stale_trial_callback=RetryStaleTrial(),
                                          engine_kwargs=engine_kwargs)
    except Exception as exc:
        raise StorageError(f"storage {_shown(url)} cannot be opened: {_first_line(exc)}") from None


def open_storage(url: str | None, folder: Path) -> BaseStorage:
    """The storage for a study whose results go to ``folder``: its journal, or ``url``.

    ``url`` may be a database URL or the path of a journal file shared by several studies.
    """
    if url is None:
        return open_journal(journal_path(folder))
    if is_url(url):
        return open_database(url)
    return open_journal(Path(url))


def fail_stale(ost: optuna.Study) -> int:
    """Fail (and queue again) the stale running trials of ``ost`` now; returns how many were stale."""
    storage = ost._storage
    if not isinstance(storage, BaseHeartbeat):
        return 0
    before = {t.number for t in ost.get_trials(deepcopy=False, states=(TrialState.RUNNING,))}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
        optuna.storages.fail_stale_trials(ost)
    after = {t.number for t in ost.get_trials(deepcopy=False, states=(TrialState.RUNNING,))}
    return len(before - after)


def trial_owner(trial: FrozenTrial) -> dict | None:
    """The owner record of a trial (host, pid, process start, last beat), if any."""
    return trial.system_attrs.get(OWNER_KEY)


def live_running(ost: optuna.Study) -> list[FrozenTrial]:
    """Running trials of ``ost`` whose owners are still alive."""
    storage = ost._storage
    grace = getattr(storage, "grace_s", None) or getattr(storage, "grace_period", None) or GRACE_S
    return [t for t in ost.get_trials(deepcopy=False, states=(TrialState.RUNNING,))
            if not trial_is_stale(t, grace)]


__all__ = ["JOURNAL_NAME", "StorageError", "WatchedJournalStorage", "RetryStaleTrial", "WatchedDatabaseStorage",
           "fail_stale", "is_url", "journal_path", "live_running", "open_database", "open_journal",
           "open_storage", "process_alive", "repair_torn_tail", "trial_is_stale", "trial_owner"]
