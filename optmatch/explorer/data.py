"""What the explorer shows, read from a results folder through the typed summary document only.

The root is one study's results folder (it holds ``summary.json``) or a batch's results root (study
folders, and ``batch.json`` when a batch wrote it).  Studies are found as the batch report finds them
(``outputs/report.collect_rows``).  A study is opened by name: its folder must be one of those found and
lie inside the root.  Tuning needs the study itself, loaded again from its study file with the safe loader
and checked against the summary's ``inputs_digest`` (``running/reload.py``); that happens on first use, and
a study that cannot be loaded is still shown, read-only, with the reason.
"""

from __future__ import annotations

import math
import threading
from dataclasses import dataclass, field
from pathlib import Path

from optmatch.domain.design import Design
from optmatch.errors import OptmatchError
from optmatch.io.paths import child_path
from optmatch.outputs.document import DesignDoc, SummaryDoc, read_summary
from optmatch.outputs.report import collect_rows
from optmatch.running.reload import design_of, reload_study
from optmatch.studyfile.loader import Study

DASH = "–"


@dataclass(frozen=True)
class Entry:
    """One study of the root: its name, folder, status and summary (None when not finished or unreadable)."""

    name: str
    folder: Path | None
    status: str
    message: str
    summary: SummaryDoc | None


def ceiling_db(doc: SummaryDoc | None) -> float | None:
    """The Bode–Fano ceiling a summary's ``feasibility`` gives, where it gives one (dB)."""
    feas = doc.feasibility if doc is not None else None
    if not isinstance(feas, dict):
        return None
    for key, value in feas.items():
        if "ceiling" in str(key) and isinstance(value, (int, float)) and math.isfinite(value):
            return float(value)
    return None


def best_yield(doc: SummaryDoc | None) -> float | None:
    best = doc.best if doc is not None else None
    return best.robustness.yield_frac if best is not None and best.robustness is not None else None


@dataclass
class Opened:
    """A study opened for tuning: its summary, and the study loaded again (or why it could not be)."""

    entry: Entry
    study: Study | None
    problem_text: str
    designs: dict[str, tuple[Study, Design, DesignDoc]] = field(default_factory=dict)


class Results:
    """The results root the explorer serves, with opened studies cached (thread-safe)."""

    def __init__(self, root: Path) -> None:
        self.root = Path(root).resolve()
        self._lock = threading.Lock()
        self._opened: dict[str, Opened] = {}

    @property
    def single(self) -> bool:
        """Whether the root is one study's results folder."""
        return (self.root / "summary.json").is_file()

    def entries(self) -> list[Entry]:
        """Every study of the root, in the batch's order then by folder name."""
        if self.single:
            try:
                doc = read_summary(self.root / "summary.json")
            except OptmatchError as exc:
                return [Entry(self.root.name, self.root, "error", str(exc), None)]
            return [Entry(doc.study, self.root, "done", "", doc)]
        rows, _ = collect_rows(self.root)
        out = []
        for r in rows:
            try:
                folder: Path | None = child_path(self.root, r.name)
            except OptmatchError:
                folder = None
            out.append(Entry(r.name, folder, r.status, r.message, r.summary if folder is not None else None))
        return out

    def entry(self, name: str) -> Entry | None:
        """The finished study called ``name``: the root itself (one study), or a folder of the root that holds
        a ``summary.json`` (never a path: ``name`` must be one folder name that resolves inside the root)."""
        if self.single:
            found = self.entries()[0]
            return found if found.name == name else None
        try:
            folder = child_path(self.root, name)
        except OptmatchError:
            return None
        if not (folder / "summary.json").is_file():
            return None
        try:
            return Entry(name, folder, "done", "", read_summary(folder / "summary.json"))
        except OptmatchError as exc:
            return Entry(name, folder, "error", str(exc), None)

    def open(self, name: str) -> Opened | None:
        """The study ``name`` with its summary read afresh and its study file loaded again (cached)."""
        entry = self.entry(name)
        if entry is None or entry.summary is None or entry.folder is None:
            return None
        with self._lock:
            have = self._opened.get(name)
            if have is not None and have.entry.summary is not None and \
                    have.entry.summary.inputs_digest == entry.summary.inputs_digest:
                have.entry = entry
                return have
            try:
                study, why = reload_study(entry.folder, entry.summary), ""
            except OptmatchError as exc:
                study, why = None, str(exc)
            opened = Opened(entry, study, why)
            self._opened[name] = opened
            return opened

    def design(self, opened: Opened, key: str) -> tuple[Study, Design, DesignDoc] | None:
        """A design of an opened study by key (``#3`` for rank 3, or a variant's name), rebuilt for tuning."""
        if opened.study is None or opened.entry.summary is None or opened.entry.folder is None:
            return None
        with self._lock:
            if key in opened.designs:
                return opened.designs[key]
            found = design_entry(opened.entry.summary, key)
            if found is None:
                return None
            doc, where = found
            try:
                sub, design = design_of(opened.study, doc, f"{opened.entry.folder / 'summary.json'}: {where}")
            except OptmatchError:
                return None
            opened.designs[key] = (sub, design, doc)
            return opened.designs[key]


def design_key(doc: DesignDoc, variant: str = "") -> str:
    return variant or f"#{doc.rank}"


def design_entry(summary: SummaryDoc, key: str) -> tuple[DesignDoc, str] | None:
    """The design a key names in a summary, and where it is (for messages)."""
    if key.startswith("#") and key[1:].isdigit():
        k = int(key[1:])
        return (summary.designs[k - 1], f"designs[{k - 1}]") if 1 <= k <= len(summary.designs) else None
    for j, v in enumerate(summary.variants):
        if v.name == key:
            return v.design, f"variants[{j}].design"
    return None


def all_designs(summary: SummaryDoc) -> list[tuple[str, str, DesignDoc]]:
    """(key, label, design) of every ranked design, then every kept variant."""
    out = [(f"#{d.rank}", f"#{d.rank}" + (f" {d.alternative}" if d.alternative else ""), d) for d in summary.designs]
    out += [(v.name, f"{v.name} (from #{v.based_on})", v.design) for v in summary.variants]
    return out


__all__ = ["DASH", "Entry", "Opened", "Results", "all_designs", "best_yield", "ceiling_db", "design_entry",
           "design_key"]
