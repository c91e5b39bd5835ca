"""Resolving the shelf keys of a study file: the cable catalog in force, named allowances, stock
pieces, and line elements built from catalog cables, stock pieces, cut-to-length reels or microstrip.

Lengths: a line's ``length`` (electrical or delay) is its whole electrical length, allowances
included; the cable to cut is what is left after the allowances (never less than ``cut.min``, never
negative).  A physical ``length`` is the cable itself.  Units after resolution: s, m, Ω.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from optmatch.domain.cables import Cable, merge_catalogs
from optmatch.domain.microstrip import Substrate, velocity_factor
from optmatch.domain.network import Bound, ElementSpec, Medium
from optmatch.domain.templates import LengthBound
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


def shelf_context(shelf: ShelfModel | None, study_dir: Path, add: Problem) -> ShelfContext:
    """The catalog (shipped + ``shelf.catalog`` file + ``shelf.cables``), allowances and shelf stock."""
    catalog = shipped_catalog()
    if shelf is None:
        return ShelfContext(catalog)
    if shelf.catalog is not None:
        path = Path(shelf.catalog)
        if not path.is_absolute():
            path = study_dir / path
        try:
            catalog = merge_catalogs(catalog, read_catalog(path))
        except CatalogError as exc:
            for line in exc.problems:
                add("shelf.catalog", line)
    if shelf.cables is not None:
        extra, probs = cables_from_mapping(shelf.cables, "shelf.cables")
        for line in probs:
            where, _, what = line.partition(": ")
            add(where, what)
        catalog = merge_catalogs(catalog, extra)
    ctx = ShelfContext(catalog)
    for name, a in (shelf.allowances or {}).items():
        ctx.allowances[name] = a.delay_s
        if a.max_voltage is not None:
            ctx.allowance_volts[name] = a.max_voltage
    for name, pieces in (shelf.stock or {}).items():
        if name not in catalog:
            add(f"shelf.stock.{name}", f"unknown cable (known: {', '.join(catalog)})")
            continue
        ctx.shelf_stock[name] = [(p.length.value, p.count) for p in pieces]
        for p in pieces:
            ctx.add_stock(name, p.length.value, p.count)
    return ctx


def _allowance_delay(refs: list[str | AllowanceModel] | None, ctx: ShelfContext, where: str, add: Problem) -> float | None:
    total = 0.0
    for j, a in enumerate(refs or []):
        if isinstance(a, str):
            if a not in ctx.allowances:
                known = ", ".join(ctx.allowances) or "none defined under shelf.allowances"
                add(f"{where}.allowances[{j}]", f"unknown allowance {a!r} (known: {known})")
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
    names = [names] if isinstance(names, str) else list(names)
    unknown = [n for n in names if n not in ctx.catalog]
    if unknown:
        add(f"{where}.cable", f"unknown cable {unknown[0]!r} (known: {', '.join(ctx.catalog)}; "
                              "see optmatch cables)")
        return None
    return [ctx.catalog[n] for n in names]


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
        name = piece.cable or (cables[0].name if len(cables) == 1 else None)
        if name is None or name not in by_name:
            add(f"{where}.stock[{j}].cable", f"name one of this element's cables ({', '.join(by_name)})")
            return None
        options.append((by_name[name], piece.length.value))
        ctx.add_stock(name, piece.length.value, piece.count)
    return options


def shelf_element(kind: str, spec, lb: LengthBound | None, z_sys: float, ctx: ShelfContext, where: str,
                  label: str, add: Problem) -> ElementSpec | None:
    """An element that uses a catalog cable, stock, cut steps, allowances or microstrip."""
    allow_s = _allowance_delay(spec.allowances, ctx, where, add)
    if allow_s is None:
        return None
    end = getattr(spec, "end", None)
    common = {"end": end, "extra_delay": allow_s, "label": label, "max_voltage_v": _allowance_volts(spec.allowances, ctx)}
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
                return ElementSpec(kind, length=lb.bound, length_basis=lb.basis, media=media,  # type: ignore[arg-type]
                                   z0_free=Bound(z0.min, z0.max), **common)
            zs = z0 if isinstance(z0, list) else [float(z0)]
            media = tuple(Medium(z, velocity_factor(z, sub), name="microstrip", printed=sub) for z in zs)
        except ValueError as exc:
            add(f"{where}.z0", str(exc))
            return None
        return ElementSpec(kind, length=lb.bound, length_basis=lb.basis, media=media, **common)  # type: ignore[arg-type]

    if spec.cable is None:  # plain z0/vf line with allowances
        lb = _less_allowance(lb, allow_s, where, add) if lb is not None else None
        return None if lb is None else ElementSpec(kind, length=lb.bound, length_basis=lb.basis,  # type: ignore[arg-type]
                                                   media=(Medium(spec.z0 if isinstance(spec.z0, (int, float))
                                                                 else z_sys, spec.vf),), **common)
    cables = _cables(spec.cable, ctx, where, add)
    if cables is None:
        return None
    if spec.stock not in (None, False):
        options = _stock_options(spec, cables, ctx, where, add)
        if options is None:
            return None
        media = tuple(c.medium() for c, _ in options)
        return ElementSpec(kind, length=Bound(0.0, 0.0), length_basis="physical", media=media,  # type: ignore[arg-type]
                           piece_m=tuple(length for _, length in options), **common)
    assert lb is not None
    media = tuple(c.medium() for c in cables)
    if spec.cut is not None:
        step = spec.cut.step.value
        bound = _cut_bound(lb, [c.vf for c in cables], allow_s, step, spec.cut.min.value, where, add)
        if bound is None:
            return None
        return ElementSpec(kind, length=bound, length_basis="physical", media=media, cut_step_m=step,  # type: ignore[arg-type]
                           **common)
    lb = _less_allowance(lb, allow_s, where, add)
    if lb is None:
        return None
    return ElementSpec(kind, length=lb.bound, length_basis=lb.basis, media=media, **common)  # type: ignore[arg-type]


def uses_shelf(spec) -> bool:
    """Whether a line/stub entry needs :func:`shelf_element` rather than the plain z0/vf path."""
    return any(getattr(spec, k, None) not in (None, False) for k in ("cable", "stock", "cut", "allowances", "microstrip"))
