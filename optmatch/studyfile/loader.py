"""Read a study file (YAML), validate it and resolve it into a :class:`~optmatch.domain.problem.Problem`.

Every problem found is collected and reported at once as a :class:`StudyFileError`, one line per
problem, each line ``file:line: key.path: problem`` with the YAML line of the key, e.g.
``configs/demo.yaml:14: mask.segments[0].from: 146 what? write 146MHz``.  Structure and units
(the schema), names of cables, allowances and templates, stock, referenced files (Touchstone,
catalog) and the bounds on work are all checked in one pass.

Units after resolution: Hz, Ω, s (delay), m (physical length), dB, seconds of wall time.
"""

from __future__ import annotations

import fnmatch
import hashlib
import json
import math
import os
import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from functools import partial
from pathlib import Path
from typing import Any, Literal, get_args

import numpy as np
from pydantic import BaseModel, TypeAdapter, ValidationError
from pydantic_core import ErrorDetails

from optmatch.domain import loads
from optmatch.domain.cables import Cable
from optmatch.domain.loads import TabulatedLoad
from optmatch.domain.mask import Grid, Segment, build_grid
from optmatch.domain.network import Bound, ElementSpec, LengthBasis, Medium, NetworkSpec
from optmatch.domain.problem import Problem
from optmatch.domain.templates import ROLES, STEPPED_Z0_OHM, LengthBound, build_template, role_of
from optmatch.domain.tolerance import Spread
from optmatch.errors import OptmatchError, did_you_mean, one_line
from optmatch.io.safe_yaml import Document, YamlError, read_yaml
from optmatch.io.touchstone import read_one_port
from optmatch.studyfile import limits
from optmatch.studyfile.schema import (
    BRANCH_MARK,
    ELEMENT_KINDS,
    SECTION_MODELS,
    Alternatives,
    Frequency,
    LengthRange,
    LineModel,
    LoadEntryModel,
    LoadModel,
    LumpedModel,
    MaskModel,
    NetworkModel,
    Ohms,
    PartValue,
    SearchModel,
    StubModel,
    StudyModel,
    ToleranceModel,
    Z0Range,
    _file_pattern,
    load_name_problem,
    study_name_problem,
)
from optmatch.studyfile.shelf import (
    ShelfContext,
    catalog_in_force,
    find_cables,
    lookup_cable,
    shelf_context,
    shelf_element,
    unknown_allowance,
    unknown_cable,
    uses_shelf,
)
from optmatch.units import MAX_DELAY_S, Length, format_hz


class StudyFileError(OptmatchError):
    """A study file with problems; ``problems`` holds one line each, each starting with the file path."""

    def __init__(self, problems: Iterable[str]) -> None:
        self.problems: list[str] = [one_line(p) for p in problems]
        super().__init__("\n".join(self.problems))

    def __str__(self) -> str:
        return "\n".join(self.problems or [])


@dataclass(frozen=True)
class SearchSettings:
    """Search effort: outer ``trials``, wall-time budget ``time_s`` (s, None = none), ``seed``,
    early-stop ``target_margin_db`` (dB, None = none), designs to ``keep``, inner ``population``
    and ``generations``, and the ``objective`` (``margin`` or ``pareto``)."""

    trials: int = 24
    time_s: float | None = None
    seed: int = 0
    target_margin_db: float | None = None
    keep: int = 5
    population: int = 64
    generations: int = 60
    objective: Literal["margin", "yield", "pareto"] = "margin"
    loads: Literal["worst", "share"] = "worst"


LoadFn = Callable[[np.ndarray], np.ndarray]


@dataclass(frozen=True)
class LoadSource:
    """One load of a study as resolved: its ``name``, ``weight``, where it came from (``text``, as
    the file gives it), its impedance as a function of frequency (``fn``: Hz -> Ω) and the range
    where that is known (``range_hz``; (0, inf) for a model), and its Touchstone ``path`` if any."""

    name: str
    weight: float
    text: str
    fn: LoadFn = field(repr=False)
    range_hz: tuple[float, float]
    path: Path | None = None


@dataclass(frozen=True)
class Study:
    """A validated study: the resolved ``problem``, the ``search`` settings, the parsed YAML
    (``raw``), a ``digest`` of the study's inputs, and its free-text ``description``."""

    path: Path
    problem: Problem
    search: SearchSettings
    raw: dict
    digest: str
    description: str = ""
    cables: dict[str, Cable] = field(default_factory=dict)  # catalog in force (shipped + the study's own)
    drive_w: float | None = None  # available source power for the power check (W)
    spread: Spread = Spread()  # build tolerances for the yield Monte Carlo
    notes: tuple[str, ...] = ()  # what the loader read into the file (e.g. a bare cable designation's class)
    loads: tuple[LoadSource, ...] = ()  # every load, in the problem's order (one for ``load:``)
    alternatives: tuple[Alternative, ...] = ()  # several named networks (then ``problem`` is the first one's)

    @property
    def trial_budget(self) -> int:
        """Trials the whole study runs: ``search.trials`` for each of its networks."""
        return self.search.trials * max(1, len(self.alternatives))

    def alternative(self, name: str) -> Study:
        """The study of alternative ``name`` (this study itself for ``""`` when it has one network)."""
        if not name and not self.alternatives:
            return self
        for alt in self.alternatives:
            if alt.name == name:
                return alt.study
        raise KeyError(name)


