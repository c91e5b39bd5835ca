"""Who writes a results folder: one process at a time holds a study's claim (or a batch's).

A claim is an advisory lock (``flock``) on a small file: ``<results>/<study>/.study.lock`` for a
study, ``<results>/.batch.lock`` for a batch.  The kernel drops it when the process ends however it
ends, so a killed run never leaves a claim behind.  The file holds the holder's pid, host and start
time, so a refused process can name it.  The file itself is never replaced or removed (a lock
lives on one inode).

* ``optmatch run`` of a study that another process is running is refused, naming that process;
  ``optmatch worker FILE`` joins it instead (it adds trials and writes no results).
* A batch worker takes a study by claiming it; a study already claimed is run by its holder.
"""

from __future__ import annotations

import fcntl
import json
import os
import time
from pathlib import Path
from typing import Any

from optmatch.errors import OptmatchError
from optmatch.io.atomic import remove_orphan_temp_files
from optmatch.outputs.report import STUDY_HTML, STUDY_MD
from optmatch.running.storage_base import HOST

STUDY_CLAIM = ".study.lock"
# The batch report writes these pages into each study folder: the batch that writes them cleans up
# after them, not the study's owner (the report may be writing one at that moment).
REPORT_TARGETS = frozenset({STUDY_HTML, STUDY_MD})
BATCH_CLAIM = ".batch.lock"


class Busy(OptmatchError):
    """Another process holds the claim."""


class Claim:
    """A held claim; release it with :meth:`release` or a ``with`` block."""

    def __init__(self, path: Path, fd: int) -> None:
        self.path = path
        self._fd: int | None = fd

    def release(self) -> None:
        if self._fd is not None:
            os.close(self._fd)  # closing drops the lock
            self._fd = None

    def __enter__(self) -> Claim:
        return self

    def __exit__(self, *exc: Any) -> None:
        self.release()


def try_claim(path: Path, what: str) -> Claim | None:
    """Take the claim file ``path`` for ``what`` (a short description), or None when it is held."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd = os.open(path, os.O_RDWR | os.O_CREAT | os.O_CLOEXEC, 0o644)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        os.close(fd)
        return None
    except BaseException:
        os.close(fd)
        raise
    holder = {"pid": os.getpid(), "host": HOST, "since": time.strftime("%Y-%m-%d %H:%M:%S"), "doing": what}
    os.ftruncate(fd, 0)
    os.pwrite(fd, (json.dumps(holder) + "\n").encode(), 0)
    return Claim(path, fd)


def holder(path: Path) -> str:
    """Who holds the claim file ``path``, in words (as far as the file says)."""
    try:
        doc = json.loads(Path(path).read_text(encoding="utf-8"))
        return f"process {int(doc['pid'])} on {doc['host']} (since {doc['since']})"
    except (OSError, ValueError, KeyError, TypeError):
        return "another process"


def claim_study(folder: Path, name: str) -> Claim | None:
    """Take study ``name``'s results ``folder``; None when another process has it.  On success, the
    temporary files that killed writes left in the folder are removed (nobody else writes there)."""
    claim = try_claim(Path(folder) / STUDY_CLAIM, f"study {name}")
    if claim is not None:
        remove_orphan_temp_files(folder, keep_targets=REPORT_TARGETS)
    return claim


def claim_study_or_refuse(folder: Path, name: str, file: Path) -> Claim:
    """Take the study's claim or raise :class:`Busy` naming the process that holds it."""
    claim = claim_study(folder, name)
    if claim is None:
        raise Busy(f"{folder}: study {name!r} is already being run by {holder(Path(folder) / STUDY_CLAIM)}; "
                   f"wait for it to finish, or add trials to it with `optmatch worker {file}` "
                   f"(same --out and --storage)")
    return claim


__all__ = ["BATCH_CLAIM", "Busy", "Claim", "REPORT_TARGETS", "STUDY_CLAIM", "claim_study",
           "claim_study_or_refuse", "holder", "try_claim"]
