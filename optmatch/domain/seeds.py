"""Seeds for the search: closed-form spot solutions at the reference frequency, and their n·λ/2
variants, mapped onto whatever network the study describes.

A solution is embedded in the network element by element (load outwards): each network
element either takes the next solution element (same kind, same Z0 available, length within its
bounds) or is set neutral (a line or stub of zero length, a short series stub, an open shunt stub,
a λ/2 line), so a single-stub answer also seeds a triple-stub network.  Stepped lines of fixed
quarter-wave sections get the binomial (maximally flat) transformer as their seed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from optmatch.domain import closed_form as cf
from optmatch.domain.network import Choice, ElementSpec, NetworkSpec
from optmatch.units import C0

_REL = 1e-6


@dataclass(frozen=True)
class Seed:
    """A starting design: discrete choice, unit vector over the free parameters, and its origin."""

    choice: Choice
    u: np.ndarray
    origin: str


def _delay_to_basis(el: ElementSpec, medium: int, delay_s: float) -> float:
    if el.length_basis == "delay":
        return delay_s
    return delay_s * el.media[medium].vf * C0


def _medium_for(el: ElementSpec, z0: float) -> tuple[int, float | None] | None:
    """Index of a medium with this Z0 (and the free-Z0 value to set), or None if unavailable."""
    if el.z0_free is not None:
        if el.z0_free.lo * (1 - _REL) <= z0 <= el.z0_free.hi * (1 + _REL):
            return 0, z0
        return None
    for k, med in enumerate(el.media):
        if abs(med.z0 - z0) <= 1e-3 * z0:
            return k, None
    return None


def _length_value(el: ElementSpec, medium: int, wavelengths: float, f_ref: float) -> float | None:
    """The element's length value for ``wavelengths`` at f_ref, or None if outside its bounds."""
    if el.length is None:
        return None
    cable_delay = wavelengths / f_ref - el.extra_delay  # allowances supply part of the length
    if cable_delay < -1e-18:
        return None
    value = _delay_to_basis(el, medium, max(cable_delay, 0.0))
    lo, hi = el.length.lo, el.length.hi
    tol = 1e-9 * max(abs(hi), 1e-30) + 1e-15
    if lo - tol <= value <= hi + tol:
        return min(max(value, lo), hi)
    return None


def _neutral(el: ElementSpec, f_ref: float) -> tuple[dict, int, bool] | None:
    """Settings that make an element (nearly) transparent: (values, medium, short)."""
    if el.kind == "lumped":
        b = el.value
        if b is None:
            return None
        series = el.connection == "series"
        small_is_neutral = (el.part in ("r", "l")) == series
        return {"value": b.lo if small_is_neutral else b.hi}, 0, False
    ends = {"open": [False], "short": [True], "either": [False, True], None: [False]}[el.end]
    for short in ends:
        if el.kind == "line":
            options = [0.0, 0.5, 1.0]
        elif el.kind == "shunt_stub":  # open stub of length 0, or short stub of λ/4: no admittance
            options = [0.25, 0.75] if short else [0.0, 0.5]
        else:  # series stub: short of length 0, or open of λ/4: no impedance
            options = [0.0, 0.5] if short else [0.25, 0.75]
        for wl in options:
            v = _length_value(el, 0, wl, f_ref)
            if v is not None:
                return {"length": v}, 0, short
    return None


def _assign(el: ElementSpec, sol_el: cf.SolvedElement, f_ref: float, extra_wl: float):
    if sol_el.kind != el.kind:
        return None
    want_short = sol_el.end == "short"
    if el.kind != "line" and el.end not in ("either", sol_el.end):
        return None
    med = _medium_for(el, sol_el.z0_ohm)
    if med is None:
        return None
    k, z0 = med
    v = _length_value(el, k, sol_el.length_wl + extra_wl, f_ref)
    if v is None:
        return None
    vals = {"length": v}
    if z0 is not None:
        vals["z0"] = z0
    return vals, k, want_short


def _matched_line(el: ElementSpec, z_sys: float) -> tuple[dict, int, bool] | None:
    """A line of the system impedance, any length: transparent once the load is matched."""
    if el.kind != "line" or el.length is None:
        return None
    med = _medium_for(el, z_sys)
    if med is None:
        return None
    k, z0 = med
    vals = {"length": el.length.lo}
    if z0 is not None:
        vals["z0"] = z0
    return vals, k, False