@dataclass(frozen=True)
class Alternative:
    """One named network of a study with ``alternatives:``: a whole study of its own, as if the file gave
    that network under ``network:`` (same name, load, mask, search and shelf)."""

    name: str
    study: Study


# ---------------------------------------------------------------- YAML


def _read_yaml(path: Path, shown: str) -> Document:
    try:
        doc = read_yaml(path, shown)
    except YamlError as exc:
        raise StudyFileError(exc.problems or [str(exc)]) from None
    if doc.data is None:
        raise StudyFileError([f"{shown}: file is empty"])
    if not isinstance(doc.data, dict):
        raise StudyFileError([f"{shown}: expected keys (name, load, mask, network, ...) at the top level, "
                              f"found a {type(doc.data).__name__}"])
    return doc


# ---------------------------------------------------------------- pydantic errors


def key_path(loc: Iterable[Any]) -> str:
    """``('mask', 'segments', 0, 'from')`` -> ``mask.segments[0].from`` (union branch tags dropped)."""
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        elif isinstance(part, str) and part.startswith(BRANCH_MARK):
            continue
        else:
            out += f".{part}" if out else str(part)
    return out


def _short(value: Any, limit: int = 60) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _models_in(tp: Any) -> list[type[BaseModel]]:
    """Pydantic models named anywhere in a type annotation (through Optional, Union, list, Annotated)."""
    if isinstance(tp, type) and issubclass(tp, BaseModel):
        return [tp]
    out: list[type[BaseModel]] = []
    for arg in get_args(tp):
        out.extend(_models_in(arg))
    return out


def _allowed_keys(loc: tuple) -> list[str]:
    """Keys accepted at the mapping holding the last part of ``loc`` (empty if unknown)."""
    cls: type[BaseModel] | None = StudyModel
    for part in loc[:-1]:
        if cls is None:
            return []
        if not isinstance(part, str) or part.startswith(BRANCH_MARK):
            continue
        field = next((f for n, f in cls.model_fields.items() if (f.alias or n) == part), None)
        models = _models_in(field.annotation) if field is not None else []
        cls = models[0] if models else None
    if cls is None:
        return []
    return [f.alias or n for n, f in cls.model_fields.items()]


def _message(err: ErrorDetails) -> str:
    kind = err["type"]
    ctx = err.get("ctx") or {}
    given = err.get("input")
    if kind == "value_error" and "error" in ctx:
        return str(ctx["error"])
    if kind == "extra_forbidden":
        allowed = _allowed_keys(tuple(err["loc"]))
        key = err["loc"][-1] if err["loc"] else ""
        hint = did_you_mean(str(key), allowed, quote=True) if allowed else ""
        return f"unknown key{hint} (allowed: {', '.join(allowed)})" if allowed else "unknown key"
    if kind == "missing":
        return "required key is missing"
    if kind == "literal_error":
        options = re.findall(r"'([^']*)'", str(ctx.get("expected", "")))
        hint = did_you_mean(given, options, quote=True) if isinstance(given, str) else ""
        return f"{_short(given)} is not allowed; expected {ctx.get('expected')}{hint}"
    if kind in ("int_type", "int_from_float", "int_parsing"):
        return f"expected a whole number, got {_short(given)}"
    if kind in ("greater_than_equal", "greater_than", "less_than_equal", "less_than"):
        sign = {"greater_than_equal": ">=", "greater_than": ">", "less_than_equal": "<=", "less_than": "<"}[kind]
        limit = ctx.get("ge", ctx.get("gt", ctx.get("le", ctx.get("lt"))))
        return f"must be {sign} {limit:,}, got {_short(given)}" if isinstance(limit, int) else \
            f"must be {sign} {limit}, got {_short(given)}"
    if kind in ("model_type", "model_attributes_type", "dict_type"):
        return f"expected keys and values, got {_short(given)}"
    if kind == "list_type":
        return f"expected a list, got {_short(given)}"
    if kind == "too_short":
        return "needs at least one entry"
    if kind == "too_long":
        return f"at most {ctx.get('max_length')} entries (got {ctx.get('actual_length')})"
    if kind == "string_too_long":
        return f"at most {ctx.get('max_length')} characters"
    if kind == "string_type":
        return f"expected text, got {_short(given)}"
    if kind == "bool_type":
        return f"expected true or false, got {_short(given)}"
    return f"{err['msg']} (got {_short(given)})"


def _pydantic_problems(probs: _Problems, exc: ValidationError, prefix: tuple = ()) -> None:
    for err in exc.errors(include_url=False):
        loc = prefix + tuple(err["loc"])
        if err["type"] == "invalid_key":  # a key that YAML read as a number, date or boolean
            where = key_path(loc[:-1])
            what = f"key {_short(loc[-1])} is not a name (write it as text)" if loc else "keys must be text"
            probs.add(where, what) if where else probs.file(what)
            continue
        where = key_path(loc)
        probs.add(where, _message(err)) if where else probs.file(_message(err))


# ---------------------------------------------------------------- resolution


