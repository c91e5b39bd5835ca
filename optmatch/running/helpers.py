"""Helper processes of a batch: how they start, how their events come back, how they stop.

A helper is one more :class:`~optmatch.running.worker.StudyWorker` beside the batch's own.  It tells
the batch what it does as JSON lines (:class:`~optmatch.running.worker.JsonLineEvents`) on a pipe, and
its stderr goes to ``<results>/workers/helper-K.log``.  It starts in one of two ways:

* **fork** (Linux, when the batch process runs no other thread): a copy of the batch process, with
  optmatch already imported and the study files already read.  It begins its first study at once.
* **fresh interpreter** (elsewhere, or when other threads run, since forking those is unsafe):
  ``python -m optmatch worker --batch-events``, which imports optmatch and reads the files again
  (about 1.5 s on the 2-core benchmark machine before its first study).

Either way the storage URL reaches the helper without a command line: a forked helper has it in
memory, a fresh one in its environment.
"""

from __future__ import annotations

import multiprocessing
import os
import signal
import subprocess
import sys
import threading
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import IO

from optmatch.running.cores import pool_threads
from optmatch.running.storage_url import ENV_STORAGE
from optmatch.running.worker import JsonLineEvents, StudyWorker, stop_with_parent
from optmatch.studyfile.loader import Study

EXIT_INTERRUPTED = 130


def can_fork() -> bool:
    """A fork is safe here: Linux (macOS system libraries do not survive a fork) and no other thread."""
    return sys.platform.startswith("linux") and threading.active_count() == 1


class Helper:
    """One running helper process."""

    pid: int

    def lines(self) -> Iterator[str]:
        """Its event lines, until it ends."""
        raise NotImplementedError

    def running(self) -> bool:
        raise NotImplementedError

    def interrupt(self) -> None:
        """As Ctrl-C does: its running trial is marked failed and the study resumes on the next run."""
        if self.running():
            os.kill(self.pid, signal.SIGINT)

    def wait(self, timeout: float | None) -> bool:
        """Wait for it to end (``timeout`` in s, None: no limit); False if it still runs."""
        raise NotImplementedError

    def kill(self) -> None:
        raise NotImplementedError


class ForkedHelper(Helper):
    """A helper forked from the batch process (see the module notes)."""

    def __init__(self, studies: Sequence[Study], out_root: Path, storage_url: str | None, share: bool,
                 threads: int | None, log: Path, close_in_child: Callable[[], None]) -> None:
        read_fd, write_fd = os.pipe()
        parent = os.getpid()
        for stream in (sys.stdout, sys.stderr):
            stream.flush()  # else the child would print this process's buffered text again
        self._process = multiprocessing.get_context("fork").Process(
            target=_forked_main, name="optmatch-helper",
            args=(studies, out_root, storage_url, share, threads, log, parent, read_fd, write_fd, close_in_child))
        try:
            self._process.start()
        finally:
            os.close(write_fd)  # the child holds the only write end: its exit ends the stream
        assert self._process.pid is not None
        self.pid = self._process.pid
        self._stream = os.fdopen(read_fd, "r", encoding="utf-8")

    def lines(self) -> Iterator[str]:
        with self._stream:
            yield from self._stream

    def running(self) -> bool:
        return self._process.is_alive()

    def wait(self, timeout: float | None) -> bool:
        self._process.join(timeout)
        return not self._process.is_alive()

    def kill(self) -> None:
        self._process.kill()
        self._process.join()


def _forked_main(studies: Sequence[Study], out_root: Path, storage_url: str | None, share: bool,
                 threads: int | None, log: Path, parent: int, read_fd: int, write_fd: int,
                 close_in_child: Callable[[], None]) -> None:
    """The forked helper's whole life (its exit code: 0, or 130 when interrupted)."""
    os.close(read_fd)
    close_in_child()
    quiet = os.open(os.devnull, os.O_RDWR)
    os.dup2(quiet, 0)
    os.dup2(quiet, 1)  # the batch's terminal belongs to the batch
    os.close(quiet)
    err = os.open(log, os.O_WRONLY | os.O_CREAT | os.O_APPEND, 0o644)
    os.dup2(err, 2)
    os.close(err)
    stop_with_parent(parent)
    try:
        with os.fdopen(write_fd, "w", encoding="utf-8") as stream, pool_threads(threads):
            StudyWorker(studies, out_root, storage_url, share, JsonLineEvents(stream)).run()
    except (KeyboardInterrupt, BrokenPipeError):  # Ctrl-C, or the batch is gone
        sys.exit(EXIT_INTERRUPTED)


class InterpreterHelper(Helper):
    """A helper in a fresh interpreter: ``optmatch worker --batch-events`` (see the module notes)."""

    def __init__(self, files: Sequence[str], out_root: Path, storage_url: str | None, share: bool,
                 threads: int | None, log: Path) -> None:
        cmd = command(files, out_root, share, threads)
        with open(log, "ab") as err:
            self._proc = subprocess.Popen(cmd, stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=err,
                                          env=environment(storage_url), text=True)
        self.pid = self._proc.pid

    def lines(self) -> Iterator[str]:
        stream: IO[str] | None = self._proc.stdout
        assert stream is not None
        with stream:
            yield from stream

    def running(self) -> bool:
        return self._proc.poll() is None

    def wait(self, timeout: float | None) -> bool:
        try:
            self._proc.wait(timeout=timeout)
        except subprocess.TimeoutExpired:
            return False
        return True

    def kill(self) -> None:
        self._proc.kill()
        self._proc.wait()


def command(files: Sequence[str], out_root: Path, share: bool, threads: int | None) -> list[str]:
    """A fresh helper's command line: study files and folders only, never the storage URL."""
    cmd = [sys.executable, "-m", "optmatch", "worker", *files, "--out", str(out_root),
           "--parent-pid", str(os.getpid()), "--batch-events", "--quiet"]
    return cmd + (["--share"] if share else []) + ([] if threads is None else ["--pool-threads", str(threads)])


def environment(storage_url: str | None) -> dict[str, str]:
    """A fresh helper's environment: the storage URL, if any, travels here."""
    env = dict(os.environ)
    if storage_url is not None:
        env[ENV_STORAGE] = storage_url
    else:
        env.pop(ENV_STORAGE, None)
    return env


__all__ = ["ForkedHelper", "Helper", "InterpreterHelper", "can_fork", "command", "environment"]
