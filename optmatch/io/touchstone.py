"""Touchstone files through scikit-rf: read a measured 1-port load, write 1- and 2-port results."""

from __future__ import annotations

import os
import re
import tempfile
import warnings
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from optmatch.domain.loads import LoadError, TabulatedLoad


class TouchstoneError(ValueError):
    """A Touchstone file is missing, unreadable or of the wrong kind (one-line message)."""


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return text[0] if text and text[0] else type(exc).__name__


def read_one_port(path: str | os.PathLike) -> TabulatedLoad:
    """Read a 1-port Touchstone file (.s1p) as a :class:`TabulatedLoad` (Γ against a real Z).

    Data whose reference impedance varies with frequency or is complex is renormalised to
    50 Ω first.  Raises :class:`TouchstoneError` naming the file and the problem.
    """
    import skrf  # heavy import, only when a file is actually read

    p = Path(path)
    name = str(path)
    if not p.exists():
        raise TouchstoneError(f"{name}: file not found")
    if not p.is_file():
        raise TouchstoneError(f"{name}: not a file")
    if not re.fullmatch(r"\.(s\d+p|ts)", p.suffix.lower()):
        raise TouchstoneError(f"{name}: not a Touchstone file name (expected the extension .s1p or .ts)")
    if p.stat().st_size == 0:
        raise TouchstoneError(f"{name}: file is empty")
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ntwk = skrf.Network(str(p))
    except Exception as exc:  # scikit-rf raises many kinds; all mean "cannot read this file"
        raise TouchstoneError(f"{name}: not a readable Touchstone file ({_first_line(exc)})") from None
    if ntwk.nports != 1:
        raise TouchstoneError(f"{name}: has {ntwk.nports} ports, expected a 1-port (.s1p) load")
    freq = np.asarray(ntwk.f, dtype=float)
    if freq.size == 0:
        raise TouchstoneError(f"{name}: contains no data points")
    z0 = np.asarray(ntwk.z0[:, 0])
    if np.all(z0 == z0[0]) and z0[0].imag == 0.0 and z0[0].real > 0.0:
        z_ref = float(z0[0].real)
    else:
        z_ref = 50.0
        ntwk = ntwk.copy()
        ntwk.renormalize(z_ref)
    try:
        return TabulatedLoad(freq, ntwk.s[:, 0, 0], z_ref, source=name)
    except LoadError as exc:
        raise TouchstoneError(str(exc)) from None


def write_touchstone(
    path: str | os.PathLike,
    freq_hz: np.ndarray,
    s: np.ndarray,
    z0_ohm: float = 50.0,
    comment_lines: Sequence[str] = (),
) -> Path:
    """Write a 1-port (.s1p) or 2-port (.s2p) Touchstone file atomically; returns the path.

    freq_hz: (F,) Hz.  s: (F,) or (F, 1, 1) for a 1-port, (F, 2, 2) for a 2-port, against the
    real reference ``z0_ohm``.  ``comment_lines`` go into the header as ``! ...`` lines
    (Touchstone is ASCII: other characters become ``?``).
    The file is written to a temporary file in the same folder and moved into place.
    """
    import skrf

    p = Path(path)
    name = str(path)
    f = np.asarray(freq_hz, dtype=float)
    data = np.asarray(s, dtype=complex)
    if data.ndim == 1:
        data = data.reshape(-1, 1, 1)
    if f.ndim != 1 or data.ndim != 3 or data.shape[0] != f.size or data.shape[1] != data.shape[2]:
        raise TouchstoneError(f"{name}: S-parameters of shape {np.shape(s)} do not fit {f.size} frequencies")
    nports = data.shape[1]
    if nports not in (1, 2):
        raise TouchstoneError(f"{name}: only 1-port and 2-port networks are written (got {nports} ports)")
    if p.suffix.lower() != f".s{nports}p":
        raise TouchstoneError(f"{name}: a {nports}-port network needs the extension .s{nports}p")
    if not (np.isfinite(z0_ohm) and z0_ohm > 0):
        raise TouchstoneError(f"{name}: reference impedance must be positive (got {z0_ohm!r} Ω)")
    lines = [part for line in comment_lines for part in str(line).splitlines()]
    ntwk = skrf.Network(
        frequency=skrf.Frequency.from_f(f, unit="Hz"),
        s=data,
        z0=float(z0_ohm),
        comments="\n".join(" " + line.lstrip("!").strip() for line in lines) if lines else None,
    )
    ntwk.name = p.stem
    text = ntwk.write_touchstone(return_string=True, skrf_comment=False, form="ri")
    folder = p.parent if str(p.parent) else Path(".")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise TouchstoneError(f"{name}: cannot write here ({exc.strerror or _first_line(exc)})") from None
    try:
        with os.fdopen(fd, "w", encoding="ascii", errors="replace", newline="\n") as fh:
            fh.write(text)
        os.chmod(tmp, 0o644)  # mkstemp makes it private; a result file is an ordinary file
        os.replace(tmp, p)
    except OSError as exc:
        Path(tmp).unlink(missing_ok=True)
        raise TouchstoneError(f"{name}: cannot write ({exc.strerror or _first_line(exc)})") from None
    return p