class _Problems:
    """Collects one-line problems for one file, each with the YAML line of its key; no duplicates."""

    def __init__(self, shown: str, doc: Document | None = None) -> None:
        self.shown = shown
        self.doc = doc
        self._seen: dict[str, int] = {}  # line text -> YAML line (0 when none)
        self.notes: dict[str, None] = {}

    @property
    def lines(self) -> list[str]:
        """Every problem, in the order of the file (problems without a line first)."""
        return [text for text, _ in sorted(self._seen.items(), key=lambda kv: kv[1])]

    def _line(self, where: str) -> int | None:
        return self.doc.line_of(where) if self.doc is not None else None

    def add(self, where: str, what: str) -> None:
        line = self._line(where)
        text = f"{self.shown}:{line}: {where}: {what}" if line else f"{self.shown}: {where}: {what}"
        self._seen.setdefault(one_line(text), line or 0)

    def file(self, what: str) -> None:
        self._seen.setdefault(one_line(f"{self.shown}: {what}"), 0)

    def note(self, where: str, what: str) -> None:
        line = self._line(where)
        self.notes[f"{self.shown}:{line}: {where}: {what}" if line else f"{self.shown}: {where}: {what}"] = None

    def guard(self, where: str, fn: Callable[[], Any]) -> Any:
        """Run ``fn``; an OptmatchError (bad input) becomes a problem at ``where`` and the result is None.

        Any other exception is a bug and propagates."""
        try:
            return fn()
        except OptmatchError as exc:
            for line in exc.problems or [str(exc)]:
                self.add(where, line)
            return None

    def within(self, prefix: str) -> _Problems:
        """These problems, with key paths under ``network`` reported under ``prefix`` instead (an
        alternative's network is resolved by the same code as ``network:``)."""
        return _Within(self, prefix)


class _Within(_Problems):
    def __init__(self, outer: _Problems, prefix: str) -> None:
        self.outer, self.prefix = outer, prefix

    def _key(self, where: str) -> str:
        return self.prefix + where[len("network"):] if where.split(".")[0].split("[")[0] == "network" else where

    def add(self, where: str, what: str) -> None:
        self.outer.add(self._key(where), what)

    def file(self, what: str) -> None:
        self.outer.file(what)

    def note(self, where: str, what: str) -> None:
        self.outer.note(self._key(where), what)


def _grid(mask: MaskModel) -> Grid:
    segs = [Segment(f_lo=s.from_, f_hi=s.to, min_rl_db=s.min_rl_db, max_loss_db=s.max_loss,
                    points=s.points if s.points is not None else mask.points, vswr=s.vswr)
            for s in mask.segments]
    return build_grid(segs)


def _grid_points(mask: MaskModel) -> int:
    """Grid points the mask asks for, before merging shared end points (an upper bound)."""
    return sum(1 if s.from_ == s.to else (s.points if s.points is not None else mask.points) for s in mask.segments)


Given = dict[str, TabulatedLoad]
"""Measured loads handed over in memory (the Python API), by the ``touchstone`` text that names them."""


@dataclass(frozen=True)
class _Measured:
    """A Touchstone load read from the raw file: the entry's key path, its name (files: the file
    name), the data, the file (None when handed over in memory) and its bytes (for the digest)."""

    where: str
    name: str | None
    data: TabulatedLoad
    path: Path | None
    raw_bytes: bytes


def _resolve_path(name: str, study_dir: Path) -> Path:
    p = Path(name)
    return p if p.is_absolute() else study_dir / p


def _read_one(name: str, study_dir: Path, given: Given) -> tuple[TabulatedLoad, Path | None, bytes]:
    if name in given:
        tab = given[name]
        return tab, None, np.ascontiguousarray(tab.freq_hz).tobytes() + np.ascontiguousarray(tab.gamma).tobytes()
    path = _resolve_path(name, study_dir)
    tab = read_one_port(path)
    return tab, path, path.read_bytes()


def _stem_name(path: Path) -> str:
    """A load name from a file name: its stem, with characters a name may not hold replaced by '_'."""
    stem = re.sub(r"[^A-Za-z0-9_.-]+", "_", path.stem).strip("_")[:64]
    return stem if stem and load_name_problem(stem) is None else "load"


IN_MEMORY_FILE = "<study>"  # the file name of a study built in Python (optmatch.study): it has no file
MAX_PATTERN_NAMES = 100_000  # names a pattern may look at before it is refused (work is bounded)
_MAGIC = re.compile(r"[*?[]")


def expand_pattern(pattern: str, study_dir: Path, limit: int) -> list[Path]:
    """The files a ``files`` pattern matches, sorted by name: relative to ``study_dir`` and inside it
    (following symbolic links), regular files only, at most ``limit``.  Each part of the pattern
    between slashes is matched against one folder's names (``*``, ``?``, ``[..]``; a name starting
    with ``.`` only by a part that does too).  Raises LoadError (one line)."""
    parts = [q for q in re.split(r"[/\\]", pattern.strip()) if q not in ("", ".")]
    if not parts:
        raise loads.LoadError(f"{pattern!r} names no file; give a pattern such as measured/unit_*.s1p")
    base = study_dir.resolve()
    looked = 0
    current = [study_dir]
    for k, part in enumerate(parts):
        last = k == len(parts) - 1
        nxt: list[Path] = []
        for folder in current:
            if not _MAGIC.search(part):
                candidates = [folder / part]
            else:
                try:
                    names = sorted(os.listdir(folder))
                except OSError:
                    continue
                looked += len(names)
                if looked > MAX_PATTERN_NAMES:
                    raise loads.LoadError(f"{pattern!r} looks at more than {MAX_PATTERN_NAMES:,} names; narrow it")
                candidates = [folder / n for n in names
                              if fnmatch.fnmatchcase(n, part) and (part.startswith(".") or not n.startswith("."))]
            for c in candidates:
                if (c.is_file() if last else c.is_dir()):
                    nxt.append(c)
        current = nxt
    found: list[Path] = []
    for match in current:
        if not match.resolve().is_relative_to(base):
            raise loads.LoadError(f"{pattern!r} matches {match.relative_to(study_dir)}, which leads outside the "
                                  f"study file's folder")
        found.append(match)
        if len(found) > limit:
            raise loads.LoadError(f"{pattern!r} matches more than {limit:,} files; at most {limits.MAX_LOADS:,} "
                                  "loads in a study")
    if not found:
        raise loads.LoadError(f"{pattern!r} matches no file in {study_dir if str(study_dir) else '.'}")
    return found