def _embed(net: NetworkSpec, sol: cf.Solution, f_ref: float, extra_wl: float, z_sys: float):
    """Depth-first alignment of the solution's elements onto the network's."""
    sol_els = [e for e in sol.elements if not (e.kind == "line" and e.length_wl == 0.0)]
    n_net = len(net.elements)

    def go(i: int, j: int):
        if i == n_net:
            return [] if j == len(sol_els) else None
        el = net.elements[i]
        if j < len(sol_els):
            got = _assign(el, sol_els[j], f_ref, extra_wl if j == 0 else 0.0)
            if got is not None:
                rest = go(i + 1, j + 1)
                if rest is not None:
                    return [got, *rest]
        neutral = _neutral(el, f_ref)
        if neutral is None and j == len(sol_els):
            neutral = _matched_line(el, z_sys)
        if neutral is not None:
            rest = go(i + 1, j)
            if rest is not None:
                return [neutral, *rest]
        return None

    return go(0, 0)


def _to_seed(net: NetworkSpec, settings, origin: str) -> Seed:
    medium = tuple(s[1] for s in settings)
    short = tuple(s[2] for s in settings)
    choice = Choice(medium, short)
    u = np.zeros(net.dim)
    for col, fp in enumerate(net.free):
        vals = settings[fp.element][0]
        if fp.quantity in vals:
            u[col] = fp.bound.to_unit(vals[fp.quantity])
        else:
            u[col] = 0.5
    return Seed(choice, u, origin)


def _spacings(net: NetworkSpec, f_ref: float) -> set[float]:
    """Fixed lines between two shunt stubs: candidate double-stub spacings (wavelengths)."""
    out = set()
    els = net.elements
    for a in range(1, len(els) - 1):
        el = els[a]
        if el.kind == "line" and el.length is not None and el.length.fixed and \
                els[a - 1].kind == "shunt_stub" and els[a + 1].kind == "shunt_stub":
            tau = el.length.lo if el.length_basis == "delay" else el.length.lo / (el.media[0].vf * C0)
            out.add(round((tau + el.extra_delay) * f_ref, 12))
    return out


def binomial_impedances(z_load: float, z_sys: float, sections: int) -> list[float]:
    """Binomial multi-section quarter-wave transformer, load outwards (Pozar, Microwave Engineering,
    4th ed., sec. 5.6: ln(Z_{n+1}/Z_n) ≈ 2^-N·C(N,n)·ln(ZL/Z0))."""
    z = [z_sys]
    ln_ratio = math.log(z_load / z_sys)
    for n in range(sections):
        z.append(z[-1] * math.exp(2.0 ** -sections * math.comb(sections, n) * ln_ratio))
    # z[1..N] run from the source side towards the load; the network lists load outwards
    return list(reversed(z[1:]))


def _stepped_seed(net: NetworkSpec, z_load: complex, z_sys: float, f_ref: float) -> Seed | None:
    els = net.elements
    if not els or any(e.kind != "line" or e.z0_free is None for e in els) or abs(z_load.imag) > 1e-9 * abs(z_load):
        return None
    zs = binomial_impedances(z_load.real, z_sys, len(els))
    settings = []
    for el, z in zip(els, zs, strict=True):
        v = _length_value(el, 0, 0.25, f_ref)
        free = el.z0_free
        if v is None or free is None or not (free.lo <= z <= free.hi):
            return None
        settings.append(({"length": v, "z0": z}, 0, False))
    return _to_seed(net, settings, "binomial quarter-wave transformer")


def closed_form_seeds(net: NetworkSpec, z_load: complex, z_sys: float, f_ref: float) -> list[Seed]:
    """All seeds for ``net`` from the load impedance at ``f_ref``; shortest solutions first."""
    results = list(cf.all_solutions(z_load, z_sys))
    for spacing in _spacings(net, f_ref):
        if 0 < spacing % 0.5 < 0.5:
            res = cf.double_stub(z_load, z_sys, spacing_wl=spacing)
            results.append(res)
            if not res.matchable and res.min_load_line_wl is not None:
                results.append(cf.double_stub(z_load, z_sys, spacing_wl=spacing,
                                              load_line_wl=res.min_load_line_wl + 1e-4))
    seeds: list[Seed] = []
    seen: set[tuple] = set()
    for res in results:
        for sol in res.solutions:
            for extra in (0.0, 0.5):
                settings = _embed(net, sol, f_ref, extra, z_sys)
                if settings is None:
                    continue
                seed = _to_seed(net, settings, f"{sol.topology} branch {sol.branch}"
                                + (" + λ/2" if extra else ""))
                key = (seed.choice, tuple(np.round(seed.u, 9)))
                if key not in seen:
                    seen.add(key)
                    seeds.append(seed)
    stepped = _stepped_seed(net, z_load, z_sys, f_ref)
    if stepped is not None:
        seeds.append(stepped)
    return seeds
