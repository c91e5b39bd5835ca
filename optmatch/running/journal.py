"""The journal file: optuna's journal storage over a file backend of our own.

optuna's ``JournalStorage`` replays a log of operations; this module supplies the log (a
:class:`JournalFile`, optuna's public ``BaseJournalBackend`` interface) and adds what the plain file
backend lacks:

* **Integrity.**  Every record we write ends in ``"optmatch_seq":[n,crc]``: its line number in the
  file and a CRC-32 of the number and the record.  Reading checks both, so a record deleted, moved
  or altered in the middle of the file is refused, naming the line, and the file is left exactly
  as it was.  Records without the field (journals written before it existed) are accepted only
  before the first numbered one.
* **Torn tail.**  A last line without its newline is a write cut short by a kill.  It is moved to
  ``<journal>.torn`` and cut off, at open and before every append, so new records never glue onto it.
* **Write failures.**  A failed append (disk full, ``File too large``) is cut back off the file and
  raised as one :class:`StorageError` naming the journal; the trials finished so far stay intact.
* **Lock.**  Writers take an advisory lock (``flock``) on the journal file itself.  The kernel drops
  it when its holder ends, however it ends, so a killed process never leaves a lock behind and
  nothing stalls; a live holder that keeps it longer than :data:`LOCK_REPORT_S` is reported once,
  naming its pid.  The lock file ``<journal>.lock`` of optuna's file backend (used by earlier
  versions) is no longer needed: one older than :data:`LOCK_STALE_S` is removed with a note.
* **Heartbeat.**  optuna has no heartbeat for the journal; :class:`WatchedJournalStorage` records
  the owner of each running trial and a beat (see :mod:`optmatch.running.storage_base`).

Durability: a record that creates a study or finishes a trial makes a background thread flush the
file to disk (fsync) at once, with every record before it, so the trial loop never waits for the
disk.  A killed process loses nothing that was written (the records are in the kernel's cache); a
power cut can lose the trials still running and those finished in the last moment before it, which
are then run again.
"""

from __future__ import annotations

import errno
import fcntl
import json
import os
import threading
import time
import warnings
import zlib
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import optuna
from optuna.storages import JournalStorage
from optuna.storages.journal import BaseJournalBackend
from optuna.trial import FrozenTrial, TrialState

from optmatch.running.optuna_adapter import HeartbeatHooks, trial_id
from optmatch.running.storage_base import (
    GRACE_S,
    HEARTBEAT_S,
    HOST,
    RecordsOwner,
    RetryStaleTrial,
    StorageError,
    notice,
    trial_is_stale,
)

JOURNAL_NAME = "search.journal"
TORN_SUFFIX = ".torn"
OLD_LOCK_SUFFIX = ".lock"  # the lock file of optuna's file backend (and of earlier optmatch versions)
LOCK_STALE_S = 10.0        # an old lock file older than this is removed, with a note
LOCK_REPORT_S = 10.0       # waiting this long for the lock is reported once, naming the holder
SEQ_FIELD = b',"optmatch_seq":['
CREATE_STUDY, SET_TRIAL_STATE = 0, 6   # optuna's journal operation codes
FINISHED_STATES = {1, 2, 3}            # COMPLETE, PRUNED, FAIL


def journal_path(folder: Path) -> Path:
    return Path(folder) / JOURNAL_NAME


def _damaged(path: Path, line: int, what: str) -> StorageError:
    return StorageError(f"{path}: line {line}: {what}; the file is left as it is. Move it aside to start "
                        f"this study afresh, or restore it from a copy")


def _finishes(record: dict) -> bool:
    """Whether a record creates a study or finishes a trial: those are flushed to disk at once."""
    op = record.get("op_code")
    return op == CREATE_STUDY or (op == SET_TRIAL_STATE and record.get("state") in FINISHED_STATES)


# ---------------------------------------------------------------- lock


