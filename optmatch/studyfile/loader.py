"""Read a study file (YAML), validate it and resolve it into a :class:`~optmatch.domain.problem.Problem`.

Every problem found is collected and reported at once as a :class:`StudyFileError`, one line per
problem, each line starting with the file path and the key path, e.g.
``configs/demo.yaml: mask.segments[0].from: must be positive, got '-3GHz'``.

Units after resolution: Hz, Ω, s (delay), m (physical length), dB, seconds of wall time.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal, get_args

import numpy as np
import yaml
from pydantic import BaseModel, TypeAdapter, ValidationError

from optmatch.domain import loads
from optmatch.domain.cables import Cable
from optmatch.domain.mask import Grid, Segment, build_grid
from optmatch.domain.network import Bound, ElementSpec, LengthBasis, Medium, NetworkSpec
from optmatch.domain.problem import Problem
from optmatch.domain.templates import STEPPED_Z0_OHM, LengthBound, build_template
from optmatch.domain.tolerance import Spread
from optmatch.errors import OptmatchError
from optmatch.io.touchstone import read_one_port
from optmatch.studyfile.schema import (
    BRANCH_MARK,
    NAME_PATTERN,
    SECTION_MODELS,
    Frequency,
    LengthRange,
    LineModel,
    LoadModel,
    LumpedModel,
    MaskModel,
    NetworkModel,
    Ohms,
    SearchModel,
    SIValue,
    StubModel,
    StudyModel,
    ToleranceModel,
    Z0Range,
)
from optmatch.studyfile.shelf import ShelfContext, shelf_context, shelf_element, uses_shelf
from optmatch.units import Length


class StudyFileError(OptmatchError):
    """A study file with problems; ``problems`` holds one line each, each starting with the file path."""

    def __init__(self, problems: Iterable[str]) -> None:
        self.problems: list[str] = list(problems)
        super().__init__("\n".join(self.problems))

    def __str__(self) -> str:
        return "\n".join(self.problems)


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


# ---------------------------------------------------------------- YAML


class _StrictLoader(yaml.SafeLoader):
    """Safe YAML loader that rejects a key given twice in one mapping."""


def _construct_mapping(loader: _StrictLoader, node: yaml.MappingNode, deep: bool = False) -> dict:
    seen: dict[Any, yaml.Node] = {}
    for key_node, _ in node.value:
        key = loader.construct_object(key_node, deep=deep)
        try:
            duplicate = key in seen
        except TypeError:
            continue  # unhashable key: the base constructor reports it
        if duplicate:
            raise yaml.constructor.ConstructorError(
                None, None, f"key {key!r} is given twice", key_node.start_mark)
        seen[key] = key_node
    return yaml.SafeLoader.construct_mapping(loader, node, deep=deep)


_StrictLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _construct_mapping)


def _read_yaml(path: Path, shown: str) -> dict:
    if not path.exists():
        raise StudyFileError([f"{shown}: file not found"])
    if not path.is_file():
        raise StudyFileError([f"{shown}: not a file"])
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise StudyFileError([f"{shown}: not a text file (expected UTF-8 YAML)"]) from None
    except OSError as exc:
        raise StudyFileError([f"{shown}: cannot read ({exc.strerror or exc})"]) from None
    try:
        raw = yaml.load(text, Loader=_StrictLoader)  # noqa: S506 - a SafeLoader subclass
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        where = f"line {mark.line + 1}, column {mark.column + 1}: " if mark is not None else ""
        what = " ".join(str(exc.problem or exc.context or "unreadable YAML").split())
        raise StudyFileError([f"{shown}: {where}YAML syntax error: {what}"]) from None
    except yaml.YAMLError as exc:
        raise StudyFileError([f"{shown}: YAML syntax error: {' '.join(str(exc).split())}"]) from None
    if raw is None:
        raise StudyFileError([f"{shown}: file is empty"])
    if not isinstance(raw, dict):
        raise StudyFileError([f"{shown}: expected keys (name, load, mask, network, ...) at the top level, "
                              f"found a {type(raw).__name__}"])
    return raw


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


def _message(err: dict) -> str:
    kind = err["type"]
    ctx = err.get("ctx") or {}
    given = err.get("input")
    if kind == "value_error" and "error" in ctx:
        return str(ctx["error"])
    if kind == "extra_forbidden":
        allowed = _allowed_keys(tuple(err["loc"]))
        return f"unknown key (allowed: {', '.join(allowed)})" if allowed else "unknown key"
    if kind == "missing":
        return "required key is missing"
    if kind == "literal_error":
        return f"{_short(given)} is not allowed; expected {ctx.get('expected')}"
    if kind in ("int_type", "int_from_float", "int_parsing"):
        return f"expected a whole number, got {_short(given)}"
    if kind in ("greater_than_equal", "greater_than"):
        sign = ">=" if kind == "greater_than_equal" else ">"
        limit = ctx.get("ge", ctx.get("gt"))
        return f"must be {sign} {limit}, got {_short(given)}"
    if kind in ("model_type", "model_attributes_type", "dict_type"):
        return f"expected keys and values, got {_short(given)}"
    if kind == "list_type":
        return f"expected a list, got {_short(given)}"
    if kind == "too_short":
        return "needs at least one entry"
    if kind == "string_type":
        return f"expected text, got {_short(given)}"
    return f"{err['msg']} (got {_short(given)})"


def _pydantic_problems(shown: str, exc: ValidationError, prefix: tuple = ()) -> list[str]:
    lines = []
    for err in exc.errors(include_url=False):
        loc = prefix + tuple(err["loc"])
        if err["type"] == "invalid_key":  # a key that YAML read as a number, date or boolean
            where = key_path(loc[:-1])
            what = f"key {loc[-1]!r} is not a name (write it as text)" if loc else "keys must be text"
            lines.append(f"{shown}: {where}: {what}" if where else f"{shown}: {what}")
            continue
        where = key_path(loc)
        lines.append(f"{shown}: {where}: {_message(err)}" if where else f"{shown}: {_message(err)}")
    return lines


# ---------------------------------------------------------------- resolution


class _Problems:
    """Collects one-line problems for one file."""

    def __init__(self, shown: str) -> None:
        self.shown = shown
        self.lines: list[str] = []

    def add(self, where: str, what: str) -> None:
        self.lines.append(f"{self.shown}: {where}: {what}")

    def guard(self, where: str, fn: Callable[[], Any]) -> Any:
        """Run ``fn``; a ValueError becomes a problem at ``where`` and the result is None."""
        try:
            return fn()
        except (ValueError, OptmatchError) as exc:
            self.add(where, " ".join(str(exc).split()))
            return None


def _grid(mask: MaskModel) -> Grid:
    segs = [Segment(f_lo=s.from_, f_hi=s.to, min_rl_db=s.return_loss, max_loss_db=s.max_loss,
                    points=s.points if s.points is not None else mask.points) for s in mask.segments]
    return build_grid(segs)


def _zload(load: LoadModel, grid: Grid | None, study_dir: Path, probs: _Problems) -> tuple[np.ndarray | None, bytes]:
    """Load impedance on the grid (Ω) and the bytes of any Touchstone file (for the digest)."""
    if load.touchstone is not None:
        where = "load.touchstone"
        ts_path = Path(load.touchstone)
        if not ts_path.is_absolute():
            ts_path = study_dir / ts_path
        tab = probs.guard(where, lambda: read_one_port(ts_path))
        if tab is None:
            return None, b""
        data = ts_path.read_bytes()
        if grid is None:
            return None, data
        return probs.guard(where, lambda: tab(grid.freq)), data
    if grid is None:
        return None, b""
    if load.impedance is not None:
        return probs.guard("load.impedance", lambda: loads.fixed_impedance(grid.freq, load.impedance)), b""
    rlc = load.series_rlc or load.parallel_rlc
    kind = "series_rlc" if load.series_rlc is not None else "parallel_rlc"
    fn = loads.series_rlc if kind == "series_rlc" else loads.parallel_rlc
    return probs.guard(f"load.{kind}", lambda: fn(grid.freq, rlc.r, rlc.l, rlc.c)), b""


def _basis(length: Length) -> LengthBasis:
    return "physical" if length.kind == "physical" else "delay"


def _length_number(length: Length, f_ref: float) -> float:
    """Delay (s) for electrical and delay lengths; metres for physical ones."""
    if length.kind == "electrical":
        return length.value / (2.0 * math.pi * f_ref)
    return length.value


def _length_bound(spec: Length | LengthRange, f_ref: float, where: str, probs: _Problems) -> LengthBound | None:
    if isinstance(spec, Length):
        x = _length_number(spec, f_ref)
        return LengthBound(Bound(x, x), _basis(spec))
    lo, hi = _length_number(spec.min, f_ref), _length_number(spec.max, f_ref)
    if lo > hi:
        probs.add(where, f"min ({lo * 1e9:g} ns) must not exceed max ({hi * 1e9:g} ns) "
                         f"at the reference frequency {f_ref:g} Hz")
        return None
    return LengthBound(Bound(lo, hi), _basis(spec.min))


def _media(z0: float | list[float] | Z0Range | None, vf: float, z_sys: float,
           default_free: tuple[float, float] | None = None) -> tuple[tuple[Medium, ...], Bound | None]:
    """Media and free-Z0 bound from a z0 value: fixed, a list (a choice) or {min, max} (free)."""
    if z0 is None and default_free is not None:
        z0 = Z0Range(min=default_free[0], max=default_free[1])
    if z0 is None:
        return (Medium(z_sys, vf),), None
    if isinstance(z0, Z0Range):
        return (Medium(0.5 * (z0.min + z0.max), vf),), Bound(z0.min, z0.max)
    if isinstance(z0, list):
        return tuple(Medium(z, vf) for z in z0), None
    return (Medium(float(z0), vf),), None


def _lumped_bound(value: SIValue | Any) -> Bound:
    if isinstance(value, SIValue):
        return Bound(value.value, value.value)
    lo, hi = value.min.value, value.max.value
    return Bound(lo, hi, log=lo != hi)


def _elements(net: NetworkModel, f_ref: float, z_sys: float, probs: _Problems,
              shelf: ShelfContext | None = None) -> tuple[ElementSpec, ...] | None:
    if net.template is not None:
        vf = net.vf if net.vf is not None else 1.0
        stepped = net.template == "stepped_line"
        media, z0_free = _media(net.z0, vf, z_sys, STEPPED_Z0_OHM if stepped else None)
        spacing = _length_bound(net.spacing, f_ref, "network.spacing", probs) if net.spacing else None
        max_length = _length_bound(net.max_length, f_ref, "network.max_length", probs) if net.max_length else None
        return probs.guard("network.template", lambda: build_template(
            net.template, f_ref, media, z0_free=z0_free, end=net.end or "either", spacing=spacing,
            max_length=max_length, sections=net.sections or 3))
    out: list[ElementSpec] = []
    ok = True
    for i, entry in enumerate(net.elements or ()):
        kind, spec = entry.kind, entry.spec
        where = f"network.elements[{i}].{kind}"
        label = f"{kind} {i + 1}"
        if isinstance(spec, LumpedModel):
            out.append(ElementSpec("lumped", connection=spec.connection, part=spec.part,
                                   value=_lumped_bound(spec.value), label=label))
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
        out.append(ElementSpec(kind, length=length.bound, length_basis=length.basis, media=media,  # type: ignore[arg-type]
                               z0_free=z0_free, end=end, label=label))
    return tuple(out) if ok else None


def _digest(raw: dict, extra: bytes) -> str:
    canon = json.dumps(raw, sort_keys=True, separators=(",", ":"), ensure_ascii=False, default=str)
    h = hashlib.sha256(canon.encode("utf-8"))
    h.update(extra)
    return h.hexdigest()


def _default_name(path: Path) -> str:
    stem = path.stem
    return stem if re.match(NAME_PATTERN, stem) else re.sub(r"[^A-Za-z0-9_.-]+", "_", stem).strip("_") or "study"


def _sections(raw: dict, exc: ValidationError) -> dict[str, Any]:
    """After a failed whole-file validation, the parts that are valid on their own (for further checks)."""
    bad = {err["loc"][0] for err in exc.errors() if err["loc"]}
    if any(not err["loc"] for err in exc.errors()):
        return {}
    got: dict[str, Any] = {}
    for key, model in SECTION_MODELS.items():
        if key in raw and key not in bad:
            got[key] = model.model_validate(raw[key])
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
    raw = _read_yaml(p, shown)
    probs = _Problems(shown)
    parts: dict[str, Any]
    try:
        model = StudyModel.model_validate(raw)
        parts = {k: getattr(model, k) for k in ("load", "mask", "network", "search", "system", "reference",
                                                 "shelf", "drive")}
    except ValidationError as exc:
        model = None
        probs.lines.extend(_pydantic_problems(shown, exc))
        parts = _sections(raw, exc)

    grid = probs.guard("mask", lambda: _grid(parts["mask"])) if "mask" in parts else None
    f_ref = parts.get("reference") or (grid.centre if grid is not None else None)
    zload, ts_bytes = (None, b"")
    if "load" in parts:
        zload, ts_bytes = _zload(parts["load"], grid, p.parent, probs)
    elements = None
    shelf = None
    if "shelf" in parts or "shelf" not in raw:
        shelf = shelf_context(parts.get("shelf"), p.parent, probs.add)
        cat_file = parts["shelf"].catalog if parts.get("shelf") is not None else None
        if cat_file is not None:  # a changed catalog is a changed study
            cat_path = Path(cat_file) if Path(cat_file).is_absolute() else p.parent / cat_file
            ts_bytes += cat_path.read_bytes() if cat_path.is_file() else b""
    if "network" in parts and f_ref is not None and "system" in parts:
        elements = _elements(parts["network"], f_ref, parts["system"], probs, shelf)

    if model is None or probs.lines:
        raise StudyFileError(probs.lines)
    assert grid is not None and zload is not None and elements is not None and f_ref is not None
    s: SearchModel = model.search
    search = SearchSettings(trials=s.trials, time_s=s.time, seed=s.seed, target_margin_db=s.target_margin,
                            keep=s.keep, population=s.population, generations=s.generations,
                            objective=s.objective)
    assert shelf is not None
    problem = Problem(name=model.name or _default_name(p), z_sys=model.system, grid=grid, zload=zload,
                      network=NetworkSpec(elements, shelf.stock_tuple()), f_ref=f_ref)
    return Study(path=p, problem=problem, search=search, raw=raw, digest=_digest(raw, ts_bytes),
                 description=model.description, cables=shelf.catalog,
                 drive_w=model.drive.power if model.drive is not None else None,
                 spread=_spread(model.tolerance, search.seed))


def check_study(path: str | os.PathLike) -> list[str]:
    """Every problem of a study file, one line each (empty when the file is fine)."""
    try:
        load_study(path)
    except StudyFileError as exc:
        return exc.problems
    return []


__all__ = ["SearchSettings", "Study", "StudyFileError", "check_study", "load_study", "key_path"]
