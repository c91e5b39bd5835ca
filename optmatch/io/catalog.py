"""Reading cable catalogs: the one shipped in the package and a user's own YAML file.

Layout (see ``optmatch/data/cables.yaml``)::

    cables:
      RG-58-class:
        z0: 50
        z0_tolerance: 2
        vf: 0.66
        vf_tolerance: 0.02
        attenuation: [{freq: 100MHz, db_per_100m: 15.5}, {freq: 1GHz, db_per_100m: 60}]
        max_voltage: 1900                       # peak V
        max_power: {watts: 350, freq: 100MHz}
        description: ...
        source: ...

Every problem is reported as one line naming the file and the key (``CatalogError``).
"""

from __future__ import annotations

import functools
import math
import os
from collections.abc import Mapping
from importlib import resources
from typing import Any

from optmatch.domain.cables import Cable, merge_catalogs
from optmatch.domain.line_loss import LineLossError, fit_loss_two_point
from optmatch.errors import OptmatchError, one_line
from optmatch.io.safe_yaml import Document, YamlError, parse_yaml, read_yaml
from optmatch.units import parse_frequency, parse_impedance_real, parse_number, parse_velocity_factor

ENTRY_KEYS = ("description", "z0", "z0_tolerance", "vf", "vf_tolerance", "attenuation", "max_voltage",
              "max_power", "source")
REQUIRED = ("z0", "vf", "attenuation", "max_voltage", "max_power")


class CatalogError(OptmatchError):
    """A catalog with problems; ``problems`` holds one line each."""

    problems: list[str]

    def __init__(self, problems: list[str]) -> None:
        self.problems = [one_line(p) for p in problems]
        super().__init__("\n".join(self.problems))

    def __str__(self) -> str:
        return "\n".join(self.problems or [])


def _positive(value: Any, what: str, allow_zero: bool = False) -> float:
    x = parse_number(value, what)
    if not math.isfinite(x) or x < 0 or (x == 0 and not allow_zero):
        raise ValueError(f"must be {'zero or ' if allow_zero else ''}positive, got {value!r}")
    return x


def _watts(value: Any) -> float:
    text = str(value).strip()
    if isinstance(value, str) and text.endswith("W"):
        text = text[:-1].strip()
        for prefix, scale in (("k", 1e3), ("m", 1e-3)):
            if text.endswith(prefix):
                return _positive(text[:-1], "power") * scale
    return _positive(text if isinstance(value, str) else value, "power")


def cable_from_entry(name: str, entry: Any, where: str) -> tuple[Cable | None, list[str]]:
    """One catalog entry to a :class:`Cable`; problems are ``'<where>.<key>: what'`` lines."""
    probs: list[str] = []
    if not isinstance(entry, Mapping):
        return None, [f"{where}: expected keys ({', '.join(REQUIRED)}), got {entry!r}"]
    for key in entry:
        if key not in ENTRY_KEYS:
            probs.append(f"{where}.{key}: unknown key (allowed: {', '.join(ENTRY_KEYS)})")
    for key in REQUIRED:
        if key not in entry:
            probs.append(f"{where}: missing key {key}")
    if probs:
        return None, probs
    got: dict[str, Any] = {}

    def take(key: str, fn) -> None:  # noqa: ANN001 - small local helper
        try:
            got[key] = fn(entry[key])
        except (ValueError, OptmatchError) as exc:
            probs.append(f"{where}.{key}: {str(exc).split(': ', 1)[-1]}")

    take("z0", lambda v: parse_impedance_real(v, "z0"))
    take("vf", lambda v: parse_velocity_factor(v, "vf"))
    got["z0_tolerance"] = 0.0
    got["vf_tolerance"] = 0.0
    if "z0_tolerance" in entry:
        take("z0_tolerance", lambda v: _positive(v, "z0_tolerance", allow_zero=True))
    if "vf_tolerance" in entry:
        take("vf_tolerance", lambda v: _positive(v, "vf_tolerance", allow_zero=True))
    take("max_voltage", lambda v: _positive(str(v).removesuffix("V").strip() if isinstance(v, str) else v,
                                            "max_voltage"))

    def power(v: Any) -> tuple[float, float]:
        if not isinstance(v, Mapping) or set(v) != {"watts", "freq"}:
            raise ValueError("give {watts: ..., freq: ...}")
        return _watts(v["watts"]), parse_frequency(v["freq"], "freq")

    take("max_power", power)

    def points(v: Any) -> tuple[tuple[float, float], tuple[float, float]]:
        if not isinstance(v, list) or len(v) != 2 or not all(
                isinstance(p, Mapping) and set(p) == {"freq", "db_per_100m"} for p in v):
            raise ValueError("give two points [{freq: ..., db_per_100m: ...}, {freq: ..., db_per_100m: ...}]")
        pts = tuple((parse_frequency(p["freq"], "freq"), _positive(p["db_per_100m"], "db_per_100m", True))
                    for p in v)
        try:
            fit_loss_two_point(pts[0][0], pts[0][1], pts[1][0], pts[1][1])
        except LineLossError as exc:
            raise ValueError(str(exc)) from None
        return pts[0], pts[1]

    take("attenuation", points)
    for key in ("description", "source"):
        if key in entry and not isinstance(entry[key], str):
            probs.append(f"{where}.{key}: expected text")
    if probs:
        return None, probs
    watts, ref_hz = got["max_power"]
    return Cable(name=name, z0_ohm=got["z0"], vf=got["vf"], loss_points=got["attenuation"],
                 z0_tolerance_ohm=got["z0_tolerance"], vf_tolerance=got["vf_tolerance"],
                 max_voltage_v=got["max_voltage"], max_power_w=watts, power_ref_hz=ref_hz,
                 description=str(entry.get("description", "")), source=str(entry.get("source", ""))), []


