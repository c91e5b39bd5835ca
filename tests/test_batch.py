"""``optmatch batch``: broken files and damaged storage among good studies, helpers, SIGKILL and resume.

The good studies match the load of Pozar's Example 5.2 (ZL = 60 − j80 Ω on 50 Ω) with a single
shorted shunt stub; D. M. Pozar, Microwave Engineering, 4th ed., Example 5.2 (recalled from memory)
matches it exactly at the design frequency, so each such study must meet a 20 dB mask over ±0.5 %.
"""

from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import optuna
import pytest
from test_storage import complete_trials, write_study

from optmatch.running import helpers
from optmatch.running.batch import BatchError, BatchListener, StudyEntry, run_batch
from optmatch.running.claims import BATCH_CLAIM, claim_study, try_claim
from optmatch.running.cores import pool_threads, threads_per_worker
from optmatch.running.search import open_study
from optmatch.running.storage import OWNER_KEY, journal_path, open_journal
from optmatch.running.worker import Events, StudyWorker
from optmatch.studyfile.loader import load_study

COMPLETE = optuna.trial.TrialState.COMPLETE
KILL_DEADLINE_S = 240.0


def batch(folder: Path, out: Path, *extra: str, timeout: float = 300) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "optmatch", "batch", str(folder), "--out", str(out), *extra],
                          capture_output=True, text=True, timeout=timeout)


def test_broken_file_and_damaged_journal_among_good_studies(tmp_path: Path) -> None:
    folder, out = tmp_path / "studies", tmp_path / "out"
    folder.mkdir()
    good = load_study(write_study(folder, "good", trials=4))
    write_study(folder, "hurt", trials=4)
    (folder / "broken.yaml").write_text("name: broken\nload: {impedance: 50}\nmask: [1, 2\n", encoding="utf-8")
    damaged = b"this is not a journal record\n"
    journal_path(out / "hurt").parent.mkdir(parents=True)
    journal_path(out / "hurt").write_bytes(damaged)

    run = batch(folder, out, "--workers", "2")

    assert run.returncode == 2
    errors = [line for line in run.stderr.splitlines() if line.startswith("optmatch: error:")]
    assert len(errors) == 2, run.stderr  # one line per bad study, no traceback
    assert any("broken.yaml" in e and "YAML" in e for e in errors)
    assert any("search.journal" in e and "line 1" in e for e in errors)
    assert "Traceback" not in run.stderr
    assert journal_path(out / "hurt").read_bytes() == damaged  # left exactly as it was

    summary = json.loads((out / "good" / "summary.json").read_text())
    done = open_study(good, open_journal(journal_path(out / "good"))).get_trials(states=(COMPLETE,))
    assert summary["search"]["trials_complete"] == len(done)
    assert len(done) == good.search.trials  # slots are claimed through the storage: never over budget
    assert len({t.number for t in done}) == len(done)
    # Pozar 4th ed. Example 5.2 (recalled from memory): an exact single-stub match exists.
    assert summary["verdict"] == "PASS" and summary["best_margin_db"] > 0.0
    state = json.loads((out / "batch.json").read_text())
    assert {s["name"]: s["status"] for s in state["studies"]} == {"broken": "error", "good": "done",
                                                                  "hurt": "error"}


def _complete_now(study, journal: Path) -> dict[int, list[float]]:
    if not journal.exists():
        return {}
    trials = open_study(study, open_journal(journal)).get_trials(deepcopy=False, states=(COMPLETE,))
    return {t.number: list(t.values) for t in trials}