class JournalLock:
    """The writers' lock: an advisory ``flock`` on the journal file itself (see the module notes)."""

    def __init__(self, journal: Path) -> None:
        self.journal = Path(journal)
        self._fd: int | None = None

    def __enter__(self) -> JournalLock:
        self.acquire()
        return self

    def __exit__(self, *exc: Any) -> None:
        self.release()

    def acquire(self) -> None:
        try:
            fd = os.open(self.journal, os.O_RDWR | os.O_CREAT | os.O_CLOEXEC, 0o644)
        except OSError as exc:
            raise StorageError(f"{self.journal}: cannot open the journal ({exc.strerror or exc})") from None
        try:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                self._wait(fd)
        except BaseException:
            os.close(fd)
            raise
        self._fd = fd

    def _wait(self, fd: int) -> None:
        started: float | None = time.monotonic()
        pause_s = 0.001
        while True:
            time.sleep(pause_s)
            pause_s = min(2 * pause_s, 0.05)
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                return
            except BlockingIOError:
                pass
            if started is not None and time.monotonic() - started > LOCK_REPORT_S:
                notice(f"{self.journal}: waiting for the journal lock, held by {self.holder()} for more than "
                       f"{LOCK_REPORT_S:.0f} s")
                started = None  # once

    def release(self) -> None:
        if self._fd is not None:
            os.close(self._fd)  # closing drops the lock
            self._fd = None

    def holder(self) -> str:
        """Who holds the lock, as far as the kernel's lock table says (Linux ``/proc/locks``)."""
        try:
            inode = os.stat(self.journal).st_ino
            table = Path("/proc/locks").read_text()
        except OSError:
            return "another process"
        for row in table.splitlines():
            fields = row.split()
            if len(fields) > 5 and fields[1] == "FLOCK" and fields[5].rsplit(":", 1)[-1] == str(inode):
                return f"process {fields[4]} on {HOST}"
        return "another process"


def remove_old_lock_file(journal: Path) -> None:
    """Remove ``<journal>.lock``, the lock file of older versions (unused now), once it is older than
    :data:`LOCK_STALE_S`: a younger one may belong to an older version still writing."""
    old = Path(str(journal) + OLD_LOCK_SUFFIX)
    try:
        age = time.time() - old.stat().st_mtime
    except OSError:
        return
    if age <= LOCK_STALE_S:
        return
    content = b""
    try:
        content = old.read_bytes()[:4096]
        old.unlink()
    except OSError:
        return
    who = ""
    try:
        owner = json.loads(content)
        if isinstance(owner, dict) and "pid" in owner:
            who = f" by process {owner['pid']} on {owner.get('host')}"
    except ValueError:
        pass
    notice(f"{old}: stale journal lock file left{who} {age:.0f} s ago (more than {LOCK_STALE_S:.0f} s) by an "
           f"older version; this version no longer uses it; removed it")


# ---------------------------------------------------------------- the file


class _Flusher:
    """Flushes the journal to disk (fsync) on a background thread soon after it is asked to, so the
    trial loop never waits for the disk; the thread ends when idle and starts again on demand."""

    IDLE_S = 5.0

    def __init__(self, path: Path) -> None:
        self.path = path
        self.wanted = threading.Event()
        self.guard = threading.Lock()
        self.thread: threading.Thread | None = None

    def request(self) -> None:
        with self.guard:
            self.wanted.set()
            if self.thread is None or not self.thread.is_alive():
                self.thread = threading.Thread(target=self._run, name="optmatch-journal-flush", daemon=True)
                self.thread.start()

    def _run(self) -> None:
        while True:
            if not self.wanted.wait(self.IDLE_S):
                with self.guard:
                    if not self.wanted.is_set():
                        self.thread = None
                        return
            self.wanted.clear()
            try:
                fd = os.open(self.path, os.O_RDONLY | os.O_CLOEXEC)
                try:
                    os.fsync(fd)
                finally:
                    os.close(fd)
            except OSError:
                pass  # the next append reports a journal that cannot be written


