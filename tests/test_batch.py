"""``optmatch batch``: broken files and damaged storage among good studies, helpers, SIGKILL and resume.

The good studies match the load of Pozar's Example 5.2 (ZL = 60 − j80 Ω on 50 Ω) with a single
shorted shunt stub; D. M. Pozar, Microwave Engineering, 4th ed., Example 5.2 (recalled from memory)
matches it exactly at the design frequency, so each such study must meet a 20 dB mask over ±0.5 %.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import optuna
from test_storage import write_study

from optmatch.running.search import open_study
from optmatch.running.storage import journal_path, open_journal
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
    assert good.search.trials <= len(done) <= good.search.trials + 1  # the helper may finish one more
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