def _measured_loads(raw: dict, study_dir: Path, probs: _Problems, given: Given) -> list[_Measured]:
    """Every Touchstone load the raw file names (``load.touchstone``, ``loads[i].touchstone`` and
    the files of ``loads[i].files``), read and checked even when other keys are wrong."""
    wanted: list[tuple[str, str | None, str]] = []  # (where, name, touchstone text)
    patterns: list[tuple[str, str]] = []  # (where, pattern)
    load = raw.get("load")
    if isinstance(load, dict) and isinstance(load.get("touchstone"), str) and load["touchstone"].strip():
        wanted.append(("load.touchstone", None, load["touchstone"]))
    entries = raw.get("loads")
    if isinstance(entries, list):
        for i, entry in enumerate(entries):
            if not isinstance(entry, dict):
                continue
            ts, pattern = entry.get("touchstone"), entry.get("files")
            if isinstance(ts, str) and ts.strip():
                name = entry.get("name") if isinstance(entry.get("name"), str) else None
                wanted.append((f"loads[{i}].touchstone", name, ts))
            elif isinstance(pattern, str):
                patterns.append((f"loads[{i}].files", pattern))
    out: list[_Measured] = []
    room = limits.MAX_LOADS - (len(entries) - len(patterns) if isinstance(entries, list) else 0)
    matched: list[tuple[str, Path]] = []
    for where, pattern in patterns:
        try:
            _file_pattern(pattern)
        except ValueError:
            continue  # the schema reports it
        if room <= 0:
            probs.add(where, f"no room for more loads: at most {limits.MAX_LOADS:,} in a study")
            return out
        files = probs.guard(where, partial(expand_pattern, pattern, study_dir, room))
        if files is None:
            continue
        room -= len(files)
        matched += [(where, f) for f in files]
    total = sum(f.stat().st_size for _, f in matched)
    if total > limits.MAX_LOAD_BYTES:
        probs.add("loads", f"the matched files hold {total / 2**20:.0f} MiB; at most "
                           f"{limits.MAX_LOAD_BYTES // 2**20} MiB of load data in a study")
        return out
    for where, name, text in wanted:
        got = probs.guard(where, partial(_read_one, text, study_dir, given))
        if got is not None:
            out.append(_Measured(where, name, *got))
    for where, path in matched:
        got = probs.guard(where, partial(read_one_port, path))
        if got is not None:
            out.append(_Measured(where, _stem_name(path), got, path, path.read_bytes()))
    return out


def _model_fn(load: LoadModel) -> LoadFn:
    """A load model (impedance or RLC) as a function of frequency (Hz -> Ω)."""
    if load.impedance is not None:
        z = load.impedance
        return lambda f: loads.fixed_impedance(f, z)
    rlc = load.series_rlc or load.parallel_rlc
    assert rlc is not None
    fn = loads.series_rlc if load.series_rlc is not None else loads.parallel_rlc
    return lambda f: fn(f, rlc.r, rlc.l, rlc.c)


def _load_text(load: LoadModel | LoadEntryModel) -> str:
    """How the file gives a load, in one line (``touchstone: data/x.s1p``, ``impedance: (60-80j)``)."""
    kind = load.kind
    value = getattr(load, kind)
    if isinstance(value, BaseModel):
        value = ", ".join(f"{k}: {v:g}" for k, v in value.model_dump().items() if v is not None)
        return f"{kind}: {{{value}}}"
    return f"{kind}: {value}"


def _sources(model_load: LoadModel | None, entries: list[LoadEntryModel] | None,
             measured: list[_Measured]) -> list[tuple[str, LoadSource]] | None:
    """Every load as (key path, source), in the file's order (a pattern's files in name order).
    None when a load could not be read (its problem is already said)."""
    by_where: dict[str, list[_Measured]] = {}
    for m in measured:
        by_where.setdefault(m.where, []).append(m)
    out: list[tuple[str, LoadSource]] = []
    ok = True
    if model_load is not None:
        if model_load.touchstone is not None:
            got = by_where.get("load.touchstone")
            if not got:
                return None
            m = got[0]
            out.append(("load.touchstone", LoadSource("load", 1.0, _load_text(model_load), m.data, m.data.range_hz,
                                                      m.path)))
        else:
            out.append((f"load.{model_load.kind}", LoadSource("load", 1.0, _load_text(model_load),
                                                              _model_fn(model_load), (0.0, math.inf))))
        return out
    for i, entry in enumerate(entries or ()):
        where = f"loads[{i}].{entry.kind}"
        if entry.kind in ("touchstone", "files"):
            got = by_where.get(where)
            if not got:
                ok = False
                continue
            for m in got:
                text = _load_text(entry) if entry.kind == "touchstone" else f"files: {m.path.name if m.path else ''}"
                out.append((where, LoadSource(entry.name or m.name or "load", entry.weight, text, m.data,
                                              m.data.range_hz, m.path)))
        else:
            out.append((where, LoadSource(entry.name or "load", entry.weight, _load_text(entry),
                                          _model_fn(entry.as_load()), (0.0, math.inf))))
    return out if ok else None


