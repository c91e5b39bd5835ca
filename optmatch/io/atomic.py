"""Atomic file writes: write a temporary file in the target folder, flush it to disk, move it into place.

A reader never sees a half-written result, and a failure while writing leaves the old file intact.
"""

from __future__ import annotations

import json
import math
import os
import re
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import IO, Any

import numpy as np


def _write_atomic(path: str | os.PathLike, mode: str, fill: Callable[[IO[Any]], object],
                  suffix: str = ".tmp") -> Path:
    """Create a temp file beside ``path``, let ``fill`` write into it, fsync and ``os.replace``."""
    p = Path(path)
    folder = p.parent if str(p.parent) else Path(".")
    folder.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=suffix, dir=folder)
    try:
        kwargs: dict[str, Any] = {"encoding": "utf-8", "newline": ""} if "b" not in mode else {}
        with os.fdopen(fd, mode, **kwargs) as fh:
            fill(fh)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, 0o644)  # mkstemp makes it private; a result file is an ordinary file
        os.replace(tmp, p)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return p


# mkstemp names: "." + target name + "." + 8 random characters + suffix (".tmp", or a figure's own)
_TEMP_NAME = re.compile(r"^\.(?P<target>.+)\.[A-Za-z0-9_]{8}(?P<suffix>\.[A-Za-z0-9]+)$")


def remove_orphan_temp_files(folder: str | os.PathLike[str], keep_targets: frozenset[str] = frozenset(),
                             only_targets: frozenset[str] | None = None) -> list[Path]:
    """Remove the temporary files that writes killed before their rename left in ``folder``: those
    for ``only_targets`` (default: any file) except ``keep_targets``; returns what was removed.

    Call it only while no other process writes into ``folder``: a live write's file looks the same.
    """
    removed: list[Path] = []
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return removed
    for entry in entries:
        match = _TEMP_NAME.match(entry.name)
        if match is None or not entry.is_file(follow_symlinks=False):
            continue
        target, suffix = match.group("target"), match.group("suffix")
        if target in keep_targets or (only_targets is not None and target not in only_targets):
            continue
        if suffix not in (".tmp", Path(target).suffix):
            continue
        try:
            os.unlink(entry.path)
        except OSError:
            continue
        removed.append(Path(entry.path))
    return removed


def write_text_atomic(path: str | os.PathLike, text: str) -> Path:
    """Write ``text`` as UTF-8 (newlines as given) atomically; returns the path."""
    return _write_atomic(path, "w", lambda fh: fh.write(text))


def write_bytes_atomic(path: str | os.PathLike, data: bytes) -> Path:
    """Write ``data`` atomically; returns the path."""
    return _write_atomic(path, "wb", lambda fh: fh.write(data))


def _plain(obj: Any) -> Any:
    """JSON-ready copy: numpy scalars and arrays become lists and numbers, non-finite floats None."""
    if isinstance(obj, dict):
        return {str(k): _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return _plain(obj.tolist())
    if isinstance(obj, (np.bool_, bool)):
        return bool(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, (np.floating, float)):
        value = float(obj)
        return value if math.isfinite(value) else None
    if isinstance(obj, (complex, np.complexfloating)):
        return {"re": _plain(obj.real), "im": _plain(obj.imag)}
    if isinstance(obj, os.PathLike):
        return os.fspath(obj)
    return obj


def write_json_atomic(path: str | os.PathLike, obj: Any) -> Path:
    """Write ``obj`` as indented, strict JSON atomically.

    numpy values are converted; ``inf`` and ``nan`` (e.g. the return loss of a perfect match)
    are written as ``null`` so that any JSON reader accepts the file.
    """
    text = json.dumps(_plain(obj), indent=2, ensure_ascii=False, allow_nan=False) + "\n"
    return write_text_atomic(path, text)


def save_figure_atomic(fig: Any, path: str | os.PathLike, **savefig_kwargs: Any) -> Path:
    """Save a matplotlib figure atomically; the format follows the extension of ``path``."""
    p = Path(path)
    fmt = p.suffix.lstrip(".").lower() or "png"
    return _write_atomic(p, "wb", lambda fh: fig.savefig(fh, format=fmt, **savefig_kwargs), suffix=f".{fmt}")