class JournalFile(BaseJournalBackend):
    """The journal file with numbered, checksummed records (see the module notes)."""

    def __init__(self, path: Path) -> None:
        self.path = Path(path)
        self.lock = JournalLock(self.path)
        self._flusher = _Flusher(self.path)
        self._offsets: dict[int, int] = {0: 0}   # line number -> byte offset of its start
        self._first_numbered: int | None = None  # line of the first numbered record seen
        try:
            with open(self.path, "ab"):
                pass
            remove_old_lock_file(self.path)
            with self.lock:
                self._end = self._check_whole_file()
        except OSError as exc:
            raise StorageError(f"{self.path}: cannot open the journal ({exc.strerror or exc})") from None

    # -------------------------------------------------------------- reading

    def _decode(self, raw: bytes, line: int) -> dict:
        """The record on 0-based ``line`` (its bytes end in a newline); raises for a damaged one."""
        at = raw.rfind(SEQ_FIELD)
        if at >= 0 and raw.endswith(b"]}\n"):
            try:
                seq_text, crc_text = raw[at + len(SEQ_FIELD):-3].split(b",")
                seq, crc = int(seq_text), int(crc_text)
            except ValueError:
                raise _damaged(self.path, line + 1, "its sequence field is unreadable") from None
            body = raw[:at] + b"}"
            if zlib.crc32(b"%d:" % seq + body) != crc:
                raise _damaged(self.path, line + 1, "the record was altered (checksum mismatch)")
            if seq > line:
                raise _damaged(self.path, line + 1, f"{seq - line} record(s) missing before it "
                                                    f"(it is record {seq + 1})")
            if seq < line:
                raise _damaged(self.path, line + 1, f"a record repeated or out of order (it is record {seq + 1})")
            if self._first_numbered is None or line < self._first_numbered:
                self._first_numbered = line
        else:
            body = raw
            if self._first_numbered is not None and line > self._first_numbered:
                raise _damaged(self.path, line + 1, "a record without its sequence number")
        try:
            record = json.loads(body)
        except ValueError:
            raise _damaged(self.path, line + 1, "not a journal record") from None
        if not isinstance(record, dict) or "op_code" not in record:
            raise _damaged(self.path, line + 1, "not a journal record")
        return record

    def _lines(self, start_line: int, start_offset: int) -> Iterator[tuple[int, int, dict]]:
        """(line, offset after it, record) of each whole line from ``start_line``; stops at a
        line without its newline (still being written, or torn)."""
        with open(self.path, "rb") as fh:
            fh.seek(start_offset)
            line, offset = start_line, start_offset
            for raw in fh:
                if not raw.endswith(b"\n"):
                    return
                offset += len(raw)
                yield line, offset, self._decode(raw, line)
                line += 1

    def _check_whole_file(self) -> tuple[int, int]:
        """Check every record (the lock is held); set a torn tail aside. Returns (bytes, lines)."""
        good, lines = 0, 0
        for line, offset, _ in self._lines(0, 0):
            good, lines = offset, line + 1
        size = self.path.stat().st_size
        if size > good:
            self._set_aside_tail(good)
        return good, lines

    def _set_aside_tail(self, good: int) -> None:
        """Move the bytes after ``good`` (a write cut short) to ``<journal>.torn``; the lock is held."""
        with open(self.path, "rb") as fh:
            fh.seek(good)
            tail = fh.read()
        with open(str(self.path) + TORN_SUFFIX, "ab") as side:
            side.write(tail + b"\n")
            side.flush()
            os.fsync(side.fileno())
        with open(self.path, "r+b") as fh:
            fh.truncate(good)
            fh.flush()
            os.fsync(fh.fileno())
        notice(f"{self.path}: an unfinished last record ({len(tail)} bytes, from a write cut short) was "
               f"moved to {self.path.name}{TORN_SUFFIX}")

    def read_logs(self, log_number_from: int) -> Iterator[dict[str, Any]]:
        start = log_number_from if log_number_from in self._offsets else 0
        for line, offset, record in self._lines(start, self._offsets[start]):
            self._offsets[line + 1] = offset
            if line >= log_number_from:
                record.pop("optmatch_seq", None)
                yield record

    # -------------------------------------------------------------- writing

    def _encode(self, record: dict, seq: int) -> bytes:
        body = json.dumps(record, separators=(",", ":")).encode()
        if body == b"{}":
            raise ValueError("empty journal record")
        crc = zlib.crc32(b"%d:" % seq + body)
        return body[:-1] + SEQ_FIELD + b"%d,%d]}\n" % (seq, crc)

    def _catch_up(self) -> tuple[int, int]:
        """(bytes, lines) of the file now, counting records other processes added; the lock is held."""
        known_size, known_lines = self._end
        size = self.path.stat().st_size
        if size < known_size:
            raise StorageError(f"{self.path}: the journal shrank while in use (from {known_size} to {size} bytes); "
                               f"another program changed it. Stop every run of this study and check the file")
        if size == known_size:
            return known_size, known_lines
        with open(self.path, "rb") as fh:
            fh.seek(known_size)
            added = fh.read(size - known_size)
        if not added.endswith(b"\n"):  # a writer was killed mid-record
            whole = added.rfind(b"\n") + 1
            self._set_aside_tail(known_size + whole)
            added = added[:whole]
        return known_size + len(added), known_lines + added.count(b"\n")

    def append_logs(self, logs: list[dict[str, Any]]) -> None:
        with self.lock:
            try:
                size, lines = self._catch_up()
                data = b"".join(self._encode(rec, lines + k) for k, rec in enumerate(logs))
                flush = any(_finishes(rec) for rec in logs)
            except OSError as exc:
                raise self._write_error(exc) from None
            try:
                with open(self.path, "ab") as fh:
                    fh.write(data)
                    fh.flush()
            except OSError as exc:
                self._cut_back(size)
                raise self._write_error(exc) from None
            self._end = (size + len(data), lines + len(logs))
        if flush:
            self._flusher.request()

    def _cut_back(self, size: int) -> None:
        """Remove a partly written append (best effort; a torn tail is also repaired later)."""
        try:
            with open(self.path, "r+b") as fh:
                fh.truncate(size)
        except OSError:
            pass

    def _write_error(self, exc: OSError) -> StorageError:
        reason = exc.strerror or str(exc)
        hint = ""
        if exc.errno in (errno.EFBIG, errno.ENOSPC, errno.EDQUOT):
            hint = "; free space or raise the file size limit, then run again to resume"
        return StorageError(f"{self.path}: cannot write the journal ({reason}); the trials finished so far "
                            f"are kept{hint}")