def _check_load_names(raw: dict, measured: list[_Measured], probs: _Problems) -> None:
    """Every load name of the raw file given once: each entry's ``name``, and the file names a
    ``files`` pattern matches (checked whatever else is wrong)."""
    entries = raw.get("loads")
    if not isinstance(entries, list):
        return
    seen: dict[str, str] = {}
    for i, entry in enumerate(entries):
        if not isinstance(entry, dict):
            continue
        found: list[tuple[str | None, str | None]]
        if "files" in entry:
            found = [(m.name, m.path.name if m.path else "") for m in measured if m.where == f"loads[{i}].files"]
        elif isinstance(entry.get("name"), str):
            found = [(entry["name"], None)]
        else:
            continue
        for name, file in found:
            if name is None:
                continue
            if name not in seen:
                seen[name] = f"loads[{i}]"
            elif file is not None:
                probs.add(f"loads[{i}].files", f"the file {file} gives the load name {name!r}, which {seen[name]} "
                                               "already has; rename the file or give the loads by name")
            else:
                probs.add(f"loads[{i}].name", f"{name!r} is the name of {seen[name]} too; give each load its own name")


def _check_coverage(measured: list[_Measured], grid: Grid | None, probs: _Problems) -> None:
    """Every measured load covers the mask's grid (checked whatever else is wrong)."""
    if grid is not None:
        for m in measured:
            probs.guard(m.where, partial(m.data, grid.freq))


def _load_rows(sources: list[tuple[str, LoadSource]] | None, grid: Grid | None, probs: _Problems) -> np.ndarray | None:
    """Every load's impedance on the grid (Ω), (L, F); a load that does not cover the mask is a problem."""
    if sources is None or grid is None:
        return None
    rows = [probs.guard(where, partial(src.fn, grid.freq)) for where, src in sources]
    if any(r is None for r in rows):
        return None
    return np.array(rows, dtype=complex)


def _basis(length: Length) -> LengthBasis:
    return "physical" if length.kind == "physical" else "delay"


def _length_number(length: Length, f_ref: float) -> float:
    """Delay (s) for electrical and delay lengths; metres for physical ones."""
    if length.kind == "electrical":
        return length.value / (2.0 * math.pi * f_ref)
    return length.value


def _length_bound(spec: Length | LengthRange, f_ref: float, where: str, probs: _Problems) -> LengthBound | None:
    ends = [spec] if isinstance(spec, Length) else [spec.min, spec.max]
    for end in ends:
        if end.kind == "electrical" and _length_number(end, f_ref) > MAX_DELAY_S:
            probs.add(where, f"{end.value / (2 * math.pi):.6g} wavelengths at the reference frequency "
                             f"{format_hz(f_ref)} is longer than 1 km in free space; lengths are limited to 1 km")
            return None
    if isinstance(spec, Length):
        x = _length_number(spec, f_ref)
        return LengthBound(Bound(x, x), _basis(spec))
    lo, hi = _length_number(spec.min, f_ref), _length_number(spec.max, f_ref)
    if lo > hi:
        probs.add(where, f"min ({lo * 1e9:g} ns) must not exceed max ({hi * 1e9:g} ns) "
                         f"at the reference frequency {format_hz(f_ref)}")
        return None
    return LengthBound(Bound(lo, hi), _basis(spec.min))


def _media(z0: float | list[float] | Z0Range | None, vf: float, z_sys: float,
           default_free: tuple[float, float] | None = None) -> tuple[tuple[Medium, ...], Bound | None]:
    """Media and free-Z0 bound from a z0 value: fixed, a list (a choice) or {min, max} (free)."""
    if z0 is None and default_free is not None:
        z0 = Z0Range.model_construct(min=default_free[0], max=default_free[1])
    if z0 is None:
        return (Medium(z_sys, vf),), None
    if isinstance(z0, Z0Range):
        return (Medium(0.5 * (z0.min + z0.max), vf),), Bound(z0.min, z0.max)
    if isinstance(z0, list):
        return tuple(Medium(z, vf) for z in z0), None
    return (Medium(float(z0), vf),), None


def _lumped_bound(value: PartValue) -> Bound:
    return Bound(value.lo, value.hi, log=value.lo != value.hi)


def _template_elements(net: NetworkModel, f_ref: float, z_sys: float, probs: _Problems,
                       shelf: ShelfContext | None) -> tuple[ElementSpec, ...] | None:
    """A template's elements; with shelf keys, each element is built from the shelf for its role."""
    template = net.template
    assert template is not None
    vf = net.vf if net.vf is not None else 1.0
    stepped = template == "stepped_line"
    uses = {role: any(v not in (None, False) for v in net.role_keys(role).values()) for role in ROLES}
    z0 = net.z0
    media, z0_free = _media(z0, vf, z_sys, STEPPED_Z0_OHM if stepped and not any(uses.values()) else None)
    spacing = _length_bound(net.spacing, f_ref, "network.spacing", probs) if net.spacing else None
    max_length = _length_bound(net.max_length, f_ref, "network.max_length", probs) if net.max_length else None
    if (net.spacing and spacing is None) or (net.max_length and max_length is None):
        return None
    plain = probs.guard("network.template", lambda: build_template(
        template, f_ref, media, z0_free=z0_free, end=net.end or "either", spacing=spacing,
        max_length=max_length, sections=net.sections or 3))
    if plain is None or not any(uses.values()):
        return plain
    out: list[ElementSpec] = []
    ok = True
    for el in plain:
        role = role_of(el)
        if not uses[role]:
            out.append(el)
            continue
        keys = net.role_keys(role)
        where = f"network.{role}" if getattr(net, role) is not None else "network"
        model = StubModel if el.kind != "line" else LineModel
        extra = {"end": el.end} if el.kind != "line" else {}
        spec = model.model_construct(length=None, z0=z0 if keys["cable"] is None else None, vf=vf,
                                     microstrip=None, **keys, **extra)
        lb = LengthBound(el.length, el.length_basis)
        built = shelf_element(el.kind, spec, lb, z_sys, shelf, where, el.label, probs.add) if shelf else None
        if built is None:
            ok = False
        else:
            out.append(built)
    return tuple(out) if ok else None


