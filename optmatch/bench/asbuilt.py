"""The as-built network: a finished design with a length error on every cable piece and a
velocity-factor and a Z0 scale per cable, mapped onto engine parameters.

The physics of a build error (a cut of ℓ + δ at VF·(1 + s), Z0·(1 + z)) is that of the tolerance view,
:func:`optmatch.domain.tolerance.perturbed_params`; this module only chooses the unknowns.

Parameter vector ``x`` (n, p), columns in this order: one length error per piece (mm, positive =
longer than designed), then one velocity-factor scale per cable of ``cables`` (%, positive =
faster), then one Z0 scale per cable of ``z0_cables`` (%).
Units elsewhere: Hz, Ω, m, dB.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from optmatch.domain.design import Design, describe
from optmatch.domain.mask import margin_db
from optmatch.domain.problem import Problem
from optmatch.domain.tolerance import perturbed_params
from optmatch.engine import evaluate

MIN_PIECE_MM = 0.5  # shorter cable sections are taken as absent (a zero-length line of the design)


@dataclass(frozen=True)
class Piece:
    """One cut piece of cable: element ``index`` (0-based, load outwards), its ``kind`` and stub
    ``end``, the ``cable`` it is cut from, its designed length ``nominal_mm`` (cable only, after
    allowances), the cable's velocity factor ``vf``, and whether it is a ready-made ``stock`` piece."""

    index: int
    kind: str
    end: str | None
    cable: str
    nominal_mm: float
    vf: float
    stock: bool = False

    @property
    def label(self) -> str:
        """e.g. ``2 shunt stub (open)`` with the element numbered from 1."""
        what = self.kind.replace("_", " ") + (f" ({self.end})" if self.end else "")
        return f"{self.index + 1} {what}"


def cable_key(medium_name: str, z0_ohm: float, vf: float) -> str:
    """The name a cable goes by: its catalog name, or its Z0 and VF when it has none."""
    return medium_name or f"Z0 {z0_ohm:g} Ω, VF {vf:.3g}"


@dataclass(frozen=True)
class BuildModel:
    """A design's as-built unknowns and their effect on the response.

    ``problem`` gives the network, the mask grid and the load on it (replace its ``zload`` for a
    fresh load measurement); ``pieces`` are the cable sections with a length error; ``cables`` are
    the cables whose VF scale is fitted: only those with two or more pieces, because on a lone
    piece a VF change and a cut error shift the same delay and cannot be told apart; ``z0_cables``
    are the cables whose Z0 scale is fitted (every cable in the build).
    """

    problem: Problem
    design: Design
    pieces: tuple[Piece, ...]
    cables: tuple[str, ...]
    z0_cables: tuple[str, ...] = ()

    @classmethod
    def of(cls, problem: Problem, design: Design) -> BuildModel:
        pieces = []
        for rep in describe(problem, design):
            if rep.kind == "lumped" or rep.physical_m is None:
                continue
            mm = rep.physical_m * 1e3
            if mm < MIN_PIECE_MM:
                continue
            el = problem.network.elements[rep.index]
            stock = el.piece(design.choice.medium[rep.index]) is not None
            pieces.append(Piece(rep.index, rep.kind, rep.end, cable_key(rep.medium, rep.z0_ohm or 0.0, rep.vf or 1.0),
                                mm, rep.vf or 1.0, stock))
        counts: dict[str, int] = {}
        for p in pieces:
            counts[p.cable] = counts.get(p.cable, 0) + 1
        cables = tuple(c for c in dict.fromkeys(p.cable for p in pieces) if counts[c] >= 2)
        return cls(problem, design, tuple(pieces), cables, tuple(dict.fromkeys(p.cable for p in pieces)))

    def with_problem(self, problem: Problem) -> BuildModel:
        """The same build against another problem (e.g. the load replaced by a fresh measurement)."""
        return replace(self, problem=problem)

    @property
    def n_params(self) -> int:
        return len(self.pieces) + len(self.cables) + len(self.z0_cables)

    def params(self, x: np.ndarray) -> list[dict]:
        """Engine parameters of builds ``x`` (n, p)."""
        x = np.atleast_2d(np.asarray(x, dtype=float))
        n, m = x.shape[0], len(self.problem.network.elements)
        cut = np.zeros((n, m))
        vf = np.zeros((n, m))
        z0 = np.zeros((n, m))
        base = len(self.pieces) + len(self.cables)
        for k, p in enumerate(self.pieces):
            cut[:, p.index] = x[:, k] * 1e-3
            if p.cable in self.cables:
                vf[:, p.index] = x[:, len(self.pieces) + self.cables.index(p.cable)] * 1e-2
            if p.cable in self.z0_cables:
                z0[:, p.index] = x[:, base + self.z0_cables.index(p.cable)] * 1e-2
        return perturbed_params(self.problem, self.design, cut, vf, z0, np.zeros((n, m)))

    def gamma(self, x: np.ndarray, freq_hz: np.ndarray, zload_ohm: np.ndarray) -> np.ndarray:
        """Input reflection (against the system impedance) of builds ``x`` (n, p) at ``freq_hz``
        (F,) with the load ``zload_ohm`` (F,) there, shaped (n, F)."""
        return evaluate(self.problem.network.stages, self.params(x), freq_hz, zload_ohm, self.problem.z_sys).gamma

    def margins(self, x: np.ndarray) -> np.ndarray:
        """Margin (dB) against the mask of builds ``x`` (n, p) on the problem's grid."""
        return self.problem.margins_of(self.params(x))

    def lengths_mm(self, x: np.ndarray) -> np.ndarray:
        """Physical length (mm) of every piece of builds ``x`` (n, p), shaped (n, pieces)."""
        x = np.atleast_2d(np.asarray(x, dtype=float))
        return np.array([p.nominal_mm for p in self.pieces]) + x[:, : len(self.pieces)]


def measured_margin_db(gamma_on_grid: np.ndarray, problem: Problem) -> float:
    """Margin (dB) of a measured input reflection given on the problem's grid (return loss only:
    a reflection measurement says nothing about the loss inside the network)."""
    g2 = np.abs(np.asarray(gamma_on_grid)) ** 2
    return float(margin_db(g2.reshape(1, -1), None, problem.grid)[0])
