"""Storage: workers sharing a journal file or a PostgreSQL database, dead workers, damaged journals.

Every study here matches the load of Pozar's Example 5.2 (ZL = 60 − j80 Ω on 50 Ω) with a single
shorted shunt stub over a narrow band around 2 GHz.  D. M. Pozar, Microwave Engineering, 4th ed.,
Example 5.2 (recalled from memory) shows that this network matches the load exactly at the design
frequency, so a correct search must clear a 20 dB return-loss mask over ±0.5 %.
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
import uuid
from dataclasses import replace
from pathlib import Path

import numpy as np
import optuna
import pytest

from optmatch.cli.main import main
from optmatch.running.batch import prepare
from optmatch.running.search import open_study, run_search
from optmatch.running.storage import (
    OWNER_KEY,
    StorageError,
    open_journal,
    open_storage,
    trial_is_stale,
)
from optmatch.studyfile.loader import load_study

COMPLETE = optuna.trial.TrialState.COMPLETE


def write_study(folder: Path, name: str, trials: int, population: int = 8, generations: int = 6,
                note: str = "") -> Path:
    """A tiny invented study file on the Pozar Example 5.2 load."""
    path = folder / f"{name}.yaml"
    path.write_text(textwrap.dedent(f"""\
        # Invented test study on the load of Pozar, Microwave Engineering, 4th ed., Example 5.2.
        name: {name}
        description: "tiny test study {note}"
        system: 50
        load:
          impedance: 60-80j
        mask:
          points: 5
          segments:
            - {{from: 1.99GHz, to: 2.01GHz, return_loss: 20}}
        network:
          template: single_shunt_stub
          z0: 50
          vf: 1.0
          end: short
        search:
          trials: {trials}
          seed: 1
          population: {population}
          generations: {generations}
        """), encoding="utf-8")
    return path


def complete_trials(study, storage) -> list[optuna.trial.FrozenTrial]:
    return open_study(study, storage).get_trials(deepcopy=False, states=(COMPLETE,))


def recomputed_margin(study, design) -> float:
    """A design's margin evaluated again through the engine (dB)."""
    return float(study.problem.margins(np.array([design.u]), design.choice)[0])


def run_two_workers(files: list[Path], storage_arg: str, tmp_path: Path) -> list[int]:
    """Start two ``optmatch worker`` processes at once; returns their pids after both end."""
    cmd = [sys.executable, "-m", "optmatch", "worker", *map(str, files), "--storage", storage_arg,
           "--out", str(tmp_path / "out"), "--quiet"]
    procs = [subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True) for _ in range(2)]
    for p in procs:
        out, err = p.communicate(timeout=300)
        assert p.returncode == 0, err
    return [p.pid for p in procs]


def check_shared_study(study, storage, pids: list[int]) -> None:
    done = complete_trials(study, storage)
    budget = study.search.trials
    by_worker = {pid: sum(t.system_attrs[OWNER_KEY]["pid"] == pid for t in done) for pid in pids}
    # A shared store holds each trial once and the workers' shares add up (common practice, no source).
    assert sum(by_worker.values()) == len(done)
    assert len({t.number for t in done}) == len(done)
    # Trial slots are claimed through the storage: exactly the budget completes, never more
    # (our own rule, running/trials.py); a trial that lost the race for the last slot is pruned, uncounted.
    assert len(done) == budget
    surplus = [t for t in open_study(study, storage).get_trials(deepcopy=False)
               if t.system_attrs.get("optmatch:surplus")]
    assert all(t.state == optuna.trial.TrialState.PRUNED for t in surplus)
    outcome = run_search(study, storage)  # budget met: collects only
    assert outcome.trials_complete == len(done)
    best_kept = max(d["margin_db"] for t in done for d in t.user_attrs["designs"])
    best_value = max(t.values[0] for t in done)
    # Ranking rounds margins to 0.01 dB and then prefers the shorter design; a trial's value carries
    # a length tie-break of 0.001 dB per wavelength.
    assert outcome.designs[0].margin_db == pytest.approx(best_kept, abs=0.005)
    assert best_value == pytest.approx(best_kept, abs=0.005)
    # The stored figure is what the engine gives for the stored design (identity, no source).
    assert recomputed_margin(study, outcome.designs[0]) == pytest.approx(outcome.designs[0].margin_db, abs=1e-9)
    # Pozar 4th ed. Example 5.2 (recalled from memory): an exact single-stub match exists at 2 GHz,
    # so the ±0.5 % band clears 20 dB return loss.
    assert outcome.designs[0].margin_db > 0.0


def test_two_workers_share_one_journal_file(tmp_path: Path) -> None:
    study = load_study(write_study(tmp_path, "shared-journal", trials=8))
    journal = tmp_path / "shared.journal"
    prepare(study, open_journal(journal))  # as batch does: seeds queued once, before workers start
    pids = run_two_workers([study.path], str(journal), tmp_path)
    check_shared_study(study, open_journal(journal), pids)