# ---------------------------------------------------------------- the storage


class WatchedJournalStorage(RecordsOwner, HeartbeatHooks, JournalStorage):
    """optuna's journal storage with a heartbeat and dead-owner detection (see the module notes)."""

    def __init__(self, backend: JournalFile, heartbeat_s: int = HEARTBEAT_S, grace_s: float = GRACE_S,
                 stale_callback: Callable[[optuna.Study, FrozenTrial], None] | None = None) -> None:
        super().__init__(backend)
        self.path = backend.path
        self.heartbeat_s = heartbeat_s
        self.grace_s = grace_s
        self.stale_callback = stale_callback if stale_callback is not None else RetryStaleTrial()

    def record_heartbeat(self, trial_id: int) -> None:
        if not self.owner_beat_due(trial_id):
            return
        try:
            self.record_owner(trial_id)
        except StorageError:
            pass  # a beat runs on optuna's thread: the trial's own next write reports the failure

    def stale_trial_ids(self, study_id: int) -> list[int]:
        now = time.time()
        running = self.get_all_trials(study_id, deepcopy=False, states=(TrialState.RUNNING,))
        return [trial_id(t) for t in running if trial_is_stale(t, self.grace_s, now)]


def open_journal(path: Path) -> WatchedJournalStorage:
    """The journal storage in file ``path`` (created if absent), checked and repaired first."""
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise StorageError(f"{path.parent}: cannot create the folder ({exc.strerror or exc})") from None
    backend = JournalFile(path)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", optuna.exceptions.ExperimentalWarning)
            return WatchedJournalStorage(backend)
    except StorageError:
        raise
    except Exception as exc:  # optuna raises several kinds for a journal it cannot replay
        raise StorageError(f"{path}: journal cannot be read ({exc.__class__.__name__}: {exc})") from None


__all__ = ["JOURNAL_NAME", "LOCK_REPORT_S", "LOCK_STALE_S", "JournalFile", "JournalLock", "WatchedJournalStorage",
           "journal_path", "open_journal", "remove_old_lock_file"]