def _elements(net: NetworkModel, f_ref: float, z_sys: float, probs: _Problems,
              shelf: ShelfContext | None = None) -> tuple[ElementSpec, ...] | None:
    if net.template is not None:
        return _template_elements(net, f_ref, z_sys, probs, shelf)
    out: list[ElementSpec] = []
    ok = True
    for i, entry in enumerate(net.elements or ()):
        kind, spec = entry.element_kind, entry.spec
        where = f"network.elements[{i}].{kind}"
        label = f"{kind} {i + 1}"
        if isinstance(spec, LumpedModel):
            out.append(ElementSpec("lumped", connection=spec.connection, part=spec.part,
                                   value=_lumped_bound(spec.part_value), label=label))
            continue
        assert isinstance(spec, (LineModel, StubModel))
        length = _length_bound(spec.length, f_ref, f"{where}.length", probs) if spec.length is not None else None
        if uses_shelf(spec):
            el = shelf_element(kind, spec, length, z_sys, shelf, where, label, probs.add) if shelf else None
            if el is None:
                ok = False
            else:
                out.append(el)
            continue
        if length is None:
            ok = False
            continue
        media, z0_free = _media(spec.z0, spec.vf, z_sys)
        end = spec.end if isinstance(spec, StubModel) else None
        out.append(ElementSpec(kind, length=length.bound, length_basis=length.basis, media=media,
                               z0_free=z0_free, end=end, label=label))
    return tuple(out) if ok else None


# ---------------------------------------------------------------- names and files, checked on the raw file


def _networks(raw: dict) -> list[tuple[str, Any]]:
    """(key path, raw body) of the file's network, or of each of its alternatives."""
    alts = raw.get("alternatives")
    named = [(f"alternatives.{k}", v) for k, v in alts.items()] if isinstance(alts, dict) else []
    return ([("network", raw["network"])] if "network" in raw else []) + named


def _role_bodies(raw: dict) -> list[tuple[str, dict]]:
    """(key path, mapping) of every place in the raw file that may name cables or allowances."""
    out: list[tuple[str, dict]] = []
    for top, net in _networks(raw):
        if not isinstance(net, dict):
            continue
        out.append((top, net))
        for role in ROLES:
            if isinstance(net.get(role), dict):
                out.append((f"{top}.{role}", net[role]))
        elements = net.get("elements")
        if isinstance(elements, list):
            for i, entry in enumerate(elements):
                if not isinstance(entry, dict):
                    continue
                for kind, body in entry.items():
                    if kind in ELEMENT_KINDS and isinstance(body, dict):
                        out.append((f"{top}.elements[{i}].{kind}", body))
    return out


def _check_names(raw: dict, catalog: dict[str, Cable], probs: _Problems) -> None:
    """Cable and allowance names anywhere in the file, whatever else is wrong with it."""
    given = raw.get("shelf")
    shelf = given if isinstance(given, dict) else {}
    allowances = shelf.get("allowances")
    known = [k for k in allowances if isinstance(k, str)] if isinstance(allowances, dict) else []
    for where, body in _role_bodies(raw):
        if "cable" in body:
            find_cables(body["cable"], catalog, where, probs.add, probs.note)
        refs = body.get("allowances")
        if isinstance(refs, list):
            for j, ref in enumerate(refs):
                if isinstance(ref, str) and ref not in known:
                    probs.add(f"{where}.allowances[{j}]", unknown_allowance(ref, known))
    stock = shelf.get("stock")
    if isinstance(stock, dict):
        for name in stock:
            if isinstance(name, str):
                full, why = lookup_cable(name, catalog)
                if full is None:
                    probs.add(f"shelf.stock.{name}", unknown_cable(name, catalog))
                elif why:
                    probs.note(f"shelf.stock.{name}", why)


# ---------------------------------------------------------------- bounds on work


