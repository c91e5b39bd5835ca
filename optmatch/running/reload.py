"""A results folder's study, loaded again from its study file: what ``optmatch trim`` and the explorer
rebuild a design from.

From the typed summary document (never by parsing summary.json by hand): the study file (``file``), its
``inputs_digest``, and each design's ``alternative``, ``choice`` and ``u``.  The study is loaded again
with the same safe loader as ``run`` (YAML data only, never code) and must still have the same digest.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from optmatch.domain.design import Design
from optmatch.domain.network import Choice
from optmatch.errors import OptmatchError
from optmatch.outputs.document import DesignDoc, SummaryDoc, read_summary
from optmatch.studyfile.loader import IN_MEMORY_FILE, Study, load_study

MAX_SUMMARY_BYTES = 256 * 2**20


class ReloadError(OptmatchError):
    """A results folder whose study cannot be loaded again as it was run (one line)."""


def read_folder(folder: Path) -> SummaryDoc:
    """The summary document of a study's results folder."""
    summary = folder / "summary.json"
    if not folder.is_dir():
        raise ReloadError(f"{folder}: not a folder")
    if not summary.is_file():
        raise ReloadError(f"{folder}: no summary.json here (not a study's results folder, or its run has not "
                          "finished)")
    if summary.stat().st_size > MAX_SUMMARY_BYTES:
        raise ReloadError(f"{summary}: larger than {MAX_SUMMARY_BYTES // 2**20} MiB; not a study summary")
    return read_summary(summary)


def study_file(folder: Path, doc: SummaryDoc) -> Path:
    """The study file a summary names: as written, or relative to the folder the study ran from
    (``results/<name>/`` inside it)."""
    path = Path(doc.file)
    if path.name == IN_MEMORY_FILE:
        raise ReloadError(f"{folder / 'summary.json'}: file: this study was built in Python (optmatch.study), so "
                          "there is no study file to rebuild its designs from; write the study as a YAML file and "
                          "run that one to trim or tune it later")
    if not path.is_absolute() and not path.is_file():
        beside = folder.resolve().parent.parent / path
        path = beside if beside.is_file() else path
    if not path.is_file():
        raise ReloadError(f"{folder / 'summary.json'}: file: the study file {doc.file} is not found (run this from "
                          "the folder the study was run from)")
    return path


def reload_study(folder: Path, doc: SummaryDoc) -> Study:
    """The study of a results folder, loaded again; refused when its inputs changed since the run."""
    path = study_file(folder, doc)
    study = load_study(path)
    if study.digest != doc.inputs_digest:
        raise ReloadError(f"{path}: the study file (or its load or catalog) changed since the run that wrote "
                          f"{folder / 'summary.json'}; run the study again")
    return study


def design_of(study: Study, entry: DesignDoc, where: str) -> tuple[Study, Design]:
    """The study of the network a design belongs to (its alternative's) and the design, with its margin and
    length computed again by the engine; ``where`` names the entry in messages (e.g. ``.../summary.json:
    designs[0]``)."""
    try:
        sub = study.alternative(entry.alternative)
    except KeyError:
        raise ReloadError(f"{where}.alternative: {entry.alternative!r} is not an alternative of "
                          f"{study.path}") from None
    medium, short, u = list(entry.choice.medium), list(entry.choice.short), list(entry.u)
    if not all(math.isfinite(v) for v in u):
        raise ReloadError(f"{where}.u: holds a value that is not finite")
    net = sub.problem.network
    if len(medium) != len(net.elements) or len(short) != len(net.elements) or len(u) != net.dim:
        raise ReloadError(f"{where}: does not fit the network of {study.path}")
    if any(not 0 <= m < len(el.media) for m, el in zip(medium, net.elements, strict=True)):
        raise ReloadError(f"{where}.choice.medium: names a cable option the network does not have")
    choice = Choice(tuple(medium), tuple(short))
    vec = np.array([u], dtype=float)
    margin = float(sub.problem.margins(vec, choice)[0])
    length = float(sub.problem.length_wl(vec, choice)[0])
    return sub, Design(choice, tuple(float(v) for v in u), margin, length, entry.trial)


__all__ = ["ReloadError", "design_of", "read_folder", "reload_study", "study_file"]
