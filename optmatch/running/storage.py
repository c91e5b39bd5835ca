"""Where trials live: optuna's own storages, never a home-made one.

Default: a journal file per study under ``results/<study>/search.journal`` (several processes on
one machine may share it; see :mod:`optmatch.running.journal`).  A URL (``postgresql://…``,
``sqlite:///…``) selects a database shared by workers on several machines; its password never
reaches a file or a command line (:mod:`optmatch.running.storage_url`).  Anything else given as
``--storage`` is a journal file path.

Dead workers.  Both storages carry a heartbeat: optuna's own for databases, ours for the journal.
A running trial whose owner is gone is failed and queued again before the next trial starts
(:mod:`optmatch.running.storage_base`).  optuna's private names used for this live in
:mod:`optmatch.running.optuna_adapter` only.
"""

from __future__ import annotations

import importlib.util
import warnings
from pathlib import Path
from typing import Any

import optuna
from optuna.storages import BaseStorage, RDBStorage
from optuna.trial import FrozenTrial, TrialState

from optmatch.running import optuna_adapter as adapter
from optmatch.running.journal import JOURNAL_NAME, WatchedJournalStorage, journal_path, open_journal
from optmatch.running.storage_base import (
    GRACE_S,
    HEARTBEAT_S,
    OWNER_KEY,
    RecordsOwner,
    RetryStaleTrial,
    StorageError,
    process_alive,
    trial_is_stale,
)
from optmatch.running.storage_url import check_url, is_url, quoting_hint, scrub, shown

CONNECT_TIMEOUT_S = 10


# ---------------------------------------------------------------- databases


def _first_line(exc: Exception) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else exc.__class__.__name__


class WatchedDatabaseStorage(RecordsOwner, adapter.DatabaseStaleHook, RDBStorage):
    """optuna's database storage; its heartbeat also records the owner, so a dead owner on this
    host is seen at once instead of after the grace period."""

    def record_heartbeat(self, trial_id: int) -> None:
        try:
            super().record_heartbeat(trial_id)
            if self.owner_beat_due(trial_id):
                self.record_owner(trial_id)
        except Exception:
            pass  # a beat runs on optuna's thread: the trial's own next write reports the failure

    def stale_trial_ids(self, study_id: int) -> list[int]:
        stale = set(adapter.rdb_stale_trial_ids(self, study_id))
        running = self.get_all_trials(study_id, deepcopy=False, states=(TrialState.RUNNING,))
        interval, grace = adapter.rdb_heartbeat(self)
        grace = grace or 2 * (interval or HEARTBEAT_S)
        stale.update(adapter.trial_id(t) for t in running
                     if OWNER_KEY in t.system_attrs and trial_is_stale(t, grace))
        return sorted(stale)


def _with_driver(url: str) -> str:
    """``postgresql://`` with the driver that is installed (SQLAlchemy 2.1 assumes psycopg 3)."""
    if not url.startswith("postgresql://"):
        return url
    if importlib.util.find_spec("psycopg") is None and importlib.util.find_spec("psycopg2") is not None:
        return "postgresql+psycopg2://" + url[len("postgresql://"):]
    return url


def open_database(url: str) -> RDBStorage:
    """optuna's database storage with its heartbeat and retry of stale trials.

    Every message names the URL without its password."""
    check_url(url)
    engine_kwargs: dict[str, Any] = {"pool_pre_ping": True, "hide_parameters": True}
    if url.startswith("postgresql"):
        engine_kwargs["connect_args"] = {"connect_timeout": CONNECT_TIMEOUT_S}
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
            return WatchedDatabaseStorage(_with_driver(url), heartbeat_interval=HEARTBEAT_S, grace_period=GRACE_S,
                                          engine_kwargs=engine_kwargs,
                                          **adapter.rdb_stale_callback_kwargs(RetryStaleTrial()))
    except Exception as exc:
        reason = scrub(_first_line(exc), url)
        raise StorageError(f"storage {shown(url)} cannot be opened: {reason}{quoting_hint(url)}") from None


def open_storage(url: str | None, folder: Path) -> BaseStorage:
    """The storage for a study whose results go to ``folder``: its journal, or ``url``.

    ``url`` may be a database URL or the path of a journal file shared by several studies.
    """
    if url is None:
        return open_journal(journal_path(folder))
    if is_url(url):
        return open_database(url)
    return open_journal(Path(url))


# ---------------------------------------------------------------- studies in a storage


def grace_of(storage: BaseStorage) -> float:
    """Seconds of silence after which a running trial of ``storage`` counts as abandoned."""
    if isinstance(storage, WatchedJournalStorage):
        return storage.grace_s
    if isinstance(storage, RDBStorage):
        interval, grace = adapter.rdb_heartbeat(storage)
        return float(grace or 2 * (interval or HEARTBEAT_S))
    return GRACE_S


def fail_stale(ost: optuna.Study) -> int:
    """Fail (and queue again) the stale running trials of ``ost`` now; returns how many were stale."""
    if not adapter.has_heartbeat(adapter.study_storage(ost)):
        return 0
    before = {t.number for t in ost.get_trials(deepcopy=False, states=(TrialState.RUNNING,))}
    adapter.fail_stale_trials(ost)
    after = {t.number for t in ost.get_trials(deepcopy=False, states=(TrialState.RUNNING,))}
    return len(before - after)


def live_running(ost: optuna.Study) -> list[FrozenTrial]:
    """Running trials of ``ost`` whose owners are still alive."""
    grace = grace_of(adapter.study_storage(ost))
    return [t for t in ost.get_trials(deepcopy=False, states=(TrialState.RUNNING,))
            if not trial_is_stale(t, grace)]


__all__ = ["JOURNAL_NAME", "OWNER_KEY", "StorageError", "WatchedDatabaseStorage", "WatchedJournalStorage",
           "RetryStaleTrial", "fail_stale", "grace_of", "is_url", "journal_path", "live_running",
           "open_database", "open_journal", "open_storage", "process_alive", "trial_is_stale"]
