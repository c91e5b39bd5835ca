"""The trial loop: run trials of one optuna study until its trial budget, time budget or target margin
is reached, however many processes share the study.

**Trial budget.**  A trial runs only if fewer than ``budget`` trials numbered below it are waiting,
running or complete; otherwise it is a *surplus* trial, told PRUNED at once (system attribute
``optmatch:surplus``) and never counted.  Both storages number trials in the order they are created
(the journal by its record order, the database under a row lock), and every trial numbered below
a new one is visible once the new one exists.  So for the highest-numbered trial that completes,
every other trial that completes was counted when it was checked: no more than ``budget`` trials
ever complete.  A trial that fails later frees its slot, and the loop goes on until ``budget``
trials are complete.

**Time budget.**  The time spent on a study is kept in the storage (study user attribute
``optmatch:time``: seconds spent and when last added to).  Each process adds the time since the
later of its own last addition and anyone's, so overlapping workers count the wall time once,
and a resumed study gets only the time left.

**Owners and helpers.**  The process that writes the study's results (``run``, or the batch worker
that took the study) waits for trials still running elsewhere before it returns, so they land in
the results; a helper (``worker``) leaves as soon as every remaining slot is taken.
"""

from __future__ import annotations

import time
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import optuna
from optuna.trial import FrozenTrial, TrialState

from optmatch.running import optuna_adapter as adapter
from optmatch.running.storage import fail_stale, grace_of
from optmatch.running.storage_base import trial_is_stale

TIME_KEY = "optmatch:time"        # {"spent_s": s, "at": s since the epoch}
SURPLUS_KEY = "optmatch:surplus"
POLL_S = 0.2                      # an owner waiting for trials running elsewhere looks again after this
HOLDING = (TrialState.WAITING, TrialState.RUNNING, TrialState.COMPLETE)

ProgressFn = Callable[[int, int, float | None], None]
Objective = Callable[[optuna.Trial], float | Sequence[float]]


@dataclass(frozen=True)
class Limits:
    """When a study is done: ``trials`` complete, ``time_s`` spent (s, None = no limit), or a complete
    trial's first value at least ``target`` (dB, None = no target)."""

    trials: int
    time_s: float | None = None
    target: float | None = None


class StudyClock:
    """Time spent on one study, shared through the storage (see the module notes)."""

    def __init__(self, ost: optuna.Study) -> None:
        self.ost = ost
        self.mark = time.time()
        # a study begun before the clock existed counts its complete trials' durations
        done = ost.get_trials(deepcopy=False, states=(TrialState.COMPLETE,))
        self.earlier_s = sum((t.duration.total_seconds() for t in done if t.duration is not None), 0.0)

    def _record(self) -> tuple[float, float]:
        rec = self.ost.user_attrs.get(TIME_KEY)
        if isinstance(rec, dict):
            try:
                return float(rec["spent_s"]), float(rec["at"])
            except (KeyError, TypeError, ValueError):
                pass
        return self.earlier_s, 0.0

    def spent_s(self) -> float:
        """Seconds spent on the study so far, this process's time since its last addition included."""
        spent, at = self._record()
        return spent + max(0.0, time.time() - max(at, self.mark))

    def add(self) -> float:
        """Add this process's time since its last addition to the storage; returns the total (s)."""
        spent, at = self._record()
        now = time.time()
        spent += max(0.0, now - max(at, self.mark))
        self.ost.set_user_attr(TIME_KEY, {"spent_s": spent, "at": now})
        self.mark = now
        return spent


def tally(ost: optuna.Study) -> tuple[int, float | None]:
    """Complete trials in the storage (every worker's) and the best first value among them."""
    done = ost.get_trials(deepcopy=False, states=(TrialState.COMPLETE,))
    return len(done), max((t.values[0] for t in done), default=None)


def _is_surplus(trials: list[FrozenTrial], number: int, budget: int) -> bool:
    """Whether trial ``number`` would exceed the budget (see the module notes)."""
    below = sum(1 for t in trials if t.number < number and t.state in HOLDING)
    return below >= budget


def _slots_taken(ost: optuna.Study, budget: int) -> bool:
    """Every slot is complete or held by a live running trial: starting one more would be surplus."""
    grace = grace_of(adapter.study_storage(ost))
    now = time.time()
    taken = 0
    for t in ost.get_trials(deepcopy=False, states=(TrialState.COMPLETE, TrialState.RUNNING)):
        if t.state == TrialState.COMPLETE or not trial_is_stale(t, grace, now):
            taken += 1
    return taken >= budget


def _run_one(ost: optuna.Study, objective: Objective, budget: int) -> None:
    """Ask for a trial, check its slot, run the objective with optuna's heartbeat, tell the result."""
    with warnings.catch_warnings():  # optuna warns that its heartbeat is meant for optimize(); we run it here
        warnings.filterwarnings("ignore", message="Heartbeat of storage", category=UserWarning)
        trial = ost.ask()
    if _is_surplus(ost.get_trials(deepcopy=False), trial.number, budget):
        adapter.study_storage(ost).set_trial_system_attr(adapter.trial_id(trial), SURPLUS_KEY, True)
        ost.tell(trial, state=TrialState.PRUNED)
        return
    try:
        with adapter.heartbeat(trial, adapter.study_storage(ost)):
            value = objective(trial)
    except optuna.TrialPruned:
        ost.tell(trial, state=TrialState.PRUNED)
        return
    except BaseException:
        try:
            ost.tell(trial, state=TrialState.FAIL)
        except Exception:
            pass  # the original error says more; a trial left running is failed as stale later
        raise
    ost.tell(trial, value)


def run_trials(ost: optuna.Study, objective: Objective, limits: Limits, progress: ProgressFn | None = None,
               owner: bool = True) -> bool:
    """Run trials of ``ost`` until ``limits`` are met; returns True when stopped by the target.

    ``owner``: this process writes the results, so it waits for trials running elsewhere to land.
    """
    clock = StudyClock(ost)
    stopped_early = False
    shown = None
    try:
        while True:
            done, best = tally(ost)
            if progress is not None and (done, best) != shown:
                progress(min(done, limits.trials), limits.trials, best)
                shown = (done, best)
            if limits.target is not None and best is not None and best >= limits.target:
                stopped_early = True
                break
            if done >= limits.trials:
                break
            if limits.time_s is not None and clock.spent_s() >= limits.time_s:
                break
            fail_stale(ost)
            if _slots_taken(ost, limits.trials):
                if not owner:
                    break
                time.sleep(POLL_S)  # trials of other workers take the last slots: wait for them to land
                continue
            _run_one(ost, objective, limits.trials)
            clock.add()
    finally:
        try:
            clock.add()
        except Exception:
            pass  # leaving on an error: the error itself is reported
    if owner:
        _wait_for_others(ost)
        if progress is not None:
            done, best = tally(ost)
            progress(min(done, limits.trials), limits.trials, best)
    return stopped_early


def _wait_for_others(ost: optuna.Study) -> None:
    """Wait until no live process runs a trial of ``ost`` (they stop at the budget, time or target)."""
    grace = grace_of(adapter.study_storage(ost))
    while any(not trial_is_stale(t, grace) for t in ost.get_trials(deepcopy=False, states=(TrialState.RUNNING,))):
        time.sleep(POLL_S)


__all__ = ["Limits", "StudyClock", "run_trials", "tally"]
