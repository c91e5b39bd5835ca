"""What the journal and the database storage share: who owns a running trial, when a trial is stale,
how a stale trial is run again, and the storage's error type.

Every running trial carries an owner record in its system attributes (host, pid, process start
time, last beat).  A running trial whose owner process is gone (same host) or silent for longer than
the grace period (any host) is stale: optuna's loop fails it, and :class:`RetryStaleTrial` queues
the same picks again.  Completed trials are never touched.
"""

from __future__ import annotations

import copy
import datetime
import os
import socket
import sys
import time
from pathlib import Path
from typing import TYPE_CHECKING, Any

import optuna
from optuna.trial import FrozenTrial, TrialState

from optmatch.errors import OptmatchError

HEARTBEAT_S = 20
GRACE_S = 60
MAX_RETRY = 3
OWNER_KEY = "optmatch:owner"          # {"host", "pid", "birth", "beat"}: who runs the trial, last beat (s)
HOST = socket.gethostname()


class StorageError(OptmatchError):
    """The storage cannot be opened, read or written."""


def notice(message: str) -> None:
    """One line on stderr about something the storage did on its own (a lock broken, a tail set aside)."""
    print(f"optmatch: note: {' '.join(message.split())}", file=sys.stderr, flush=True)


# ---------------------------------------------------------------- process identity


def process_birth(pid: int) -> int | None:
    """Start time of process ``pid`` (clock ticks since boot; Linux), -1 for a zombie, None when
    unknown or gone."""
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
    now = process_birth(pid)
    if now == -1:
        return False
    return birth is None or now is None or now == birth  # a different start time: pid reused


def owner_record() -> dict:
    """This process as a trial owner, with a heartbeat time (s since the epoch)."""
    return {"host": HOST, "pid": os.getpid(), "birth": process_birth(os.getpid()), "beat": time.time()}


def owner_gone(owner: dict | None) -> bool:
    """The owner record names a process on this host that has ended."""
    if not isinstance(owner, dict) or owner.get("host") != HOST:
        return False
    try:
        pid = int(owner["pid"])
    except (KeyError, TypeError, ValueError):
        return False
    return not process_alive(pid, owner.get("birth"))


def trial_is_stale(trial: FrozenTrial, grace_s: float, now_s: float | None = None) -> bool:
    """A running trial whose owner is gone (same host) or silent for longer than ``grace_s``."""
    if trial.state != TrialState.RUNNING:
        return False
    now_s = time.time() if now_s is None else now_s
    owner = trial.system_attrs.get(OWNER_KEY)
    if owner is None:
        started = trial.datetime_start.timestamp() if trial.datetime_start else now_s
        return now_s - started > grace_s
    if owner_gone(owner):
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


# ---------------------------------------------------------------- owner records


if TYPE_CHECKING:  # what the mixin is mixed into, for the type checker
    from optuna.storages import BaseStorage as _Storage
else:
    _Storage = object


class RecordsOwner(_Storage):
    """Writes the owner record no later than the trial starts running here, so that a worker
    killed at any instant leaves no running trial without an owner: a new trial is created with
    its owner in the same record, and a queued trial gets the record just before it is claimed
    (a record on a trial still waiting is harmless; whoever claims it writes their own).

    A heartbeat within half an interval of the last owner record is skipped: it would say nothing new.
    """

    heartbeat_s: int | None = HEARTBEAT_S

    def _beats(self) -> dict[int, float]:
        beats = self.__dict__.get("_owner_beats")
        if beats is None:
            beats = self.__dict__["_owner_beats"] = {}
        return beats

    def create_new_trial(self, study_id: int, template_trial: FrozenTrial | None = None) -> int:
        owned = False
        if template_trial is None:
            now = datetime.datetime.now()  # local and naive, as optuna's own (the 5.x journal converts it to UTC)
            template_trial = FrozenTrial(
                number=-1, state=TrialState.RUNNING, value=None, datetime_start=now, datetime_complete=None,
                params={}, distributions={}, user_attrs={}, system_attrs={OWNER_KEY: owner_record()},
                intermediate_values={}, trial_id=-1)
            owned = True
        elif template_trial.state == TrialState.RUNNING and OWNER_KEY not in template_trial.system_attrs:
            template_trial = copy.copy(template_trial)
            template_trial.system_attrs = {**template_trial.system_attrs, OWNER_KEY: owner_record()}
            owned = True
        trial_id = super().create_new_trial(  # type: ignore[safe-super]  # the storage mixed in after implements it
            study_id, template_trial)
        if owned:
            self._beats()[trial_id] = time.monotonic()
        return trial_id

    def set_trial_state_values(self, trial_id: int, state: TrialState, values: Any = None) -> bool:
        if state == TrialState.RUNNING:
            self.record_owner(trial_id)
        taken = super().set_trial_state_values(  # type: ignore[safe-super]  # the storage mixed in after implements it
            trial_id, state, values)
        if taken and state == TrialState.RUNNING:
            self.record_owner(trial_id)  # again: another claimant may have written in between
        if state.is_finished():
            self._beats().pop(trial_id, None)
        return taken

    def record_owner(self, trial_id: int) -> None:
        try:
            self.set_trial_system_attr(trial_id, OWNER_KEY, owner_record())
        except optuna.exceptions.UpdateFinishedTrialError:
            return  # the trial ended between two beats
        self._beats()[trial_id] = time.monotonic()

    def owner_beat_due(self, trial_id: int) -> bool:
        """Whether a heartbeat for ``trial_id`` would add anything (none in the last half interval)."""
        last = self._beats().get(trial_id)
        interval = self.heartbeat_s or HEARTBEAT_S
        return last is None or time.monotonic() - last >= interval / 2


__all__ = ["GRACE_S", "HEARTBEAT_S", "HOST", "MAX_RETRY", "OWNER_KEY", "RecordsOwner", "RetryStaleTrial",
           "StorageError", "notice", "owner_gone", "owner_record", "process_alive", "process_birth",
           "trial_is_stale"]