def _check_work(parts: dict[str, Any], elements: tuple[ElementSpec, ...] | None, probs: _Problems,
                n_loads: int = 1) -> None:
    """Refuse, before anything runs, a study whose search or robustness view is beyond the caps or would
    not fit in memory; the message states the estimate.  Every load adds its own grid."""
    mask: MaskModel | None = parts.get("mask")
    search: SearchModel | None = parts.get("search")
    tol: ToleranceModel | None = parts.get("tolerance")
    points = _grid_points(mask) if mask is not None else None
    if points is not None and points > limits.MAX_GRID_POINTS:
        probs.add("mask", f"{points:,} grid points in all; at most {limits.MAX_GRID_POINTS:,} "
                          "(lower points on the segments)")
        return
    if points is not None:
        points *= n_loads
    budget = limits.MEMORY_BUDGET_BYTES
    known = points is not None and elements is not None
    dim = NetworkSpec(elements).dim if known and elements is not None else 0
    n_el = len(elements) if elements is not None else 0
    if search is not None:
        pop = search.population
        need = limits.search_bytes(pop, dim, n_el, points) if known and points is not None else None
        if pop > limits.MAX_POPULATION or (need is not None and need > budget):
            estimate = (f" on {points:,} grid points need about {limits.gib(need)} of memory in one generation "
                        f"(estimate: {limits.BYTES_PER_PARAMETER} B per candidate and search parameter, "
                        f"{limits.BYTES_PER_ELEMENT} B per candidate and element, {16 * limits.ENGINE_ARRAYS} B per "
                        f"grid point for each of up to {limits.ENGINE_CHUNK} candidates at once)"
                        if need is not None else "")
            probs.add("search.population", f"{pop:,} candidates{estimate}; the limits are "
                      f"{limits.MAX_POPULATION:,} candidates and {limits.gib(budget)}: lower search.population"
                      f"{' or the mask points' if need is not None and need > budget else ''}")
    if tol is not None:
        n = tol.samples
        need = limits.robustness_bytes(n, n_el, points) if known and points is not None else None
        if n > limits.MAX_SAMPLES or (need is not None and need > budget):
            estimate = (f" on {points:,} grid points need about {limits.gib(need)} of memory (estimate: 64 B per "
                        f"build and element, {16 * limits.ENGINE_ARRAYS} B per grid point for each of up to "
                        f"{limits.ENGINE_CHUNK} builds at once)" if need is not None else "")
            probs.add("tolerance.samples", f"{n:,} builds{estimate}; the limits are {limits.MAX_SAMPLES:,} builds "
                      f"and {limits.gib(budget)}: lower tolerance.samples")


# ---------------------------------------------------------------- the whole file


def _digest(raw: dict, extra: bytes) -> str:
    canon = json.dumps(raw, sort_keys=True, separators=(",", ":"), ensure_ascii=False, default=str)
    h = hashlib.sha256(canon.encode("utf-8"))
    h.update(extra)
    return h.hexdigest()


def _default_name(path: Path) -> str:
    """A study name from the file name: unsafe characters replaced, no leading dots, at most 100 characters."""
    stem = re.sub(r"[^A-Za-z0-9_.-]+", "_", path.stem).strip("_").lstrip(".")[: limits.MAX_NAME]
    return stem if stem and study_name_problem(stem) is None else "study"


def _sections(raw: dict, exc: ValidationError) -> dict[str, Any]:
    """After a failed whole-file validation, the parts that are valid on their own (for further checks)."""
    bad = {err["loc"][0] for err in exc.errors() if err["loc"]}
    if any(not err["loc"] for err in exc.errors()):
        return {}
    got: dict[str, Any] = {}
    for key, model in SECTION_MODELS.items():
        if key in raw and key not in bad:
            got[key] = (model.validate_python(raw[key]) if isinstance(model, TypeAdapter)
                        else model.model_validate(raw[key]))
        elif key not in raw and key not in bad and key in ("search", "tolerance"):
            got[key] = model()
    if "alternatives" in raw and "alternatives" not in bad:
        got["alternatives"] = TypeAdapter(Alternatives).validate_python(raw["alternatives"])
    for key, typ, default in (("system", Ohms, 50.0), ("reference", Frequency, None)):
        if key not in bad:
            got[key] = TypeAdapter(typ).validate_python(raw[key]) if key in raw else default
    return got


def _spread(tol: ToleranceModel, seed: int) -> Spread:
    return Spread(cut_m=tol.cut.value, z0_rel=tol.z0, vf_rel=tol.vf, parts_rel=tol.parts,
                  samples=tol.samples, seed=seed)


def load_study(path: str | os.PathLike) -> Study:
    """Read, validate and resolve a study file; raises :class:`StudyFileError` listing every problem."""
    p = Path(path)
    shown = str(path)
    doc = _read_yaml(p, shown)
    return _resolve(doc.data, _Problems(shown, doc), p, p.parent, {})


def study_from_data(raw: dict, path: str | os.PathLike, shown: str | None = None,
                    given: Given | None = None) -> Study:
    """Validate and resolve a study given as data (the keys and values of a study file) as if it
    were the file ``path`` (files it names are relative to that file's folder; nothing is read
    from ``path`` itself).  ``given``: measured loads handed over in memory, by the ``touchstone``
    text that names them.  Raises :class:`StudyFileError` listing every problem, each as
    ``shown: key.path: problem``."""
    p = Path(path)
    label = shown if shown is not None else str(path)
    if not isinstance(raw, dict):
        raise StudyFileError([f"{label}: expected keys (name, load, mask, network, ...) at the top level, "
                              f"found a {type(raw).__name__}"])
    return _resolve(raw, _Problems(label, None), p, p.parent, dict(given or {}))