def cables_from_mapping(data: Any, where: str) -> tuple[dict[str, Cable], list[str]]:
    """All entries of a ``{name: entry}`` mapping (``where`` prefixes every problem)."""
    if not isinstance(data, Mapping) or not data:
        return {}, [f"{where}: expected cable names with their figures"]
    out: dict[str, Cable] = {}
    probs: list[str] = []
    for name, entry in data.items():
        if not isinstance(name, str) or not name.strip():
            probs.append(f"{where}: cable name {name!r} is not text")
            continue
        cable, p = cable_from_entry(name, entry, f"{where}.{name}")
        probs += p
        if cable is not None:
            out[name] = cable
    return out, probs


def _cables_of(doc: Document, shown: str) -> dict[str, Cable]:
    raw = doc.data
    if not isinstance(raw, Mapping) or set(raw) != {"cables"}:
        raise CatalogError([f"{shown}: expected one top-level key 'cables' holding the cable entries"])
    cables, probs = cables_from_mapping(raw["cables"], "cables")
    if probs:
        lines = []
        for p in probs:
            line = doc.line_of(p.partition(": ")[0])
            lines.append(f"{shown}:{line}: {p}" if line else f"{shown}: {p}")
        raise CatalogError(lines)
    return cables


def _parse_text(text: str, shown: str) -> dict[str, Cable]:
    try:
        doc = parse_yaml(text, shown)
    except YamlError as exc:
        raise CatalogError(exc.problems or [str(exc)]) from None
    return _cables_of(doc, shown)


@functools.cache
def _shipped() -> dict[str, Cable]:
    text = resources.files("optmatch").joinpath("data/cables.yaml").read_text(encoding="utf-8")
    return _parse_text(text, "optmatch/data/cables.yaml")


def shipped_catalog() -> dict[str, Cable]:
    """The catalog shipped in the package (optmatch/data/cables.yaml); read once per process (a new
    dict each call; the cables themselves are frozen)."""
    return dict(_shipped())


def read_catalog(path: str | os.PathLike) -> dict[str, Cable]:
    """A user's catalog file; raises :class:`CatalogError` with one line per problem, each naming the file."""
    try:
        doc = read_yaml(path)
    except YamlError as exc:
        raise CatalogError([line.replace(": file not found", ": catalog file not found")
                            for line in exc.problems or []]) from None
    return _cables_of(doc, str(path))


def load_catalog(*extra_files: str | os.PathLike) -> dict[str, Cable]:
    """The shipped catalog extended by each file in turn (later entries replace earlier ones)."""
    cat = shipped_catalog()
    for f in extra_files:
        cat = merge_catalogs(cat, read_catalog(f))
    return cat
