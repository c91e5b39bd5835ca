"""The trial loop: budget slots claimed through the storage, the time budget kept in the storage, progress.

The objective here is a plain function of our own choosing (the value is the trial's number), so the
checks are about counting: the rules are our own (running/trials.py), and each assertion says which.
"""

from __future__ import annotations

import time
from dataclasses import replace
from pathlib import Path

import optuna
import pytest
from test_storage import write_study

from optmatch.running.journal import open_journal
from optmatch.running.search import open_study, run_search
from optmatch.running.trials import SURPLUS_KEY, TIME_KEY, Limits, StudyClock, run_trials
from optmatch.studyfile.loader import load_study

COMPLETE, RUNNING, PRUNED = optuna.trial.TrialState.COMPLETE, optuna.trial.TrialState.RUNNING, \
    optuna.trial.TrialState.PRUNED


def number(trial: optuna.Trial) -> float:
    trial.suggest_float("x", 0.0, 1.0)
    return float(trial.number)


def test_a_trial_beyond_the_budget_is_pruned_and_not_counted() -> None:
    ost = optuna.create_study(direction="maximize")
    held = [ost.ask() for _ in range(3)]  # three trials another worker is running
    ran = run_trials(ost, number, Limits(trials=3), owner=False)
    # A helper leaves at once: every slot is held by a running trial (no new trial is even created).
    assert ran is False and len(ost.get_trials()) == 3
    # The same when the helper's new trial races past the check: it is created, found surplus, pruned.
    from optmatch.running.trials import _run_one

    _run_one(ost, number, budget=3)
    surplus = ost.get_trials()[-1]
    assert surplus.state == PRUNED and surplus.system_attrs[SURPLUS_KEY] is True and not surplus.params
    for t in held:
        ost.tell(t, 1.0)
    assert len(ost.get_trials(states=(COMPLETE,))) == 3  # exactly the budget


def test_a_slot_freed_by_a_failed_trial_is_filled_again() -> None:
    ost = optuna.create_study(direction="maximize")
    lost = ost.ask()
    ost.tell(lost, state=optuna.trial.TrialState.FAIL)  # a trial of a dead worker, failed as stale
    run_trials(ost, number, Limits(trials=4))
    assert len(ost.get_trials(states=(COMPLETE,))) == 4


def test_progress_counts_complete_trials_and_never_passes_the_budget(tmp_path: Path) -> None:
    study = load_study(write_study(tmp_path, "progress", trials=4))
    journal = tmp_path / "progress.journal"
    seen: list[tuple[int, int]] = []
    run_search(study, open_journal(journal), progress=lambda d, t, b: seen.append((d, t)))
    assert seen[0] == (0, 4) and seen[-1] == (4, 4)
    assert [d for d, _ in seen] == sorted(d for d, _ in seen)  # complete trials only go up
    # The budget lowered after the fact (4 complete, budget 2): shown as 2/2, nothing more runs.
    fewer = replace(study, search=replace(study.search, trials=2))
    seen.clear()
    outcome = run_search(fewer, open_journal(journal), progress=lambda d, t, b: seen.append((d, t)))
    assert seen and all(d <= t == 2 for d, t in seen)
    assert outcome.trials_complete == 4


def test_a_resumed_study_gets_only_the_time_left(tmp_path: Path) -> None:
    study = load_study(write_study(tmp_path, "timed", trials=20))
    timed = replace(study, search=replace(study.search, time_s=600.0))
    journal = tmp_path / "timed.journal"
    before = time.time()
    first = run_search(replace(timed, search=replace(timed.search, trials=2)), open_journal(journal))
    assert first.trials_complete == 2
    ost = open_study(study, open_journal(journal))
    record = ost.user_attrs[TIME_KEY]
    # The time recorded is this process's time on the study: positive, and no more than the wall time
    # since just before the run began (identity of clocks, no source; the study's clock starts with the
    # run, before its first trial's own start time).
    assert 0.0 < record["spent_s"] <= time.time() - before
    # All 600 s already spent in earlier runs: the rerun starts nothing new.
    ost.set_user_attr(TIME_KEY, {"spent_s": 600.0, "at": time.time()})
    again = run_search(timed, open_journal(journal))
    assert again.trials_complete == 2


def test_the_clock_counts_overlapping_workers_once(monkeypatch: pytest.MonkeyPatch) -> None:
    ost = optuna.create_study()
    a, b = StudyClock(ost), StudyClock(ost)
    a.mark = b.mark = 1000.0
    ost.set_user_attr(TIME_KEY, {"spent_s": 0.0, "at": 1000.0})
    monkeypatch.setattr(time, "time", lambda: 1010.0)  # a adds at t = 1010 s: 10 s spent
    assert a.add() == pytest.approx(10.0)
    monkeypatch.setattr(time, "time", lambda: 1012.0)  # b, at work since 1000 s too, adds at 1012 s: 2 s new
    assert b.add() == pytest.approx(12.0)
    monkeypatch.setattr(time, "time", lambda: 1030.0)  # b alone again, 18 s later
    assert b.add() == pytest.approx(30.0)  # the wall time from 1000 s to 1030 s, counted once


@pytest.mark.filterwarnings("ignore:Heartbeat of storage")
def test_helpers_and_owner_share_a_journal_without_passing_the_budget(tmp_path: Path) -> None:
    study = load_study(write_study(tmp_path, "shared", trials=5))
    journal = tmp_path / "shared.journal"
    storage = open_journal(journal)
    ost = open_study(study, storage)
    others = [ost.ask() for _ in range(2)]  # two trials of another worker, still running
    outcome = run_search(study, open_journal(journal), owner=False)
    assert outcome.trials_complete == 3  # the helper left the two held slots to their owner
    for t in others:
        ost.tell(t, -1.0)
    trials = open_study(study, open_journal(journal)).get_trials(deepcopy=False)
    assert sum(t.state == COMPLETE for t in trials) == 5
    assert not [t for t in trials if t.state == RUNNING]