PG_URL = os.environ.get("OPTMATCH_TEST_PG_URL")


@pytest.mark.skipif(PG_URL is None, reason="OPTMATCH_TEST_PG_URL not set (.ci/run starts PostgreSQL and sets it)")
def test_two_workers_share_postgresql(tmp_path: Path) -> None:
    assert PG_URL is not None
    study = load_study(write_study(tmp_path, "shared-pg", trials=8, note=uuid.uuid4().hex))  # a fresh study
    storage = open_storage(PG_URL, tmp_path)
    prepare(study, storage)
    pids = run_two_workers([study.path], PG_URL, tmp_path)
    check_shared_study(study, open_storage(PG_URL, tmp_path), pids)


DIE_IN_TRIAL = """
import os, sys
import optmatch.running.search as search
from optmatch.studyfile.loader import load_study
from optmatch.running.journal import open_journal

def die(*args, **kwargs):
    os._exit(0)  # the worker vanishes mid-trial, as under SIGKILL: no clean-up runs

search.inner_search = die
search.run_search(load_study(sys.argv[1]), open_journal(sys.argv[2]))
"""


def test_trial_of_a_dead_worker_is_failed_and_retried(tmp_path: Path) -> None:
    study = load_study(write_study(tmp_path, "dead-worker", trials=4))
    journal = tmp_path / "dead.journal"
    subprocess.run([sys.executable, "-c", DIE_IN_TRIAL, str(study.path), str(journal)], check=True, timeout=120)
    storage = open_journal(journal)
    orphan = open_study(study, storage).get_trials(deepcopy=False)[0]
    assert orphan.state == optuna.trial.TrialState.RUNNING
    assert trial_is_stale(orphan, grace_s=3600.0)  # owner process gone: stale at once, not after the grace

    outcome = run_search(study, storage)
    trials = open_study(study, open_journal(journal)).get_trials(deepcopy=False)
    assert trials[orphan.number].state == optuna.trial.TrialState.FAIL
    retries = [t for t in trials if t.system_attrs.get("failed_trial") == orphan.number]
    assert len(retries) == 1 and retries[0].state == COMPLETE
    assert retries[0].params == orphan.params and orphan.params  # the same picks run again
    # The budget counts complete trials only: exactly the study's budget, the failed one not counted.
    assert outcome.trials_complete == study.search.trials == sum(t.state == COMPLETE for t in trials)


def test_torn_journal_tail_is_set_aside_and_nothing_is_lost(tmp_path: Path) -> None:
    study = load_study(write_study(tmp_path, "torn", trials=3))
    journal = tmp_path / "torn.journal"
    run_search(study, open_journal(journal))
    before = {t.number: t.values for t in complete_trials(study, open_journal(journal))}
    torn = b'{"op_code":4,"worker_id":"gone","study_id":0,"datetime_st'
    with open(journal, "ab") as fh:  # a write cut short by a kill
        fh.write(torn)

    longer = replace(study, search=replace(study.search, trials=5))  # same inputs digest, more trials
    outcome = run_search(longer, open_journal(journal))
    after = {t.number: t.values for t in complete_trials(study, open_journal(journal))}
    assert Path(str(journal) + ".torn").read_bytes().startswith(torn)
    assert {n: after[n] for n in before} == before  # every earlier trial kept, unchanged
    assert len(after) == outcome.trials_complete == 5


def test_damaged_journal_is_reported_and_left_as_it_is(tmp_path: Path) -> None:
    study = load_study(write_study(tmp_path, "damaged", trials=2))
    journal = tmp_path / "damaged.journal"
    run_search(study, open_journal(journal))
    lines = journal.read_bytes().splitlines(keepends=True)
    damaged = b"".join(lines[:2] + [b"\x00\x00 not a record\n"] + lines[2:])
    journal.write_bytes(damaged)
    with pytest.raises(StorageError) as info:
        open_journal(journal)
    assert str(journal) in str(info.value) and "line 3" in str(info.value)
    assert journal.read_bytes() == damaged  # nothing rewritten, nothing lost


def test_unreachable_database_is_one_clear_error(tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    url = "postgresql://u:p@127.0.0.1:1/x"  # port 1 on loopback: nothing listens there
    with pytest.raises(StorageError, match="cannot be opened"):
        open_storage(url, tmp_path)
    folder = tmp_path / "studies"
    folder.mkdir()
    write_study(folder, "any", trials=2)
    code = main(["batch", str(folder), "--storage", url, "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2
    assert "127.0.0.1:1" in err and "Traceback" not in err
    assert len([line for line in err.splitlines() if line.startswith("optmatch: error:")]) == 1
