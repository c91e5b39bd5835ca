"""Every use of optuna's private API, in one module.

optmatch adds a heartbeat to optuna's journal storage and records who owns a running trial in both
storages.  optuna offers no public hook for that, so a few private names are used here and nowhere
else.  :func:`private_api_problems` checks that each of them still exists with the expected shape;
``tests/test_optuna_adapter.py`` runs it, so a new optuna that changes them fails loudly, naming
the missing piece, instead of silently losing dead-worker detection.

The optuna range these names were tested with is :data:`TESTED_OPTUNA` (also pinned in
pyproject.toml).
"""

from __future__ import annotations

import inspect
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any

import optuna
from optuna.storages import BaseStorage, RDBStorage
from optuna.storages._heartbeat import BaseHeartbeat, is_heartbeat_enabled
from optuna.trial import FrozenTrial

TESTED_OPTUNA = ">=4.2,<5.1"

StaleCallback = Callable[[optuna.Study, FrozenTrial], None]


def study_storage(ost: optuna.Study) -> BaseStorage:
    """The storage object behind an optuna study."""
    return ost._storage


def study_id(ost: optuna.Study) -> int:
    """The storage's id of an optuna study."""
    return ost._study_id


def trial_id(trial: FrozenTrial | optuna.Trial) -> int:
    """The storage's id of a trial (not its number)."""
    return trial._trial_id


@contextmanager
def heartbeat(trial: optuna.Trial, storage: BaseStorage) -> Iterator[None]:
    """Beat for a running trial while the ``with`` block runs (nothing when the storage has no heartbeat).

    The beats come from a daemon thread started and stopped here rather than optuna's own heartbeat
    thread: that one is not a daemon, and a Ctrl-C that lands while it starts leaves it beating
    forever, so the interrupted process never exits.
    """
    if not is_heartbeat_enabled(storage):
        yield
        return
    assert isinstance(storage, BaseHeartbeat)
    interval = storage.get_heartbeat_interval()
    assert interval is not None
    stop = threading.Event()
    tid = trial_id(trial)

    def beat() -> None:
        while True:
            storage.record_heartbeat(tid)
            if stop.wait(interval):
                return

    thread = threading.Thread(target=beat, name=f"optmatch-heartbeat-{tid}", daemon=True)
    try:
        thread.start()
        yield
    finally:
        stop.set()
        thread.join()  # no beat after the trial's result (an interrupted join: the thread ends alone)


def has_heartbeat(storage: BaseStorage) -> bool:
    """Whether optuna's loop would fail stale trials of this storage."""
    return is_heartbeat_enabled(storage)


class HeartbeatHooks(BaseHeartbeat):
    """optuna's heartbeat interface over two plain methods a storage defines:
    ``stale_trial_ids(study_id)`` and ``record_heartbeat(trial_id)``; and attributes
    ``heartbeat_s`` (s between beats) and ``stale_callback`` (run on each trial failed as stale)."""

    heartbeat_s: int | None
    stale_callback: StaleCallback | None

    def stale_trial_ids(self, study_id: int) -> list[int]:
        raise NotImplementedError

    def _get_stale_trial_ids(self, study_id: int) -> list[int]:
        return self.stale_trial_ids(study_id)

    def get_heartbeat_interval(self) -> int | None:
        return self.heartbeat_s

    def get_heartbeat_stale_trial_callback(self) -> StaleCallback | None:
        return self.stale_callback

    def get_failed_trial_callback(self) -> StaleCallback | None:  # the name optuna used before 4.9
        return self.stale_callback


class DatabaseStaleHook:
    """For a subclass of optuna's ``RDBStorage``: optuna calls ``stale_trial_ids`` of the subclass,
    which may ask :func:`rdb_stale_trial_ids` for optuna's own answer."""

    def stale_trial_ids(self, study_id: int) -> list[int]:
        raise NotImplementedError

    def _get_stale_trial_ids(self, study_id: int) -> list[int]:
        return self.stale_trial_ids(study_id)


def rdb_stale_trial_ids(storage: RDBStorage, study_id: int) -> list[int]:
    """optuna's own stale trials of a database storage (heartbeat older than its grace period)."""
    return RDBStorage._get_stale_trial_ids(storage, study_id)


def rdb_heartbeat(storage: RDBStorage) -> tuple[int | None, int | None]:
    """(heartbeat interval, grace period) of a database storage, in seconds."""
    return storage.heartbeat_interval, storage.grace_period