def test_batch_killed_mid_study_resumes_without_losing_or_redoing_trials(tmp_path: Path) -> None:
    folder, out = tmp_path / "studies", tmp_path / "out"
    folder.mkdir()
    study = load_study(write_study(folder, "long", trials=60))  # long enough that the kill lands mid-study
    journal = journal_path(out / "long")
    proc = subprocess.Popen([sys.executable, "-m", "optmatch", "batch", str(folder), "--out", str(out)],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + KILL_DEADLINE_S
    try:
        while len(_complete_now(study, journal)) < 3 and proc.poll() is None and time.monotonic() < deadline:
            time.sleep(0.05)  # waiting for a state, not measuring anything
    finally:
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait()
    before = _complete_now(study, journal)
    assert 3 <= len(before) < study.search.trials, "the kill must land mid-study"
    assert not (out / "long" / "summary.json").exists()

    rerun = batch(folder, out)

    assert rerun.returncode == 0, rerun.stderr
    after = _complete_now(study, journal)
    assert {n: after[n] for n in before} == before  # every completed trial still there, unchanged
    # Nothing redone: the budget counts complete trials, so the total is exactly the budget.
    assert len(after) == study.search.trials
    trials = open_study(study, open_journal(journal)).get_trials(deepcopy=False)
    assert not [t for t in trials if t.state == optuna.trial.TrialState.RUNNING]
    for lost in (t for t in trials if t.state == optuna.trial.TrialState.FAIL):  # the trial the kill cut off
        assert any(t.system_attrs.get("failed_trial") == lost.number and t.state == COMPLETE for t in trials)
    summary = json.loads((out / "long" / "summary.json").read_text())
    assert summary["search"]["trials_complete"] == study.search.trials
    # Pozar 4th ed. Example 5.2 (recalled from memory): an exact single-stub match exists.
    assert summary["verdict"] == "PASS"


# ---------------------------------------------------------------- study-level workers


class Recorder(Events):
    """Keeps every event a worker sends, in order."""

    def __init__(self) -> None:
        self.seen: list[tuple[str, str]] = []

    def started(self, name: str) -> None:
        self.seen.append(("started", name))

    def progress(self, name: str, done: int, total: int, best) -> None:
        assert done <= total  # progress never shows more trials than the budget
        self.seen.append(("progress", name))

    def finished(self, name: str, result: dict) -> None:
        self.seen.append((result["status"], name))


def _owners(study, out: Path) -> set[int]:
    trials = open_study(study, open_journal(journal_path(out / study.problem.name))).get_trials(states=(COMPLETE,))
    return {t.system_attrs[OWNER_KEY]["pid"] for t in trials}


@pytest.mark.parametrize("share", [False, True])
def test_a_worker_takes_free_studies_first_and_helps_a_taken_one(tmp_path: Path, share: bool) -> None:
    studies = [load_study(write_study(tmp_path, name, trials=3)) for name in ("alpha", "beta", "gamma")]
    out = tmp_path / "out"
    held = claim_study(out / "alpha", "alpha")  # another worker has taken alpha (it runs no trial yet)
    assert held is not None
    events = Recorder()
    StudyWorker(studies, out, share=share, events=events).run()
    finished = [name for kind, name in events.seen if kind == "done"]
    assert finished == ["beta", "gamma"]  # written here; alpha's results are its holder's to write
    assert not (out / "alpha" / "summary.json").exists()
    first_alpha = events.seen.index(("progress", "alpha"))
    if share:  # all workers on one study at a time: alpha is helped first
        assert first_alpha < events.seen.index(("started", "beta"))
    else:      # free studies first; alpha is helped only when nothing is left to take
        assert first_alpha > events.seen.index(("done", "gamma"))
    # The helper filled alpha's budget exactly, and wrote nothing but its journal.
    assert len(complete_trials(studies[0], open_journal(journal_path(out / "alpha")))) == 3
    assert {p.name for p in (out / "alpha").iterdir()} == {".study.lock", "search.journal"}
    held.release()
    again = Recorder()
    StudyWorker(studies, out, events=again).run()  # alpha is free now: taken, written, nothing rerun
    assert ("done", "alpha") in again.seen and ("started", "beta") not in again.seen
    assert _owners(studies[0], out) == {os.getpid()}
    assert len(complete_trials(studies[0], open_journal(journal_path(out / "alpha")))) == 3


def _wait_for(condition, proc: subprocess.Popen, what: str) -> None:
    deadline = time.monotonic() + KILL_DEADLINE_S
    while not condition():
        assert proc.poll() is None, f"the process ended before {what}"
        assert time.monotonic() < deadline, f"no {what} within {KILL_DEADLINE_S} s"
        time.sleep(0.05)  # waiting for a state, not measuring anything


def _claim_holder(folder: Path) -> int | None:
    try:
        return int(json.loads((folder / ".study.lock").read_text())["pid"])
    except (OSError, ValueError, KeyError):
        return None


def test_a_second_run_of_a_running_study_is_refused_naming_the_process(tmp_path: Path) -> None:
    path = write_study(tmp_path, "busy", trials=500)  # far more than will run before the kill
    study = load_study(path)
    out = tmp_path / "out"
    journal = journal_path(out / "busy")
    first = subprocess.Popen([sys.executable, "-m", "optmatch", "run", str(path), "--out", str(out), "--quiet"],
                             stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        _wait_for(lambda: len(_complete_now(study, journal)) >= 1, first, "a complete trial")
        second = subprocess.run([sys.executable, "-m", "optmatch", "run", str(path), "--out", str(out), "--quiet"],
                                capture_output=True, text=True, timeout=300)
        assert second.returncode == 2
        (line,) = [x for x in second.stderr.splitlines() if x.startswith("optmatch: error:")]
        assert f"already being run by process {first.pid} on {socket.gethostname()}" in line
        assert "optmatch worker" in line and "Traceback" not in second.stderr
    finally:
        first.kill()  # SIGKILL: the kernel drops the claim with the process
        first.wait()
    budget = len(_complete_now(study, journal)) + 2
    path.write_text(path.read_text().replace("trials: 500", f"trials: {budget}"))  # same study, two more trials
    third = subprocess.run([sys.executable, "-m", "optmatch", "run", str(path), "--out", str(out), "--quiet"],
                           capture_output=True, text=True, timeout=600)
    assert third.returncode == 0, third.stderr
    summary = json.loads((out / "busy" / "summary.json").read_text())
    assert summary["search"]["trials_complete"] == budget == len(_complete_now(study, journal))
    # Pozar 4th ed. Example 5.2 (recalled from memory): an exact single-stub match exists.
    assert summary["verdict"] == "PASS"


def test_two_workers_take_whole_studies_and_survive_a_killed_helper(tmp_path: Path) -> None:
    folder, out = tmp_path / "studies", tmp_path / "out"
    folder.mkdir()
    studies = [load_study(write_study(folder, f"s{k}", trials=30)) for k in range(5)]  # outlasts the helper's start
    proc = subprocess.Popen([sys.executable, "-m", "optmatch", "batch", str(folder), "--out", str(out),
                             "--workers", "2"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)

    def helper_mid_study() -> int | None:
        for s in studies:
            pid = _claim_holder(out / s.problem.name)
            if pid not in (None, proc.pid) and not (out / s.problem.name / "summary.json").exists() \
                    and len(_complete_now(s, journal_path(out / s.problem.name))) >= 1:
                return pid
        return None

    try:
        _wait_for(lambda: helper_mid_study() is not None, proc, "a study taken by the helper")
        helper = helper_mid_study()
        assert helper is not None
        os.kill(helper, signal.SIGKILL)  # the helper dies mid-study; the batch finishes its work
        stdout, stderr = proc.communicate(timeout=600)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == 0, stderr
    state = json.loads((out / "batch.json").read_text())
    assert {s["name"]: s["status"] for s in state["studies"]} == {f"s{k}": "done" for k in range(5)}
    owners: set[int] = set()
    for s, entry in zip(studies, state["studies"], strict=True):
        summary = json.loads((out / s.problem.name / "summary.json").read_text())
        # exactly the budget in every study, helpers or not; batch.json agrees with the results folder
        assert len(complete_trials(s, open_journal(journal_path(out / s.problem.name)))) == 30
        assert summary["search"]["trials_complete"] == entry["trials_complete"] == 30
        # Pozar 4th ed. Example 5.2 (recalled from memory): an exact single-stub match exists.
        assert summary["verdict"] == "PASS"
        owners |= _owners(s, out)
    assert proc.pid in owners and len(owners) >= 2  # both processes ran trials


def test_a_second_batch_on_a_busy_results_root_is_refused(tmp_path: Path) -> None:
    folder, out = tmp_path / "studies", tmp_path / "out"
    folder.mkdir()
    write_study(folder, "any", trials=2)
    held = try_claim(out / BATCH_CLAIM, f"batch {folder}")  # as a running batch holds it
    assert held is not None
    with held, pytest.raises(BatchError, match=f"a batch is already running there: process {os.getpid()}"):
        run_batch(folder, out)
    assert not (out / "batch.json").exists()


def test_ctrl_c_stops_every_worker_and_a_rerun_finishes_exactly_the_budgets(tmp_path: Path) -> None:
    folder, out = tmp_path / "studies", tmp_path / "out"
    folder.mkdir()
    studies = [load_study(write_study(folder, f"c{k}", trials=30)) for k in range(4)]  # outlasts the helper's start
    # a session of its own, so that SIGINT goes to the batch and its helper at once, as Ctrl-C does
    proc = subprocess.Popen([sys.executable, "-m", "optmatch", "batch", str(folder), "--out", str(out),
                             "--workers", "2"], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)

    def helper_busy() -> bool:
        return any(_claim_holder(out / s.problem.name) not in (None, proc.pid)
                   and len(_complete_now(s, journal_path(out / s.problem.name))) >= 1 for s in studies)

    try:
        _wait_for(helper_busy, proc, "a study taken by the helper")
        os.killpg(proc.pid, signal.SIGINT)
        _, stderr = proc.communicate(timeout=300)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()
    assert proc.returncode == 130, stderr
    assert "Traceback" not in stderr
    state = json.loads((out / "batch.json").read_text())
    assert "running" not in {s["status"] for s in state["studies"]}
    assert "interrupted" in {s["status"] for s in state["studies"]}

    rerun = batch(folder, out, "--workers", "2")

    assert rerun.returncode == 0, rerun.stderr
    for s in studies:
        assert len(complete_trials(s, open_journal(journal_path(out / s.problem.name)))) == 30
        summary = json.loads((out / s.problem.name / "summary.json").read_text())
        # Pozar 4th ed. Example 5.2 (recalled from memory): an exact single-stub match exists.
        assert summary["search"]["trials_complete"] == 30 and summary["verdict"] == "PASS"


@pytest.mark.parametrize("fork", [True, False], ids=["forked helper", "fresh-interpreter helper"])
def test_both_kinds_of_helper_take_whole_studies_and_keep_exact_budgets(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch, fork: bool) -> None:
    folder, out = tmp_path / "studies", tmp_path / "out"
    folder.mkdir()
    studies = [load_study(write_study(folder, f"h{k}", trials=12)) for k in range(4)]
    monkeypatch.setattr(helpers, "can_fork", lambda: fork)
    seen: list[str] = []

    class Listener(BatchListener):
        def study_finished(self, entry: StudyEntry) -> None:
            seen.append(entry.name)

    entries = run_batch(folder, out, workers=2, listener=Listener())

    assert [e.status for e in entries] == ["done"] * 4
    assert sorted(seen) == [s.problem.name for s in studies]  # the helper's events reached the batch
    owners: set[int] = set()
    for s in studies:
        assert len(complete_trials(s, open_journal(journal_path(out / s.problem.name)))) == 12
        summary = json.loads((out / s.problem.name / "summary.json").read_text())
        # Pozar 4th ed. Example 5.2 (recalled from memory): an exact single-stub match exists.
        assert summary["search"]["trials_complete"] == 12 and summary["verdict"] == "PASS"
        owners |= _owners(s, out)
    assert os.getpid() in owners and len(owners) == 2  # this process and one helper ran trials
    assert (out / "workers" / "helper-1.log").exists()


def test_pool_threads_caps_every_loaded_library_and_restores_it() -> None:
    import scipy.optimize  # noqa: F401  (loads scipy's own OpenBLAS, as the search does)
    from threadpoolctl import threadpool_info

    before = {p["filepath"]: p["num_threads"] for p in threadpool_info()}
    assert before, "no thread pool found: numpy and scipy each load one"
    with pool_threads(1):
        assert all(p["num_threads"] == 1 for p in threadpool_info())
    assert {p["filepath"]: p["num_threads"] for p in threadpool_info()} == before
    # one thread per pool for each of two workers on 2 cores; 3 cores leave 1 each; one worker: untouched
    assert threads_per_worker(2, cores=2) == 1 and threads_per_worker(2, cores=8) == 4
    assert threads_per_worker(3, cores=2) == 1 and threads_per_worker(1, cores=2) is None


@pytest.mark.parametrize("value", ["0", "-3", "two"])
def test_a_helper_refuses_a_pool_size_below_one_in_one_line(tmp_path: Path, value: str) -> None:
    path = write_study(tmp_path, "any", trials=1)
    run = subprocess.run([sys.executable, "-m", "optmatch", "worker", str(path), "--out", str(tmp_path / "out"),
                          "--batch-events", "--quiet", "--pool-threads", value],
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 2 and "Traceback" not in run.stderr
    assert run.stderr.strip().splitlines()[-1].startswith("optmatch worker: error: argument --pool-threads:")
    assert not (tmp_path / "out").exists()
