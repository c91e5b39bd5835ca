"""A finished design: the choices and values found, and a plain description of every element.

Units in the description: Ω, s, degrees and wavelengths at the reference frequency, metres.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from optmatch.domain.mask import worst_point
from optmatch.domain.microstrip import velocity_factor
from optmatch.domain.network import Choice
from optmatch.domain.problem import Problem
from optmatch.units import C0


@dataclass(frozen=True)
class Design:
    """One candidate network: discrete ``choice`` plus unit vector ``u`` over the free parameters."""

    choice: Choice
    u: tuple[float, ...]
    margin_db: float
    length_wl: float
    trial: int = -1

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
    delays = net.delays(vals, design.choice)
    out = []
    for i, el in enumerate(net.elements):
        if not el.is_line_like:
            out.append(ElementReport(i, el.kind, None, el.connection, el.part, float(vals[i]["value"][0]),
                                     "", None, None, None, None, None, None, None))
            continue
        med = el.media[design.choice.medium[i]]
        tau = float(delays[i][0])
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
    """Band figures of one design on the problem's grid."""

    freq: np.ndarray
    gamma: np.ndarray
    return_loss_db: np.ndarray
    delivered: np.ndarray
    network_loss_db: np.ndarray
    worst_index: int
    worst_rl_db: float


def performance(problem: Problem, design: Design) -> Performance:
    """Evaluate one design over the problem's grid."""
    r = problem.response(design.vector(), design.choice)
    idx, rl = worst_point(r.gamma_sq[0], problem.grid)
    return Performance(
        freq=problem.grid.freq, gamma=r.gamma[0], return_loss_db=r.return_loss_db[0],
        delivered=r.delivered[0], network_loss_db=r.network_loss_db[0], worst_index=idx, worst_rl_db=rl,
    )
