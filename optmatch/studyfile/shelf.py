"""Resolving the shelf keys of a study file: the cable catalog in force, named allowances, stock
pieces, and line elements built from catalog cables, stock pieces, cut-to-length reels or microstrip.

Lengths: a line's ``length`` (electrical or delay) is its whole electrical length, allowances
included; the cable to cut is what is left after the allowances (never less than ``cut.min``, never
negative).  A physical ``length`` is the cable itself.  Units after resolution: s, m, Ω.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from optmatch.domain.cables import Cable, merge_catalogs
from optmatch.domain.microstrip import Substrate, velocity_factor
from optmatch.domain.network import Bound, ElementKind, ElementSpec, LengthBasis, Medium
from optmatch.domain.templates import LengthBound
from optmatch.errors import closest, did_you_mean
from optmatch.io.catalog import CatalogError, cables_from_mapping, read_catalog, shipped_catalog
from optmatch.studyfile.schema import AllowanceModel, ShelfModel, StockPieceModel, Z0Range
from optmatch.units import C0

Problem = Callable[[str, str], None]  # (where, what)


@dataclass
class ShelfContext:
    """What the shelf offers: catalog, named allowances (delay s), stock pool {(cable, length m): count}."""

    catalog: dict[str, Cable]
    allowances: dict[str, float] = field(default_factory=dict)
    allowance_volts: dict[str, float] = field(default_factory=dict)  # peak V rating, where one is given
    shelf_stock: dict[str, list[tuple[float, int]]] = field(default_factory=dict)
    pool: dict[tuple[str, float], int] = field(default_factory=dict)

    def add_stock(self, cable: str, length_m: float, count: int) -> None:
        key = (cable, round(length_m, 9))
        self.pool[key] = self.pool.get(key, 0) + count

    def stock_tuple(self) -> tuple[tuple[str, float, int], ...]:
        return tuple((name, length, count) for (name, length), count in sorted(self.pool.items()))


CLASS_SUFFIX = "-class"


def lookup_cable(name: str, catalog: Mapping[str, Cable]) -> tuple[str | None, str | None]:
    """The catalog name ``name`` stands for, and a note when it was a bare trade designation.

    ``RG-213`` finds ``RG-213-class`` (the catalog names classes, not products); anything else must
    match exactly.  Returns (None, None) when the catalog has no such cable.
    """
    if name in catalog:
        return name, None
    if f"{name}{CLASS_SUFFIX}" in catalog:
        full = f"{name}{CLASS_SUFFIX}"
        return full, f"cable {name!r} is the catalog class {full!r} (typical figures of that class)"
    return None, None


def unknown_cable(name: str, catalog: Mapping[str, Cable]) -> str:
    """The one-line problem for a cable name the catalog lacks, with the closest name when close."""
    bare = {n.removesuffix(CLASS_SUFFIX): n for n in catalog}
    best = closest(name, list(catalog) + list(bare))
    hint = f"; did you mean {bare.get(best, best)!r}?" if best else ""
    return f"unknown cable {name!r}{hint} (known: {', '.join(catalog)}; see optmatch cables)"


def find_cables(names: Any, catalog: Mapping[str, Cable], where: str, add: Problem,
                note: Callable[[str, str], None] | None = None) -> list[Cable] | None:
    """The cables named at ``where`` (one name or a list); every unknown name is a problem."""
    if isinstance(names, str):
        items = [(f"{where}.cable", names)]
    elif isinstance(names, list):
        items = [(f"{where}.cable[{k}]", n) for k, n in enumerate(names)]
    else:
        return None
    out: list[Cable] = []
    ok = True
    for at, n in items:
        if not isinstance(n, str):
            ok = False
            continue
        full, why = lookup_cable(n, catalog)
        if full is None:
            add(at, unknown_cable(n, catalog))
            ok = False
            continue
        if why and note is not None:
            note(at, why)
        out.append(catalog[full])
    return out if ok else None


def unknown_allowance(name: str, known: list[str]) -> str:
    """The one-line problem for an allowance name that ``shelf.allowances`` does not define."""
    listed = ", ".join(known) or "none defined under shelf.allowances"
    return f"unknown allowance {name!r}{did_you_mean(name, known, quote=True)} (known: {listed})"


def catalog_in_force(shelf: Any, study_dir: Path, add: Problem) -> tuple[dict[str, Cable], bytes]:
    """The catalog a study uses: shipped, then ``shelf.catalog`` (a file), then ``shelf.cables``,
    read from the raw ``shelf`` mapping so that it is known even when other shelf keys are wrong.
    Also returns the bytes of the catalog file (part of the study's digest)."""
    catalog = shipped_catalog()
    extra = b""
    if not isinstance(shelf, Mapping):
        return catalog, extra
    cat_file = shelf.get("catalog")
    if isinstance(cat_file, str) and cat_file.strip():
        path = Path(cat_file)
        if not path.is_absolute():
            path = study_dir / path
        try:
            catalog = merge_catalogs(catalog, read_catalog(path))
            extra = path.read_bytes()
        except CatalogError as exc:
            for line in exc.problems:
                add("shelf.catalog", line)
    cables = shelf.get("cables")
    if cables is not None:
        more, probs = cables_from_mapping(cables, "shelf.cables")
        for line in probs:
            where, _, what = line.partition(": ")
            add(where, what)
        catalog = merge_catalogs(catalog, more)
    return catalog, extra


def shelf_context(shelf: ShelfModel | None, catalog: dict[str, Cable], add: Problem) -> ShelfContext:
    """Named allowances and shelf stock on top of the catalog in force (see :func:`catalog_in_force`)."""
    ctx = ShelfContext(catalog)
    if shelf is None:
        return ctx
    for name, a in (shelf.allowances or {}).items():
        ctx.allowances[name] = a.delay_s
        if a.max_voltage is not None:
            ctx.allowance_volts[name] = a.max_voltage
    for name, pieces in (shelf.stock or {}).items():
        full, _ = lookup_cable(name, catalog)
        if full is None:
            add(f"shelf.stock.{name}", unknown_cable(name, catalog))
            continue
        ctx.shelf_stock[full] = ctx.shelf_stock.get(full, []) + [(p.length.value, p.count) for p in pieces]
        for p in pieces:
            ctx.add_stock(full, p.length.value, p.count)
    return ctx


def _allowance_delay(refs: list[str | AllowanceModel] | None, ctx: ShelfContext, where: str,
                     add: Problem) -> float | None:
    total = 0.0
    for j, a in enumerate(refs or []):
        if isinstance(a, str):
            if a not in ctx.allowances:
                add(f"{where}.allowances[{j}]", unknown_allowance(a, list(ctx.allowances)))
                return None
            total += ctx.allowances[a]
        else:
            total += a.delay_s
    return total


def _allowance_volts(refs: list[str | AllowanceModel] | None, ctx: ShelfContext) -> float | None:
    """The lowest peak-voltage rating among an element's allowances (V), or None where none gives one."""
    volts = [ctx.allowance_volts.get(a) if isinstance(a, str) else a.max_voltage for a in refs or []]
    return min((v for v in volts if v is not None), default=None)


def _cables(names: str | list[str], ctx: ShelfContext, where: str, add: Problem) -> list[Cable] | None:
    return find_cables(names, ctx.catalog, where, add)


def _less_allowance(lb: LengthBound, allow_s: float, where: str, add: Problem) -> LengthBound | None:
    """An electrical/delay bound minus the allowances (the cable's own delay, clipped at zero)."""
    if lb.basis == "physical" or allow_s == 0.0:
        return lb
    lo, hi = lb.bound.lo - allow_s, lb.bound.hi - allow_s
    if hi < 0:
        add(f"{where}.length", f"the allowances ({allow_s * 1e9:.3g} ns) are longer than the line "
                               f"({lb.bound.hi * 1e9:.3g} ns at most)")
        return None
    return LengthBound(Bound(max(lo, 0.0), hi), "delay")


def _cut_bound(lb: LengthBound, vfs: list[float], allow_s: float, step: float, cut_min: float,
               where: str, add: Problem) -> Bound | None:
    """Physical bound (m) of the cable to cut, in whole steps, at least ``cut_min``."""
    b = lb.bound
    if lb.basis == "physical":
        lo, hi = b.lo, b.hi
    else:
        lo = min((b.lo - allow_s) * vf * C0 for vf in vfs)
        hi = max((b.hi - allow_s) * vf * C0 for vf in vfs)
    min_n = math.ceil(max(cut_min, 0.0) / step - 1e-9)
    if b.fixed:
        if len(vfs) > 1 and lb.basis != "physical":
            add(f"{where}.cable", "a fixed electrical length cut from several cable types has several "
                                  "physical lengths; give one cable or a length range")
            return None
        n = max(round(lo / step), min_n)
        return Bound(n * step, n * step)
    lo_n, hi_n = max(math.ceil(lo / step - 1e-9), min_n), math.floor(hi / step + 1e-9)
    if hi_n < lo_n:
        add(f"{where}.cut", f"no cut length fits: the line allows at most {max(hi, 0.0) * 1e3:.1f} mm of cable "
                            f"after allowances, the cut needs at least {max(lo_n, min_n) * step * 1e3:.1f} mm")
        return None
    return Bound(lo_n * step, hi_n * step)


def _stock_options(spec, cables: list[Cable], ctx: ShelfContext, where: str,
                   add: Problem) -> list[tuple[Cable, float]] | None:
    options: list[tuple[Cable, float]] = []
    by_name = {c.name: c for c in cables}
    if spec.stock is True:
        for c in cables:
            options += [(c, length) for length, _ in ctx.shelf_stock.get(c.name, [])]
        if not options:
            add(f"{where}.stock", f"shelf.stock holds no pieces of {', '.join(by_name)}")
            return None
        return options
    for j, piece in enumerate(spec.stock):
        assert isinstance(piece, StockPieceModel)
        name = lookup_cable(piece.cable, by_name)[0] if piece.cable else (cables[0].name if len(cables) == 1 else None)
        if name is None or name not in by_name:
            add(f"{where}.stock[{j}].cable", f"name one of this element's cables ({', '.join(by_name)})")
            return None
        options.append((by_name[name], piece.length.value))
        ctx.add_stock(name, piece.length.value, piece.count)
    return options


def shelf_element(kind: ElementKind, spec, lb: LengthBound | None, z_sys: float, ctx: ShelfContext, where: str,
                  label: str, add: Problem) -> ElementSpec | None:
    """An element that uses a catalog cable, stock, cut steps, allowances or microstrip."""
    allow_s = _allowance_delay(spec.allowances, ctx, where, add)
    if allow_s is None:
        return None
    end = getattr(spec, "end", None)
    volts = _allowance_volts(spec.allowances, ctx)

    def element(length: Bound, basis: LengthBasis, media: tuple[Medium, ...], z0_free: Bound | None = None,
                piece_m: tuple[float | None, ...] = (), cut_step_m: float | None = None) -> ElementSpec:
        return ElementSpec(kind, length=length, length_basis=basis, media=media, z0_free=z0_free, end=end,
                           extra_delay=allow_s, piece_m=piece_m, cut_step_m=cut_step_m, label=label,
                           max_voltage_v=volts)

    media: tuple[Medium, ...]
    if spec.microstrip is not None:
        ms = spec.microstrip
        try:
            sub = Substrate(ms.er, ms.h.value, ms.t.value)
        except ValueError as exc:
            add(f"{where}.microstrip", str(exc))
            return None
        z0 = spec.z0 if spec.z0 is not None else z_sys
        lb = _less_allowance(lb, allow_s, where, add) if lb is not None else None
        if lb is None:
            return None
        try:
            if isinstance(z0, Z0Range):
                if lb.basis == "physical":
                    add(f"{where}.length", "with a free z0 the strip's velocity factor varies; "
                                           "give an electrical length (deg, wl) or a delay")
                    return None
                mid = 0.5 * (z0.min + z0.max)
                for z in (z0.min, z0.max):
                    velocity_factor(z, sub)
                media = (Medium(mid, velocity_factor(mid, sub), name="microstrip", printed=sub),)
                return element(lb.bound, lb.basis, media, z0_free=Bound(z0.min, z0.max))
            zs = z0 if isinstance(z0, list) else [float(z0)]
            media = tuple(Medium(z, velocity_factor(z, sub), name="microstrip", printed=sub) for z in zs)
        except ValueError as exc:
            add(f"{where}.z0", str(exc))
            return None
        return element(lb.bound, lb.basis, media)

    if spec.cable is None:  # plain z0/vf line with allowances
        lb = _less_allowance(lb, allow_s, where, add) if lb is not None else None
        z0_ohm = spec.z0 if isinstance(spec.z0, (int, float)) else z_sys
        return None if lb is None else element(lb.bound, lb.basis, (Medium(z0_ohm, spec.vf),))
    cables = _cables(spec.cable, ctx, where, add)
    if cables is None:
        return None
    if spec.stock not in (None, False):
        options = _stock_options(spec, cables, ctx, where, add)
        if options is None:
            return None
        media = tuple(c.medium() for c, _ in options)
        return element(Bound(0.0, 0.0), "physical", media, piece_m=tuple(length for _, length in options))
    assert lb is not None
    media = tuple(c.medium() for c in cables)
    if spec.cut is not None:
        step = spec.cut.step.value
        bound = _cut_bound(lb, [c.vf for c in cables], allow_s, step, spec.cut.min.value, where, add)
        if bound is None:
            return None
        return element(bound, "physical", media, cut_step_m=step)
    lb = _less_allowance(lb, allow_s, where, add)
    if lb is None:
        return None
    return element(lb.bound, lb.basis, media)


def uses_shelf(spec) -> bool:
    """Whether a line/stub entry needs :func:`shelf_element` rather than the plain z0/vf path."""
    keys = ("cable", "stock", "cut", "allowances", "microstrip")
    return any(getattr(spec, k, None) not in (None, False) for k in keys)