def _resolve(raw: dict, probs: _Problems, p: Path, study_dir: Path, given: Given) -> Study:
    """The whole study from its parsed data: every problem collected, then one error or the Study."""
    parts: dict[str, Any]
    try:
        model: StudyModel | None = StudyModel.model_validate(raw)
        parts = {k: getattr(model, k) for k in ("load", "loads", "mask", "network", "alternatives", "search", "system",
                                                 "reference", "shelf", "drive", "tolerance")}
        parts = {k: v for k, v in parts.items() if not (k in ("load", "loads") and v is None)}
    except ValidationError as exc:
        model = None
        _pydantic_problems(probs, exc)
        parts = _sections(raw, exc)
    if "load" in raw and "loads" in raw:
        probs.add("loads", "give either load (one load) or loads (several), not both")
    elif "load" not in raw and "loads" not in raw:
        probs.add("load", "required key is missing (or give loads: for several loads)")

    # Names and files, from the raw file: reported whatever else is wrong.
    catalog, extra_bytes = catalog_in_force(raw.get("shelf"), study_dir, probs.add)
    _check_names(raw, catalog, probs)
    measured = _measured_loads(raw, study_dir, probs, given)
    _check_load_names(raw, measured, probs)

    grid = probs.guard("mask", lambda: _grid(parts["mask"])) if "mask" in parts else None
    _check_coverage(measured, grid, probs)
    f_ref = parts.get("reference") or (grid.centre if grid is not None else None)
    sources = None
    if ("load" in parts) != ("loads" in parts):
        sources = _sources(parts.get("load"), parts.get("loads"), measured)
    n_loads = len(sources) if sources is not None else 1
    if (grid is not None and sources is not None and n_loads > 1
            and n_loads * grid.freq.size > limits.MAX_LOAD_POINTS):
        probs.add("loads", f"{n_loads:,} loads × {grid.freq.size:,} grid points = {n_loads * grid.freq.size:,} points "
                           f"to evaluate per design; at most {limits.MAX_LOAD_POINTS:,} "
                           "(fewer loads or fewer mask points)")
        sources = None
    zrows = _load_rows(sources, grid, probs)
    elements = None
    shelf = None
    if "shelf" in parts or "shelf" not in raw:
        shelf = shelf_context(parts.get("shelf"), catalog, probs.add)
    for key in ("network", "alternatives"):
        if key in raw and raw[key] is None:
            probs.add(key, "is empty: expected keys and values")
    if "network" in raw and "alternatives" in raw:
        probs.add("alternatives", "give either network (one) or alternatives (several), not both")
    elif "network" not in raw and "alternatives" not in raw:
        probs.add("network", "required key is missing (or give alternatives: several named networks)")
    alt_elements: dict[str, tuple[ElementSpec, ...] | None] = {}
    if f_ref is not None and "system" in parts:
        if parts.get("network") is not None:
            elements = _elements(parts["network"], f_ref, parts["system"], probs, shelf)
        for alt_name, net in (parts.get("alternatives") or {}).items():
            alt_elements[alt_name] = _elements(net, f_ref, parts["system"], probs.within(f"alternatives.{alt_name}"),
                                               shelf)
    for alt_name, alt_els in alt_elements.items():
        _check_work(parts, alt_els, probs.within(f"alternatives.{alt_name}"), n_loads)
    if not alt_elements:
        _check_work(parts, elements, probs, n_loads)
    if model is not None and model.name is None and study_name_problem(_default_name(p)):
        probs.file("the file name gives no usable study name; add name: to the file")

    if model is None or probs.lines:
        raise StudyFileError(probs.lines)
    assert grid is not None and zrows is not None and sources is not None and f_ref is not None
    s: SearchModel = model.search
    search = SearchSettings(trials=s.trials, time_s=s.time, seed=s.seed, target_margin_db=s.target_margin,
                            keep=s.keep, population=s.population, generations=s.generations,
                            objective=s.objective, loads=s.loads)
    assert shelf is not None
    digest = _digest(raw, b"".join(m.raw_bytes for m in measured) + extra_bytes)
    several = model.loads is not None
    srcs = tuple(src for _, src in sources)

    def study_of(els: tuple[ElementSpec, ...], study_raw: dict, alternatives: tuple[Alternative, ...] = ()) -> Study:
        problem = Problem(name=model.name or _default_name(p), z_sys=model.system, grid=grid,
                          zload=zrows if several else zrows[0],
                          network=NetworkSpec(els, shelf.stock_tuple()), f_ref=f_ref,
                          load_names=tuple(src.name for src in srcs) if several else (),
                          load_weights=tuple(src.weight for src in srcs) if several else (),
                          load_rule=s.loads)
        return Study(path=p, problem=problem, search=search, raw=study_raw, digest=digest,
                     description=model.description, cables=shelf.catalog,
                     drive_w=model.drive.power if model.drive is not None else None,
                     spread=_spread(model.tolerance, search.seed), notes=tuple(probs.notes),
                     loads=srcs, alternatives=alternatives)

    if not alt_elements:
        assert elements is not None
        return study_of(elements, raw)
    alts = []
    for alt_name, alt_els in alt_elements.items():
        assert alt_els is not None
        # the file as if it gave this alternative as its one network, keys in the file's order
        alt_raw = {("network" if k == "alternatives" else k): (raw[k][alt_name] if k == "alternatives" else v)
                   for k, v in raw.items()}
        alts.append(Alternative(alt_name, study_of(alt_els, alt_raw)))
    return study_of(alts[0].study.problem.network.elements, raw, tuple(alts))


def check_study(path: str | os.PathLike) -> list[str]:
    """Every problem of a study file, one line each (empty when the file is fine)."""
    try:
        load_study(path)
    except StudyFileError as exc:
        return exc.problems
    return []


__all__ = ["Alternative", "LoadSource", "SearchSettings", "Study", "StudyFileError", "check_study", "expand_pattern",
           "key_path", "load_study", "study_from_data"]
