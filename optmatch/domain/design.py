"""A finished design: the choices and values found, and a plain description of every element.

Units in the description: Ω, s, degrees and wavelengths at the reference frequency, metres.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from optmatch.domain.mask import margin_db, worst_point
from optmatch.domain.microstrip import velocity_factor
from optmatch.domain.network import Choice
from optmatch.domain.problem import Problem
from optmatch.units import C0


@dataclass(frozen=True)
class Design:
    """One candidate network: discrete ``choice`` plus unit vector ``u`` over the free parameters.

    ``margin_db`` is the worst over every load; with several loads, ``load_margins_db`` holds the
    margin on each (in the problem's order) and ``share`` the weighted share of loads that meet the
    mask."""

    choice: Choice
    u: tuple[float, ...]
    margin_db: float
    length_wl: float
    trial: int = -1
    load_margins_db: tuple[float, ...] = ()
    share: float | None = None

    def vector(self) -> np.ndarray:
        return np.array(self.u, dtype=float).reshape(1, -1)


@dataclass(frozen=True)
class ElementReport:
    """Every number a builder needs for one element (load outwards)."""

    index: int
    kind: str
    end: str | None
    connection: str | None
    part: str | None
    value: float | None
    medium: str
    z0_ohm: float | None
    vf: float | None
    delay_s: float | None          # cable section only, without allowances
    extra_delay_s: float | None    # allowances (connectors, adapters, tees)
    electrical_deg: float | None   # cable + allowances, at the reference frequency
    wavelengths: float | None
    physical_m: float | None       # cable to cut (after allowances)

    def as_dict(self) -> dict:
        return {k: v for k, v in self.__dict__.items()}


def describe(problem: Problem, design: Design) -> list[ElementReport]:
    """Per-element numbers of ``design`` (delays at the reference frequency of ``problem``)."""
    net = problem.network
    u = design.vector()
    vals = net.values(u)
    out = []
    for i, el in enumerate(net.elements):
        if not el.is_line_like:
            out.append(ElementReport(i, el.kind, None, el.connection, el.part, float(vals[i]["value"][0]),
                                     "", None, None, None, None, None, None, None))
            continue
        med = el.media[design.choice.medium[i]]
        tau = float(net.delay(vals, design.choice, i)[0])
        total = tau + el.extra_delay
        z0 = float(vals[i]["z0"][0]) if "z0" in vals[i] else med.z0
        vf = velocity_factor(z0, med.printed) if med.printed is not None else med.vf
        end = None
        if el.kind != "line":
            end = "short" if design.choice.short[i] else "open"
        out.append(ElementReport(
            index=i, kind=el.kind, end=end, connection=None, part=None, value=None,
            medium=med.name, z0_ohm=z0, vf=vf, delay_s=tau, extra_delay_s=el.extra_delay,
            electrical_deg=360.0 * total * problem.f_ref, wavelengths=total * problem.f_ref,
            physical_m=tau * vf * C0,
        ))
    return out


@dataclass(frozen=True)
class Performance:
    """Band figures of one design (or of the bare load) on the problem's grid: Γ, return loss (dB),
    delivered share of the available power, network loss (dB), the worst point against the mask
    and the margin (dB)."""

    freq: np.ndarray
    gamma: np.ndarray
    return_loss_db: np.ndarray
    delivered: np.ndarray
    network_loss_db: np.ndarray
    worst_index: int
    worst_rl_db: float
    margin_db: float


def _figures(problem: Problem, gamma: np.ndarray, gamma_sq: np.ndarray, delivered: np.ndarray,
             loss_db: np.ndarray) -> Performance:
    idx, rl = worst_point(gamma_sq, problem.grid)
    with np.errstate(divide="ignore"):
        rl_db = -10.0 * np.log10(gamma_sq)
    margin = float(margin_db(gamma_sq[None, :], delivered[None, :], problem.grid)[0])
    return Performance(freq=problem.grid.freq, gamma=gamma, return_loss_db=rl_db, delivered=delivered,
                       network_loss_db=loss_db, worst_index=idx, worst_rl_db=rl, margin_db=margin)


def performance(problem: Problem, design: Design, load: int | str | None = None) -> Performance:
    """Evaluate one design over the problem's grid, with its ``load`` (by name or index; None when
    there is one)."""
    r = problem.response(design.vector(), design.choice, load)
    return _figures(problem, r.gamma[0], r.gamma_sq[0], r.delivered[0], r.network_loss_db[0])


def performances(problem: Problem, design: Design) -> list[Performance]:
    """:func:`performance` of one design on every load, in the problem's order."""
    return [performance(problem, design, k) for k in range(problem.n_loads)]


def worst_and_each(problem: Problem, design: Design) -> tuple[Performance, list[Performance]]:
    """The design's performance on its worst load (the one with the lowest margin) and on every load
    (empty with one load, whose performance is then the first value)."""
    if not problem.several:
        return performance(problem, design), []
    each = performances(problem, design)
    return min(each, key=lambda pf: pf.margin_db), each


def worst_bare_load(problem: Problem) -> Performance:
    """The bare load with the lowest margin against the mask (the only one with one load)."""
    return min((bare_load(problem, k) for k in range(problem.n_loads)), key=lambda pf: pf.margin_db)


def bare_load(problem: Problem, load: int | str | None = None) -> Performance:
    """The load alone, with no network, against the system impedance (no network loss)."""
    zl = np.asarray(problem.zloads[problem.load_index(load)], dtype=complex)
    gamma = (zl - problem.z_sys) / (zl + problem.z_sys)
    gamma_sq = np.abs(gamma) ** 2
    return _figures(problem, gamma, gamma_sq, 1.0 - gamma_sq, np.zeros(gamma.shape))
