"""The journal file: damaged or reordered records refused with the file untouched, torn tails, temporary
files of killed writes, stale locks, and a journal that cannot be written.

Studies match the load of Pozar's Example 5.2 (ZL = 60 − j80 Ω on 50 Ω) with a single shorted shunt
stub (see test_storage.py).  The storage rules checked here are our own (running/journal.py); the
figures the search finds are checked against Pozar where it matters.
"""

from __future__ import annotations

import json
import os
import resource
import socket
import subprocess
import sys
import time
from dataclasses import replace
from pathlib import Path

import optuna
import pytest
from test_storage import write_study

from optmatch.running.journal import (
    JOURNAL_NAME,
    LOCK_STALE_S,
    JournalFile,
    JournalLock,
    journal_path,
    open_journal,
)
from optmatch.running.search import open_study, run_search
from optmatch.running.storage_base import StorageError
from optmatch.studyfile.loader import load_study

COMPLETE = optuna.trial.TrialState.COMPLETE


def run_cli(*args: str, **kwargs) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "optmatch", *args], capture_output=True, text=True, timeout=300,
                          **kwargs)


def errors(stderr: str) -> list[str]:
    return [line for line in stderr.splitlines() if line.startswith("optmatch: error:")]


@pytest.fixture(scope="module")
def finished(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    """A study file and the journal of a finished 3-trial run of it."""
    tmp = tmp_path_factory.mktemp("journal")
    path = write_study(tmp, "numbered", trials=3)
    run_search(load_study(path), open_journal(tmp / JOURNAL_NAME))
    return path, tmp / JOURNAL_NAME


def _copy(journal: Path, tmp_path: Path, lines: list[bytes]) -> Path:
    target = tmp_path / "out" / "numbered" / JOURNAL_NAME
    target.parent.mkdir(parents=True)
    target.write_bytes(b"".join(lines))
    return target


@pytest.mark.parametrize("damage", ["missing", "swapped", "altered"])
def test_a_damaged_middle_is_refused_and_the_file_left_as_it_is(finished, tmp_path: Path, damage: str) -> None:
    study_file, journal = finished
    lines = journal.read_bytes().splitlines(keepends=True)
    middle = len(lines) // 2
    assert len(lines) > 10
    if damage == "missing":
        lines = lines[:middle] + lines[middle + 1:]
        why = "missing before it"
    elif damage == "swapped":
        lines[middle], lines[middle + 1] = lines[middle + 1], lines[middle]
        why = "missing before it"  # the later record now comes first
    else:  # one character changed inside a record, still valid JSON
        at = lines[middle].index(b'"worker_id":"') + len(b'"worker_id":"')
        was = lines[middle][at:at + 1]
        lines[middle] = lines[middle][:at] + (b"b" if was == b"a" else b"a") + lines[middle][at + 1:]
        why = "checksum mismatch"
    target = _copy(journal, tmp_path, lines)
    damaged = target.read_bytes()

    run = run_cli("run", str(study_file), "--out", str(tmp_path / "out"), "--quiet")

    assert run.returncode == 2
    (line,) = errors(run.stderr)
    assert str(target) in line and f"line {middle + 1}:" in line and why in line
    assert "Traceback" not in run.stderr
    assert target.read_bytes() == damaged  # nothing rewritten, nothing repaired
    assert not (tmp_path / "out" / "numbered" / "summary.json").exists()


def test_records_carry_their_line_number_and_a_checksum(finished) -> None:
    _, journal = finished
    import zlib

    for number, raw in enumerate(journal.read_bytes().splitlines()):
        body, _, tail = raw.rpartition(b',"optmatch_seq":[')
        seq, crc = (int(x) for x in tail.rstrip(b"]}").split(b","))
        assert seq == number
        # CRC-32 as zlib computes it (an independent implementation of the standard polynomial)
        assert zlib.crc32(b"%d:" % seq + body + b"}") == crc
        assert json.loads(body + b"}")["op_code"] in range(11)


def test_a_journal_written_by_plain_optuna_is_continued(tmp_path: Path) -> None:
    study = load_study(write_study(tmp_path, "legacy", trials=2))
    journal = tmp_path / "legacy.journal"
    plain = optuna.storages.JournalStorage(optuna.storages.journal.JournalFileBackend(str(journal)))
    run_search(study, plain)  # an older journal: records without sequence numbers
    old = journal.read_bytes()
    longer = replace(study, search=replace(study.search, trials=4))
    outcome = run_search(longer, open_journal(journal))
    assert outcome.trials_complete == 4
    assert journal.read_bytes().startswith(old)  # the old records are kept as they were
    # a record without its number after numbered ones is a damaged file
    with open(journal, "ab") as fh:
        fh.write(old.splitlines(keepends=True)[-1])
    with pytest.raises(StorageError, match="without its sequence number"):
        open_journal(journal)


KILLED_WRITE = """
import os, sys
from optmatch.io.atomic import write_text_atomic

def fill_then_die(fh):
    fh.write("half a summary")
    fh.flush()
    os._exit(9)  # killed between writing the temporary file and renaming it

import optmatch.io.atomic as atomic
atomic._write_atomic(sys.argv[1], "w", fill_then_die)
"""


def test_temporary_files_of_killed_writes_are_removed_on_the_next_run(tmp_path: Path) -> None:
    path = write_study(tmp_path, "orphans", trials=2)
    folder = tmp_path / "out" / "orphans"
    folder.mkdir(parents=True)
    for target in ("summary.json", "return_loss.png"):
        killed = subprocess.run([sys.executable, "-c", KILLED_WRITE, str(folder / target)])
        assert killed.returncode == 9
    orphans = sorted(p.name for p in folder.iterdir())
    assert len(orphans) == 2 and all(p.startswith((".summary.json.", ".return_loss.png.")) for p in orphans)
    (folder / ".notes").write_text("the user's own file")           # not ours: kept
    (folder / ".study.html.abcd1234.tmp").write_text("report page")  # the batch report's: the batch cleans it

    run = run_cli("run", str(path), "--out", str(tmp_path / "out"), "--quiet")

    assert run.returncode in (0, 1), run.stderr
    left = {p.name for p in folder.iterdir() if p.name.startswith(".")}
    assert left == {".notes", ".study.html.abcd1234.tmp", ".study.lock"}
    assert json.loads((folder / "summary.json").read_text())["study"] == "orphans"


HOLD_LOCK = """
import sys
from optmatch.running.journal import JournalLock
lock = JournalLock(sys.argv[1])
lock.acquire()
print("held", flush=True)
sys.stdin.read()  # holds the lock until killed
"""


def test_a_lock_held_by_a_killed_process_is_free_at_once(tmp_path: Path) -> None:
    study = load_study(write_study(tmp_path, "killed-holder", trials=2))
    journal = tmp_path / JOURNAL_NAME
    JournalFile(journal)
    holder = subprocess.Popen([sys.executable, "-c", HOLD_LOCK, str(journal)], stdin=subprocess.PIPE,
                              stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout is not None and holder.stdout.readline() == "held\n"
        # while it holds the lock, a waiting writer can name it (the kernel's lock table)
        assert JournalLock(journal).holder() == f"process {holder.pid} on {socket.gethostname()}"
    finally:
        holder.kill()  # SIGKILL while holding the lock, as a crash would
        holder.wait()
    outcome = run_search(study, open_journal(journal))  # no stall, no lock to break
    assert outcome.trials_complete == 2


def test_an_old_lock_file_is_removed_after_the_stated_age_and_reported(tmp_path: Path, capfd) -> None:
    study = load_study(write_study(tmp_path, "old-lock", trials=2))
    journal = tmp_path / JOURNAL_NAME
    old = Path(str(journal) + ".lock")  # optuna's lock file, as an older version left it after a kill
    old.write_text(json.dumps({"host": "elsewhere.invalid", "pid": 4242}))
    open_journal(journal)
    assert old.exists()  # young: perhaps an older version still writing; left alone (and not waited for)
    stamp = time.time() - LOCK_STALE_S - 5
    os.utime(old, (stamp, stamp))

    outcome = run_search(study, open_journal(journal))

    assert outcome.trials_complete == 2 and not old.exists()
    err = " ".join(capfd.readouterr().err.split())
    assert f"{old}: stale journal lock file left by process 4242 on elsewhere.invalid" in err
    assert f"more than {LOCK_STALE_S:.0f} s" in err


def _limit_file_size(limit: int):
    def apply() -> None:
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    return apply


def test_a_journal_that_cannot_grow_gives_one_line_and_keeps_finished_trials(tmp_path: Path) -> None:
    path = write_study(tmp_path, "full", trials=2)
    out = tmp_path / "out"
    first = run_cli("run", str(path), "--out", str(out), "--quiet")
    assert first.returncode in (0, 1), first.stderr
    journal = journal_path(out / "full")
    study = load_study(path)
    before = {t.number: t.values for t in open_study(study, open_journal(journal)).get_trials(states=(COMPLETE,))}
    path.write_text(path.read_text().replace("trials: 2", "trials: 8"))  # more trials: same study, resumed
    room = journal.stat().st_size + 3000  # room for about one more trial's records, not eight

    cut_short = run_cli("run", str(path), "--out", str(out), "--quiet",
                        preexec_fn=_limit_file_size(room))

    assert cut_short.returncode == 2
    (line,) = errors(cut_short.stderr)
    assert f"{journal}: cannot write the journal (File too large)" in line and "kept" in line
    assert "Traceback" not in cut_short.stderr and "AssertionError" not in cut_short.stderr
    assert journal.stat().st_size <= room
    kept = {t.number: t.values for t in open_study(load_study(path), open_journal(journal)).get_trials(
        states=(COMPLETE,))}
    assert {n: kept[n] for n in before} == before  # every finished trial is still there, unchanged

    resumed = run_cli("run", str(path), "--out", str(out), "--quiet")
    assert resumed.returncode in (0, 1), resumed.stderr
    summary = json.loads((out / "full" / "summary.json").read_text())
    assert summary["search"]["trials_complete"] == 8
    # Pozar 4th ed. Example 5.2 (recalled from memory): an exact single-stub match exists.
    assert summary["verdict"] == "PASS"