def rdb_stale_callback_kwargs(callback: StaleCallback) -> dict[str, Any]:
    """The keyword that hands ``RDBStorage`` its stale-trial callback (renamed in optuna 4.9, so its
    name is known only at run time, and the type checker sees a plain keyword mapping)."""
    params = inspect.signature(RDBStorage.__init__).parameters
    key = "heartbeat_stale_trial_callback" if "heartbeat_stale_trial_callback" in params else "failed_trial_callback"
    return {key: callback}


def fail_stale_trials(ost: optuna.Study) -> None:
    """optuna's own pass that fails stale trials and runs the stale-trial callback."""
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
        optuna.storages.fail_stale_trials(ost)


# ---------------------------------------------------------------- the check


def _params(fn: Any) -> list[str]:
    return list(inspect.signature(fn).parameters)


def private_api_problems() -> list[str]:
    """What this module relies on and the installed optuna no longer provides (empty when all is well)."""
    problems: list[str] = []
    version = optuna.__version__

    def need(ok: bool, what: str) -> None:
        if not ok:
            problems.append(f"optuna {version} (tested {TESTED_OPTUNA}): {what}")

    abstract = set(getattr(BaseHeartbeat, "__abstractmethods__", ()))
    mine = {"record_heartbeat", "_get_stale_trial_ids", "get_heartbeat_interval",
            "get_heartbeat_stale_trial_callback", "get_failed_trial_callback"}
    need(abstract <= mine, f"BaseHeartbeat has abstract methods the adapter does not define: "
                           f"{sorted(abstract - mine)}")
    need("_get_stale_trial_ids" in abstract, "BaseHeartbeat._get_stale_trial_ids is no longer the stale-trial hook")
    need(_params(BaseHeartbeat._get_stale_trial_ids) == ["self", "study_id"],
         "BaseHeartbeat._get_stale_trial_ids(self, study_id) changed its signature")
    need(_params(BaseHeartbeat.record_heartbeat) == ["self", "trial_id"],
         "BaseHeartbeat.record_heartbeat(self, trial_id) changed its signature")
    need(_params(BaseHeartbeat.get_heartbeat_interval) == ["self"],
         "BaseHeartbeat.get_heartbeat_interval(self) changed its signature")
    need(_params(is_heartbeat_enabled) == ["storage"],
         "optuna.storages._heartbeat.is_heartbeat_enabled(storage) changed its signature")
    need(callable(getattr(RDBStorage, "_get_stale_trial_ids", None))
         and _params(RDBStorage._get_stale_trial_ids) == ["self", "study_id"],
         "RDBStorage._get_stale_trial_ids(self, study_id) is gone or changed")
    try:
        source = inspect.getsource(optuna.storages.fail_stale_trials)
    except (OSError, TypeError, AttributeError):
        source = ""
    need("_get_stale_trial_ids" in source, "optuna.storages.fail_stale_trials no longer asks _get_stale_trial_ids")
    init = inspect.signature(RDBStorage.__init__).parameters
    need({"heartbeat_interval", "grace_period", "heartbeat_stale_trial_callback"} <= set(init)
         or {"heartbeat_interval", "grace_period", "failed_trial_callback"} <= set(init),
         "RDBStorage no longer takes heartbeat_interval, grace_period and a stale-trial callback")

    ost = optuna.create_study(storage=optuna.storages.InMemoryStorage())
    need(isinstance(getattr(ost, "_storage", None), BaseStorage), "Study._storage is gone")
    need(isinstance(getattr(ost, "_study_id", None), int), "Study._study_id is gone")
    trial = ost.ask()
    need(isinstance(getattr(trial, "_trial_id", None), int), "Trial._trial_id is gone")
    ost.tell(trial, 0.0)
    frozen = ost.get_trials(deepcopy=False)[0]
    need(isinstance(getattr(frozen, "_trial_id", None), int), "FrozenTrial._trial_id is gone")
    return problems


__all__ = ["TESTED_OPTUNA", "DatabaseStaleHook", "HeartbeatHooks", "fail_stale_trials", "has_heartbeat",
           "heartbeat", "private_api_problems", "rdb_heartbeat", "rdb_stale_callback_kwargs", "rdb_stale_trial_ids",
           "study_id", "study_storage", "trial_id"]
