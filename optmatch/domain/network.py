"""Networks to be designed: element specifications, their free parameters, and the mapping from a
search vector onto engine stages and parameter arrays.

Units: delay s, physical length m, impedance Ω, loss Np/(m·√Hz) and Np/(m·Hz), lumped Ω/H/F.
A network lists its elements from the load outwards.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from optmatch.domain.microstrip import Substrate
from optmatch.engine import Stage
from optmatch.units import C0

ElementKind = Literal["line", "shunt_stub", "series_stub", "lumped"]
End = Literal["open", "short", "either"]
LengthBasis = Literal["delay", "physical"]

# The one map from a line-like element kind to its engine stage (closed-form solutions use it too).
LINE_STAGES: dict[str, Stage] = {
    "line": Stage("line"),
    "shunt_stub": Stage("stub", "shunt"),
    "series_stub": Stage("stub", "series"),
}


@dataclass(frozen=True)
class Bound:
    """A value that is fixed (``lo == hi``) or free in ``[lo, hi]``; ``log`` spaces the search."""

    lo: float
    hi: float
    log: bool = False

    @property
    def fixed(self) -> bool:
        return self.lo == self.hi

    def from_unit(self, u: np.ndarray) -> np.ndarray:
        """Map u ∈ [0, 1] onto the bound."""
        if self.log:
            return np.exp(np.log(self.lo) + u * (np.log(self.hi) - np.log(self.lo)))
        return self.lo + u * (self.hi - self.lo)

    def to_unit(self, x: float) -> float:
        """Inverse of :meth:`from_unit` (clipped to [0, 1])."""
        if self.fixed:
            return 0.0
        if self.log:
            u = (np.log(x) - np.log(self.lo)) / (np.log(self.hi) - np.log(self.lo))
        else:
            u = (x - self.lo) / (self.hi - self.lo)
        return float(np.clip(u, 0.0, 1.0))


@dataclass(frozen=True)
class Medium:
    """A line medium: characteristic impedance, velocity factor and loss model.

    Attenuation per metre: α(f) = kc·√f + kd·f in Np/m (kc in Np/(m·√Hz), kd in Np/(m·Hz)).
    """

    z0: float
    vf: float = 1.0
    kc: float = 0.0
    kd: float = 0.0
    name: str = ""
    printed: Substrate | None = None  # a microstrip: its VF then follows the Z0 chosen
    z0_tol_rel: float = 0.0  # ± fraction, for the tolerance Monte Carlo
    vf_tol_rel: float = 0.0


@dataclass(frozen=True)
class ElementSpec:
    """One element of the network to design.

    Lines and stubs: ``length`` bound (basis ``delay`` in s, or ``physical`` in m), ``media``: the
    media it may be made of (one = fixed; several = a discrete choice), ``z0_free``: a free Z0
    bound replacing the media's Z0 (printed lines), ``end`` for stubs, ``extra_delay``: fixed
    delay (s) added by connectors or adapters at this element (lossless).
    Shelf: ``piece_m`` gives, per medium option, the length (m) of a stock piece of that cable, or
    None where the option is cut to length (then the ``length`` bound applies); empty = all cut.
    ``cut_step_m``: cut lengths are whole multiples of this step (m; basis ``physical``).
    ``max_voltage_v``: the lowest peak RF voltage rating among the allowances (connectors, adapters,
    tees) that give one at this element, for the power check (V; None = none given).
    Lumped parts: ``connection``, ``part`` and ``value`` bound (Ω, H or F).
    """

    kind: ElementKind
    length: Bound | None = None
    length_basis: LengthBasis = "delay"
    media: tuple[Medium, ...] = (Medium(50.0),)
    z0_free: Bound | None = None
    end: End | None = None
    extra_delay: float = 0.0
    piece_m: tuple[float | None, ...] = ()
    cut_step_m: float | None = None
    connection: Literal["series", "shunt"] = "series"
    part: Literal["r", "l", "c"] | None = None
    value: Bound | None = None
    label: str = ""
    max_voltage_v: float | None = None  # lowest peak-voltage rating of the connectors at this element (V)

    @property
    def is_line_like(self) -> bool:
        return self.kind != "lumped"

    def piece(self, option: int) -> float | None:
        """Length (m) of the stock piece that medium option ``option`` stands for, or None (cut)."""
        return self.piece_m[option] if option < len(self.piece_m) else None

    def stage(self) -> Stage:
        """The engine stage of this element (:data:`LINE_STAGES`, or a lumped part)."""
        if self.kind in LINE_STAGES:
            return LINE_STAGES[self.kind]
        return Stage("lumped", self.connection, self.part)


@dataclass(frozen=True)
class Choice:
    """Discrete choices for one network: per element, the medium index and the stub end."""

    medium: tuple[int, ...]
    short: tuple[bool, ...]


@dataclass(frozen=True)
class FreeParam:
    """One continuous search coordinate: which element and which quantity it sets."""

    element: int
    quantity: Literal["length", "z0", "value"]
    bound: Bound


@dataclass(frozen=True)
class NetworkSpec:
    """An ordered network (load outwards) and the search space it implies."""

    elements: tuple[ElementSpec, ...]
    stock: tuple[tuple[str, float, int], ...] = ()  # (cable name, piece length m, pieces on the shelf)
    free: tuple[FreeParam, ...] = field(init=False)

    def __post_init__(self) -> None:
        free = []
        for i, el in enumerate(self.elements):
            if el.is_line_like and el.length is not None and not el.length.fixed:
                free.append(FreeParam(i, "length", el.length))
            if el.is_line_like and el.z0_free is not None and not el.z0_free.fixed:
                free.append(FreeParam(i, "z0", el.z0_free))
            if el.kind == "lumped" and el.value is not None and not el.value.fixed:
                free.append(FreeParam(i, "value", el.value))
        object.__setattr__(self, "free", tuple(free))

    @property
    def dim(self) -> int:
        return len(self.free)

    @property
    def stages(self) -> list[Stage]:
        return [el.stage() for el in self.elements]

    def choice_space(self) -> list[tuple[str, int, list]]:
        """The discrete dimensions: (name, element index, options)."""
        out: list[tuple[str, int, list]] = []
        for i, el in enumerate(self.elements):
            if el.is_line_like and len(el.media) > 1:
                out.append((f"e{i}.medium", i, list(range(len(el.media)))))
            if el.kind in ("shunt_stub", "series_stub") and el.end == "either":
                out.append((f"e{i}.end", i, ["open", "short"]))
        return out

    def default_choice(self) -> Choice:
        return Choice(
            medium=tuple(0 for _ in self.elements),
            short=tuple(el.end == "short" for el in self.elements),
        )

    def choice_from(self, picks: Mapping[str, Any]) -> Choice:
        """Build a :class:`Choice` from ``{name: option}`` as listed by :meth:`choice_space`."""
        base = self.default_choice()
        medium, short = list(base.medium), list(base.short)
        for name, i, _ in self.choice_space():
            if name not in picks:
                continue
            if name.endswith(".medium"):
                medium[i] = int(picks[name])
            else:
                short[i] = picks[name] == "short"
        return Choice(tuple(medium), tuple(short))

    def values(self, u: np.ndarray) -> list[dict[str, np.ndarray]]:
        """Per element, the physical quantities set by unit vectors ``u`` (n, dim)."""
        u = np.atleast_2d(u)
        n = u.shape[0]
        out: list[dict[str, np.ndarray]] = []
        for el in self.elements:
            d: dict[str, np.ndarray] = {}
            if el.is_line_like:
                lb = el.length if el.length is not None else Bound(0.0, 0.0)
                d["length"] = np.full(n, lb.lo)
                if el.z0_free is not None:
                    d["z0"] = np.full(n, el.z0_free.lo)
            else:
                vb = el.value if el.value is not None else Bound(0.0, 0.0)
                d["value"] = np.full(n, vb.lo)
            out.append(d)
        for col, fp in enumerate(self.free):
            out[fp.element][fp.quantity] = fp.bound.from_unit(u[:, col])
        return out

    def delay(self, values: list[dict[str, np.ndarray]], choice: Choice, i: int) -> np.ndarray:
        """Delay (s) of line-like element ``i``'s cable section, excluding allowances."""
        el = self.elements[i]
        if not el.is_line_like:
            raise ValueError(f"element {i} is a lumped part, which has no delay")
        med = el.media[choice.medium[i]]
        piece = el.piece(choice.medium[i])
        length = values[i]["length"]
        if piece is not None:
            return np.full(np.shape(length), piece / (med.vf * C0))
        return length if el.length_basis == "delay" else length / (med.vf * C0)

    def delays(self, values: list[dict[str, np.ndarray]], choice: Choice) -> list[np.ndarray | None]:
        """:meth:`delay` of every element, None for lumped parts."""
        return [self.delay(values, choice, i) if el.is_line_like else None for i, el in enumerate(self.elements)]

    def pieces_used(self, choice: Choice) -> dict[tuple[str, float], int]:
        """Stock pieces a choice takes from the shelf: {(cable name, length m): count}."""
        used: dict[tuple[str, float], int] = {}
        for i, el in enumerate(self.elements):
            if not el.is_line_like:
                continue
            piece = el.piece(choice.medium[i])
            if piece is not None:
                key = (el.media[choice.medium[i]].name, round(piece, 9))
                used[key] = used.get(key, 0) + 1
        return used

    def stock_shortage(self, choice: Choice) -> int:
        """Pieces a choice takes beyond what the shelf holds (0 = buildable from the shelf)."""
        have = {(name, round(length, 9)): count for name, length, count in self.stock}
        return sum(max(0, n - have.get(key, 0)) for key, n in self.pieces_used(choice).items())

    def snap_candidates(self, u: np.ndarray, reach: int = 1) -> np.ndarray:
        """Cut lengths of ``u`` (dim,) on whole cut steps: every combination of the step below and
        above each cut length, widened by ``reach`` more steps each way while there are few cut
        lengths (≤ 4096 combinations), shaped (m, dim).

        Cut lengths stay inside their bounds; a network without cut steps gives ``u`` itself.
        """
        u = np.asarray(u, dtype=float).reshape(-1)
        options: list[list] = []
        cols: list[int] = []
        bounds: list[tuple[int, int, float, Bound]] = []
        for col, fp in enumerate(self.free):
            el = self.elements[fp.element]
            step = el.cut_step_m
            if fp.quantity != "length" or step is None or el.length_basis != "physical":
                continue
            b = fp.bound
            x = float(b.from_unit(np.array(u[col])))
            lo_n, hi_n = math.ceil(b.lo / step - 1e-9), math.floor(b.hi / step + 1e-9)
            if lo_n > hi_n:
                continue
            k = math.floor(x / step + 1e-9)
            options.append([n for n in range(k - reach, k + reach + 2)])
            cols.append(col)
            bounds.append((lo_n, hi_n, step, b))
        if not cols:
            return u.reshape(1, -1)
        if math.prod(len(o) for o in options) > 4096:
            options = [o[reach:reach + 2] for o in options]
        options = [[b.to_unit(n * step) for n in sorted({min(max(n, lo), hi) for n in o})]
                   for o, (lo, hi, step, b) in zip(options, bounds, strict=True)]
        grid = np.array(list(itertools.product(*options)), dtype=float)
        out = np.repeat(u.reshape(1, -1), grid.shape[0], axis=0)
        out[:, cols] = grid
        return out

    def engine_params(self, u: np.ndarray, choice: Choice) -> list[dict]:
        """Engine parameter dicts for unit vectors ``u`` (n, dim) under discrete ``choice``."""
        vals = self.values(u)
        params: list[dict] = []
        for i, el in enumerate(self.elements):
            if not el.is_line_like:
                params.append({"value": vals[i]["value"]})
                continue
            med = el.media[choice.medium[i]]
            tau = self.delay(vals, choice, i)
            metres = tau * med.vf * C0
            p = {
                "z0": vals[i].get("z0", med.z0),
                "delay": tau + el.extra_delay,
            }
            if med.kc or med.kd:
                p["loss_c"] = med.kc * metres
                p["loss_d"] = med.kd * metres
            if el.kind != "line":
                p["short"] = choice.short[i]
            params.append(p)
        return params

    def total_delay(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Sum of line and stub delays (s) including allowances, per candidate: the build size."""
        vals = self.values(u)
        total = np.zeros(np.atleast_2d(u).shape[0])
        for el, tau in zip(self.elements, self.delays(vals, choice), strict=True):
            if tau is not None:
                total = total + tau + el.extra_delay
        return total
