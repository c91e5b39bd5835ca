"""optmatch from Python: build a study from a dict (the study file's keys) or from typed objects,
with loads given as scikit-rf Networks or arrays; run it; get designs back as scikit-rf Networks.

    import optmatch, skrf
    whip = skrf.Network("configs/data/whip_parked_invented.s1p")
    study = optmatch.study({"name": "whip", "mask": {...}, "network": {...}}, loads={"parked": whip})
    result = optmatch.run(study)                  # a temporary results folder; or out="results"
    best = result.best
    best.margin_db, best.load_margins, best.lengths, best.cut_list
    best.network()                                # 2-port scikit-rf Network, port 1 to the source
    best.matched()                                # 1-port: the matched input (name the load when several)

The dict is exactly what a study file holds (units written as in the file: ``"420MHz"``, ``"90deg"``),
and it is checked by the same loader: bad input raises
:class:`~optmatch.studyfile.loader.StudyFileError` (an :class:`~optmatch.errors.OptmatchError`)
whose lines read ``study: key.path: problem``, as ``optmatch check`` prints them without the line
number.  Typed objects (:class:`Segment`, :class:`Line`, :class:`ShuntStub`, :class:`SeriesStub`)
take SI numbers (Hz, dB, degrees, Ω) and become those same keys.

This module sits at the edge, beside the command line: it imports scikit-rf and the search only
when they are used.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

import numpy as np

from optmatch.domain.design import Design, ElementReport
from optmatch.domain.loads import LoadError, TabulatedLoad
from optmatch.domain.network import Choice
from optmatch.errors import OptmatchError
from optmatch.studyfile.loader import IN_MEMORY_FILE, Study, StudyFileError, load_study, study_from_data

if TYPE_CHECKING:  # pragma: no cover - types only
    import skrf

    from optmatch.outputs.document import BuildSheet, DesignDoc, SummaryDoc

SHOWN = "study"  # how messages name a study given as data
MEMORY_PREFIX = "<given in Python: "


# ---------------------------------------------------------------- typed objects


def _num(x: float) -> str:
    return repr(float(x))


def _length(value: float | tuple[float, float]) -> str | dict:
    """Degrees (at the reference frequency): fixed, or a (min, max) range."""
    if isinstance(value, tuple | list):
        lo, hi = value
        return {"min": f"{_num(lo)}deg", "max": f"{_num(hi)}deg"}
    return f"{_num(value)}deg"


@dataclass(frozen=True)
class Segment:
    """One mask segment: ``from_hz`` to ``to_hz`` (Hz) with at least ``return_loss_db`` (dB) of
    return loss, or at most ``vswr``; ``points`` on the grid (default: the mask's)."""

    from_hz: float
    to_hz: float
    return_loss_db: float | None = None
    vswr: float | None = None
    points: int | None = None

    def to_dict(self) -> dict:
        out: dict[str, Any] = {"from": f"{_num(self.from_hz)}Hz", "to": f"{_num(self.to_hz)}Hz"}
        if self.return_loss_db is not None:
            out["return_loss"] = float(self.return_loss_db)
        if self.vswr is not None:
            out["vswr"] = float(self.vswr)
        if self.points is not None:
            out["points"] = int(self.points)
        return out


@dataclass(frozen=True)
class Line:
    """A series line: ``length_deg`` (degrees at the reference frequency, fixed or (min, max)),
    ``z0_ohm`` (default: the system impedance), velocity factor ``vf``."""

    length_deg: float | tuple[float, float]
    z0_ohm: float | None = None
    vf: float = 1.0

    def to_dict(self) -> dict:
        body: dict[str, Any] = {"length": _length(self.length_deg), "vf": float(self.vf)}
        if self.z0_ohm is not None:
            body["z0"] = float(self.z0_ohm)
        return {"line": body}


@dataclass(frozen=True)
class ShuntStub:
    """A stub in shunt: ``length_deg`` (fixed or (min, max)), ``end`` open, short or either."""

    length_deg: float | tuple[float, float]
    end: Literal["open", "short", "either"] = "either"
    z0_ohm: float | None = None
    vf: float = 1.0
    kind = "shunt_stub"

    def to_dict(self) -> dict:
        body: dict[str, Any] = {"length": _length(self.length_deg), "end": self.end, "vf": float(self.vf)}
        if self.z0_ohm is not None:
            body["z0"] = float(self.z0_ohm)
        return {self.kind: body}


@dataclass(frozen=True)
class SeriesStub(ShuntStub):
    """A stub in series (the same keys as :class:`ShuntStub`)."""

    kind = "series_stub"


@dataclass(frozen=True)
class Load:
    """A measured (or computed) load given in Python: reflection ``gamma`` against the real
    ``z_ref_ohm`` at ``freq_hz``, with a ``weight`` for the share objective.  Make one with
    :meth:`network`, :meth:`impedance` or :meth:`reflection`."""

    freq_hz: np.ndarray
    gamma: np.ndarray
    z_ref_ohm: float = 50.0
    weight: float = 1.0
    what: str = "data"

    @classmethod
    def network(cls, ntw: skrf.Network, weight: float = 1.0) -> Load:
        """A 1-port scikit-rf Network (its port impedance must be real and the same at every frequency)."""
        if getattr(ntw, "nports", None) != 1:
            raise LoadError(f"a load is a 1-port Network; this one has {getattr(ntw, 'nports', '?')} ports")
        z0 = np.asarray(ntw.z0)[:, 0]
        if np.any(np.abs(z0.imag) > 1e-9 * np.abs(z0.real)) or np.ptp(z0.real) > 1e-9 * np.max(z0.real):
            raise LoadError("a load Network needs one real port impedance at every frequency")
        return cls(np.asarray(ntw.f, dtype=float), np.asarray(ntw.s[:, 0, 0]), float(z0.real[0]), weight,
                   "scikit-rf Network")

    @classmethod
    def impedance(cls, freq_hz: np.ndarray, z_ohm: np.ndarray, weight: float = 1.0) -> Load:
        """Impedances ``z_ohm`` (Ω) at ``freq_hz`` (Hz)."""
        tab = TabulatedLoad.from_impedance(freq_hz, z_ohm)
        return cls(tab.freq_hz, tab.gamma, tab.z_ref_ohm, weight, "impedances (Ω)")

    @classmethod
    def reflection(cls, freq_hz: np.ndarray, gamma: np.ndarray, z_ref_ohm: float = 50.0, weight: float = 1.0) -> Load:
        """Reflection coefficients ``gamma`` against ``z_ref_ohm`` (Ω) at ``freq_hz`` (Hz)."""
        return cls(np.asarray(freq_hz, dtype=float), np.asarray(gamma, dtype=complex), float(z_ref_ohm), weight,
                   "reflection coefficients")

    def tabulated(self, name: str) -> TabulatedLoad:
        return TabulatedLoad(self.freq_hz, self.gamma, self.z_ref_ohm, source=f"{name} ({self.what} given in Python)")


LoadLike = Any  # a Load, a 1-port skrf.Network, or {"freq_hz": ..., "z_ohm": ...} / {"freq_hz": ..., "gamma": ...}


def _as_load(value: LoadLike) -> Load:
    if isinstance(value, Load):
        return value
    if hasattr(value, "s") and hasattr(value, "f") and hasattr(value, "nports"):
        return Load.network(value)
    if isinstance(value, Mapping):
        keys = set(value)
        weight = float(value.get("weight", 1.0))
        if keys <= {"freq_hz", "z_ohm", "weight"} and {"freq_hz", "z_ohm"} <= keys:
            return Load.impedance(value["freq_hz"], value["z_ohm"], weight)
        if keys <= {"freq_hz", "gamma", "z_ref_ohm", "weight"} and {"freq_hz", "gamma"} <= keys:
            return Load.reflection(value["freq_hz"], value["gamma"], value.get("z_ref_ohm", 50.0), weight)
    raise LoadError("give a 1-port scikit-rf Network, optmatch.Load.impedance(freq_hz, z_ohm), "
                    "optmatch.Load.reflection(freq_hz, gamma), or {'freq_hz': ..., 'z_ohm': ...} "
                    "(arrays alone do not say whether they hold impedances or reflections)")


def _plain(value: Any) -> Any:
    """Typed objects (anything with ``to_dict``) as plain data, recursively."""
    if hasattr(value, "to_dict"):
        return _plain(value.to_dict())
    if isinstance(value, Mapping):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    return value


# ---------------------------------------------------------------- a study


def study(spec: Mapping | str | os.PathLike | None = None, /, *, loads: Mapping[str, LoadLike] | None = None,
          base_dir: str | os.PathLike = ".", **sections: Any) -> Study:
    """A checked study, from a study file's path, or from ``spec`` (a dict of the study file's keys)
    and/or keyword ``sections`` (``name=``, ``mask=``, ``network=``, ``search=``, ...).

    ``mask`` may be a list of :class:`Segment`, ``network`` a list of :class:`Line`,
    :class:`ShuntStub` and :class:`SeriesStub` (load outwards); ``loads`` maps names to loads given
    in Python (1-port scikit-rf Networks, :class:`Load`, or dicts of arrays), added to the study's
    ``loads:`` list in that order.  Files the study names are relative to ``base_dir``.

    Raises :class:`~optmatch.studyfile.loader.StudyFileError` listing every problem, one per line,
    as ``study: key.path: problem``.
    """
    if isinstance(spec, str | os.PathLike) and not sections and not loads:
        return load_study(spec)
    if isinstance(spec, str | os.PathLike):
        raise StudyFileError([f"{spec}: give a study file alone, or a dict with loads= and sections"])
    raw: dict[str, Any] = dict(_plain(dict(spec or {})))
    for key, value in sections.items():
        if key == "mask" and isinstance(value, list | tuple):
            value = {"segments": value}
        elif key == "network" and isinstance(value, list | tuple):
            value = {"elements": value}
        raw[key] = _plain(value)
    given: dict[str, TabulatedLoad] = {}
    problems: list[str] = []
    if loads:
        entries = list(raw.get("loads") or []) if isinstance(raw.get("loads"), list) else []
        if "loads" in raw and not isinstance(raw.get("loads"), list):
            problems.append(f"{SHOWN}: loads: expected a list (the loads given with loads= are added to it)")
        for name, value in loads.items():
            key = f"{MEMORY_PREFIX}{name}>"
            try:
                load = _as_load(value)
                given[key] = load.tabulated(str(name))
            except OptmatchError as exc:
                problems.append(f"{SHOWN}: loads.{name}: {exc}")
                continue
            entry: dict[str, Any] = {"name": name, "touchstone": key}
            if load.weight != 1.0:
                entry["weight"] = load.weight
            entries.append(entry)
        raw["loads"] = entries
    if problems:
        raise StudyFileError(problems)
    return study_from_data(raw, Path(base_dir) / IN_MEMORY_FILE, shown=SHOWN, given=given)


# ---------------------------------------------------------------- running it


def run(target: Study | Mapping | str | os.PathLike, out: str | os.PathLike | None = None,
        storage: str | None = None, progress: Callable[[int, int, float | None], None] | None = None,
        **kwargs: Any) -> Result:
    """Run (or resume) a study and return its :class:`Result`.

    ``target``: a :class:`~optmatch.studyfile.loader.Study` (see :func:`study`), or what
    :func:`study` takes (then ``kwargs`` go to it).  ``out``: the results root (the results go to
    ``out/<name>/``); None runs in a temporary folder, removed when the result is discarded (or by
    :meth:`Result.cleanup`).  ``storage``: an optuna storage URL (default: a journal file in the
    results folder).  ``progress(done, total, best)`` is called after every trial.
    """
    from optmatch.running.pipeline import run_study

    st = target if isinstance(target, Study) else study(target, **kwargs)
    tmp: tempfile.TemporaryDirectory[str] | None = None
    if out is None:
        tmp = tempfile.TemporaryDirectory(prefix="optmatch-")
        root = Path(tmp.name)
    else:
        root = Path(out)
    folder, doc = run_study(st, root, storage, progress_fn=progress)
    return Result(study=st, folder=folder, summary=doc, _tmp=tmp)


@dataclass
class Result:
    """A finished study: its ``summary`` (the typed document written as summary.json), the results
    ``folder``, and its ranked :attr:`designs`."""

    study: Study
    folder: Path
    summary: SummaryDoc
    _tmp: Any = field(default=None, repr=False)

    @property
    def designs(self) -> list[DesignResult]:
        """The ranked designs, best first."""
        return [DesignResult(self, d) for d in self.summary.designs]

    @property
    def best(self) -> DesignResult | None:
        """The best design (None when the search found none)."""
        return DesignResult(self, self.summary.designs[0]) if self.summary.designs else None

    @property
    def verdict(self) -> str:
        """PASS, FAIL or FAIL rating, and :attr:`verdict_line` says why in one line."""
        return self.summary.verdict

    @property
    def verdict_line(self) -> str:
        return self.summary.verdict_line

    @property
    def load_names(self) -> tuple[str, ...]:
        return self.study.problem.names

    def cleanup(self) -> None:
        """Remove the temporary results folder now (a run with ``out=None``)."""
        if self._tmp is not None:
            self._tmp.cleanup()
            self._tmp = None


@dataclass(frozen=True)
class DesignResult:
    """One ranked design of a :class:`Result`: its figures, its elements and pieces, and itself as
    scikit-rf Networks."""

    result: Result = field(repr=False)
    doc: DesignDoc

    @property
    def rank(self) -> int:
        return self.doc.rank

    @property
    def verdict(self) -> str:
        return self.doc.verdict

    @property
    def margin_db(self) -> float:
        """Margin against the mask (dB; the worst over every load)."""
        return self.doc.margin_db

    @property
    def load_margins(self) -> dict[str, float]:
        """Margin (dB) on each load by name (one load: ``{"load": margin}``)."""
        if self.doc.load_margins:
            return {lm.load: lm.margin_db for lm in self.doc.load_margins}
        return {self.result.study.problem.names[0]: self.doc.margin_db}

    @property
    def share(self) -> float:
        """Weighted share of the loads whose mask it meets (one load: 1 or 0)."""
        if self.doc.share is not None:
            return self.doc.share
        return 1.0 if self.doc.margin_db >= 0.0 else 0.0

    @property
    def yield_frac(self) -> float | None:
        """Share of simulated builds (× loads) that meet the mask."""
        return None if self.doc.robustness is None else self.doc.robustness.yield_frac

    @property
    def total_length_wl(self) -> float:
        return self.doc.total_length_wl

    @property
    def elements(self) -> tuple[ElementReport, ...]:
        """Every element, load outwards, with its electrical and physical length, Z0, end or value."""
        return self.doc.elements

    @property
    def lengths(self) -> list[dict[str, Any]]:
        """Every line and stub, load outwards: ``element`` (1-based), ``kind``, ``end``, ``z0_ohm``,
        ``electrical_deg`` (with allowances, at the reference frequency) and ``mm`` of cable."""
        return [{"element": e.index + 1, "kind": e.kind, "end": e.end, "z0_ohm": e.z0_ohm,
                 "electrical_deg": e.electrical_deg, "mm": None if e.physical_m is None else e.physical_m * 1e3}
                for e in self.doc.elements if e.kind != "lumped"]

    @property
    def cut_list(self) -> BuildSheet:
        """The build sheet: every piece in mm of its cable, and the assembly from load to source."""
        summary = self.result.summary
        if summary.build is not None and summary.build.design_rank == self.rank:
            return summary.build
        from optmatch.running.build import build_sheet

        return build_sheet(self.result.study, self.design, self.doc.elements, rank=self.rank)

    @property
    def design(self) -> Design:
        """The design in the domain's terms (choice and unit vector)."""
        return Design(Choice(tuple(self.doc.choice.medium), tuple(self.doc.choice.short)), tuple(self.doc.u),
                      self.doc.margin_db, self.doc.total_length_wl, self.doc.trial)

    def _frequency(self) -> skrf.Frequency:
        import skrf

        return skrf.Frequency.from_f(self.result.study.problem.grid.freq, unit="Hz")

    def network(self) -> skrf.Network:
        """The matching network alone as a 2-port scikit-rf Network on the mask's grid: port 1 to
        the source, port 2 to the load, both referenced to the system impedance."""
        import skrf

        from optmatch.outputs.network_export import network_sparams

        problem = self.result.study.problem
        return skrf.Network(frequency=self._frequency(), s=network_sparams(problem, self.design),
                            z0=problem.z_sys, name=f"{problem.name} design {self.rank}")

    def load_network(self, load: str | int | None = None) -> skrf.Network:
        """The study's load (by name or index when there are several) as a 1-port Network on the
        grid, referenced to the system impedance."""
        import skrf

        problem = self.result.study.problem
        k = problem.load_index(load)
        z = problem.zloads[k]
        with np.errstate(divide="ignore", invalid="ignore"):
            gamma = np.where(np.isinf(z), 1.0 + 0j, (z - problem.z_sys) / (z + problem.z_sys))
        return skrf.Network(frequency=self._frequency(), s=gamma.reshape(-1, 1, 1), z0=problem.z_sys,
                            name=problem.names[k])

    def matched(self, load: str | int | None = None) -> skrf.Network:
        """The matched input as a 1-port Network: :meth:`network` cascaded by scikit-rf onto the load
        (by name or index when there are several)."""
        ntw = self.network() ** self.load_network(load)
        ntw.name = f"{self.result.study.problem.name} design {self.rank} on {self.load_network(load).name}"
        return ntw


__all__ = ["DesignResult", "Line", "Load", "Result", "Segment", "SeriesStub", "ShuntStub", "run", "study"]
