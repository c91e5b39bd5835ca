"""Touchstone files through scikit-rf: read a measured 1-port load, write 1- and 2-port results."""

from __future__ import annotations

import math
import os
import re
import tempfile
import warnings
from collections.abc import Sequence
from pathlib import Path

import numpy as np

from optmatch.domain.loads import LoadError, TabulatedLoad
from optmatch.errors import OptmatchError
from optmatch.units import format_hz


class TouchstoneError(OptmatchError, ValueError):
    """A Touchstone file is missing, unreadable or of the wrong kind (one-line message naming the file)."""


MAX_BYTES = 32 << 20  # a 1-port file of a million points is about 40 bytes a line
PASSIVE_SLACK = 1e-9  # |S11| may exceed 1 by rounding of the written figures, no more


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return text[0] if text and text[0] else type(exc).__name__


def _option_line(text: str) -> tuple[str, float | None, bool]:
    """(parameter letter, reference resistance or None, version-2 file) from the header."""
    version2 = False
    for line in text.splitlines():
        body = line.split("!", 1)[0].strip()
        if not body:
            continue
        if body.lower().startswith("[version]"):
            version2 = True
            continue
        if body.startswith("#"):
            toks = body[1:].split()
            param, r = "s", None
            for k, tok in enumerate(toks):
                low = tok.lower()
                if low in ("s", "y", "z", "g", "h"):
                    param = low
                elif low == "r" and k + 1 < len(toks):
                    try:
                        r = float(toks[k + 1])
                    except ValueError:
                        r = math.nan
            return param, r, version2
        if not body.startswith("["):
            break  # data before any option line: the Touchstone defaults apply
    return "s", None, version2


def read_one_port(path: str | os.PathLike) -> TabulatedLoad:
    """Read a 1-port Touchstone file (.s1p) as a :class:`TabulatedLoad` (Γ against a real Z).

    S-, Z- and Y-format files are read.  Z data of a version-1 file is normalised to the option
    line's R (Z = value · R), and Y data likewise (Y = value / R), as the Touchstone format says.
    A reference resistance of zero or below, and an active load (|S11| > 1), are refused, naming
    the file and the first offending frequency.  Data whose reference impedance varies with
    frequency or is complex is renormalised to 50 Ω first.  Raises :class:`TouchstoneError`.
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
    size = p.stat().st_size
    if size == 0:
        raise TouchstoneError(f"{name}: file is empty")
    if size > MAX_BYTES:
        raise TouchstoneError(f"{name}: larger than {MAX_BYTES >> 20} MiB; refused")
    try:
        text = p.read_text(encoding="ascii")
    except UnicodeDecodeError:
        raise TouchstoneError(f"{name}: not a Touchstone file (it holds characters other than ASCII)") from None
    except OSError as exc:
        raise TouchstoneError(f"{name}: cannot read ({exc.strerror or _first_line(exc)})") from None
    param, r_opt, version2 = _option_line(text)
    if r_opt is not None and not (math.isfinite(r_opt) and r_opt > 0.0):
        raise TouchstoneError(f"{name}: the option line's reference resistance R {r_opt:g} must be a positive "
                              "number of ohms")
    try:
        with warnings.catch_warnings(), np.errstate(all="ignore"):
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
    bad_ref = ~np.isfinite(z0) | (z0.real <= 0.0)
    if np.any(bad_ref):
        k = int(np.argmax(bad_ref))
        raise TouchstoneError(f"{name}: reference impedance {z0[k]:g} Ω at {format_hz(freq[k])} must have a "
                              "positive real part")
    raw_s = np.asarray(ntwk.s[:, 0, 0], dtype=complex)
    bad = ~np.isfinite(raw_s)
    if np.any(bad):
        k = int(np.argmax(bad))
        raise TouchstoneError(f"{name}: the data at {format_hz(freq[k])} is not a finite reflection")
    with np.errstate(all="ignore"):
        if np.all(z0 == z0[0]) and z0[0].imag == 0.0:
            z_ref = float(z0[0].real)
            gamma = raw_s
            if param == "y" and not version2:
                # scikit-rf multiplies version-1 Y data by R (so Y·R = y·R², with y as written); the
                # format normalises Y to the reference admittance, Y = y / R, so Γ = (1 − y)/(1 + y).
                y_file = (1.0 - raw_s) / (1.0 + raw_s) / z_ref**2
                gamma = (1.0 - y_file) / (1.0 + y_file)
        else:
            z_ref = 50.0
            try:
                ntwk = ntwk.copy()
                ntwk.renormalize(z_ref)
            except (ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
                raise TouchstoneError(f"{name}: cannot renormalise the data to 50 Ω ({_first_line(exc)})") from None
            gamma = np.asarray(ntwk.s[:, 0, 0], dtype=complex)
    gamma = np.asarray(gamma, dtype=complex)
    bad = ~np.isfinite(gamma)
    if np.any(bad):
        k = int(np.argmax(bad))
        raise TouchstoneError(f"{name}: the data at {format_hz(freq[k])} is not a finite reflection")
    active = np.abs(gamma) > 1.0 + PASSIVE_SLACK
    if np.any(active):
        k = int(np.argmax(active))
        raise TouchstoneError(f"{name}: an active load, |S11| = {abs(gamma[k]):.4g} at {format_hz(freq[k])} "
                              "(a passive load reflects at most what it receives, |S11| <= 1)")
    try:
        return TabulatedLoad(freq, gamma, z_ref, source=name)
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
