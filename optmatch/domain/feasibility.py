"""The ceiling: the Bode–Fano limit on a flat in-band return loss for the load, before any search.

Bode–Fano integral limits for the four simple loads (D. M. Pozar, Microwave Engineering, 4th ed.,
sec. 5.9; recalled from memory), for the reflection Γ(ω) at the input of any lossless network
that feeds the load:

    parallel R–C   ∫ ln(1/|Γ|) dω      ≤ π/(RC)
    series R–C     ∫ ω⁻² ln(1/|Γ|) dω  ≤ πRC
    series R–L     ∫ ln(1/|Γ|) dω      ≤ πR/L
    parallel R–L   ∫ ω⁻² ln(1/|Γ|) dω  ≤ πL/R

With |Γ| flat at Γm over the band (and 1 elsewhere, the best use of the integral) each gives a
least Γm, hence a highest flat return loss: the ceiling.  A mask asks for
Σ_segments ln(1/Γreq)·∫ w dω of the integral (w = 1 or ω⁻²); more than the bound cannot be met by
any lossless network.

The load is fitted over the band by R with L and/or C, all in series or all in parallel (the four
simple loads and the two R–L–C loads; a series R–L–C obeys both series limits, since the other
reactance can be taken into the lossless network, and likewise in parallel), and the tightest limit
that holds for the closer fit gives the ceiling.  It is exact when the load is one of the four
simple loads (the fit is exact to rounding); for any other load (an R–L–C model, a spot impedance,
a measured load) it is an estimate, reported with the fit's largest |ΔΓ|.  Units: Ω, F, H, Hz, dB.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Literal, get_args

import numpy as np
from scipy.optimize import least_squares, nnls

from optmatch.domain.mask import Grid

NP_TO_DB = 20.0 / math.log(10.0)
EXACT_FIT = 1e-9  # |ΔΓ| below which a fitted model is the load itself
# Above this return loss no cut cable and no calibrated VNA holds or shows a match (a fact of the trade,
# common practice, no source): a ceiling beyond it is stated as "no practical limit", its number kept.
PRACTICAL_RL_DB = 60.0

ModelName = Literal["parallel RC", "series RC", "series RL", "parallel RL", "series RLC", "parallel RLC",
                    "resistive", "reactive"]


@dataclass(frozen=True)
class Feasibility:
    """The ceiling for one study.

    model: the load model the bound is taken from; values: its R (Ω) and C (F) or L (H);
    ceiling_return_loss_db: the highest return loss a lossless network can hold flat over the
    mask's bands (None: no limit, a resistive load); basis: ``exact`` or ``estimated``;
    fit_error: largest |Γ_model − Γ_load| over the band (system impedance; 0 for an exact model);
    demand_share: the mask's use of the Bode–Fano integral as a share of the bound (> 1 cannot be
    met); mask_return_loss_db: the strictest requirement of the mask (dB).
    """

    model: ModelName
    values: dict[str, float] = field(default_factory=dict)
    ceiling_return_loss_db: float | None = None
    basis: Literal["exact", "estimated"] = "exact"
    fit_error: float = 0.0
    demand_share: float = 0.0
    mask_return_loss_db: float = 0.0
    limit: str = ""  # the two-element Bode–Fano limit that sets the ceiling
    load: str = ""  # with several loads: the one whose ceiling is the lowest
    loads: int = 1  # how many loads the ceiling was taken over

    @property
    def feasible(self) -> bool:
        """False when the mask asks for more of the integral than the bound allows."""
        return self.demand_share <= 1.0

    def as_dict(self) -> dict:
        return {
            "model": self.model,
            "values": dict(self.values),
            "ceiling_return_loss_db": self.ceiling_return_loss_db,
            "basis": self.basis,
            "fit_error": self.fit_error,
            "demand_share": self.demand_share,
            "mask_return_loss_db": self.mask_return_loss_db,
            "limit": self.limit,
            "load": self.load,
            "loads": self.loads,
            "feasible": self.feasible,
            "statement": self.statement(),
        }

    def statement(self) -> str:
        """One or two plain sentences for the terminal and reports."""
        if self.ceiling_return_loss_db is None:
            if self.loads > 1:
                return f"ceiling: none (all {self.loads} loads are resistive over the band; Bode–Fano sets no limit)"
            return ("ceiling: none (the load is resistive over the band; Bode–Fano sets no limit)")
        how = "exact" if self.basis == "exact" else f"estimated: closest fit, |ΔΓ| ≤ {self.fit_error:.3f}"
        vals = ", ".join(_fmt_value(k, v) for k, v in self.values.items())
        which = "" if self.limit == self.model else f", its {self.limit} limit"
        whose = f"; the lowest of {self.loads} loads, set by load {self.load}" if self.loads > 1 else ""
        ceil = self.ceiling_return_loss_db
        if ceil > PRACTICAL_RL_DB:  # a nearly resistive load: the bound is true but says nothing useful
            text = (f"ceiling: no practical limit (Bode–Fano allows {ceil:.0f} dB flat over the band, far above "
                    f"the {PRACTICAL_RL_DB:.0f} dB any build or measurement holds; {self.model} load "
                    f"{vals}{which}; {how}{whose})")
        else:
            text = (f"ceiling: {ceil:.2f} dB flat return loss over the band "
                    f"(Bode–Fano, {self.model} load {vals}{which}; {how}{whose})")
        if not self.feasible:
            lead = "By this estimate, no" if self.basis == "estimated" else "No"
            text += (f". {lead} lossless network can meet this mask across the band (it asks for "
                     f"{100 * self.demand_share:.0f} % of the Bode–Fano limit); "
                     "searching for the closest design anyway")
        return text


def _fmt_value(key: str, value: float) -> str:
    if key == "r_ohm":
        return f"R {value:.4g} Ω"
    if key == "c_f":
        return f"C {value * 1e12:.4g} pF"
    return f"L {value * 1e9:.4g} nH"


# ---------------------------------------------------------------- the four bounds


def bound(model: ModelName, r_ohm: float, x: float) -> float:
    """Right-hand side of the Bode–Fano integral for ``model`` with R and C (F) or L (H) ``x``."""
    if model == "parallel RC":
        return math.pi / (r_ohm * x)
    if model == "series RC":
        return math.pi * r_ohm * x
    if model == "series RL":
        return math.pi * r_ohm / x
    if model == "parallel RL":
        return math.pi * x / r_ohm
    raise ValueError(f"no Bode–Fano bound for {model!r}")


def _inverse_square_weight(model: ModelName) -> bool:
    return model in ("series RC", "parallel RL")


def weight_integral(model: ModelName, bands: list[tuple[float, float]]) -> float:
    """∫ w dω over the bands (Hz), w = 1 or ω⁻² as the model's integral has it."""
    total = 0.0
    for f_lo, f_hi in bands:
        w1, w2 = 2 * math.pi * f_lo, 2 * math.pi * f_hi
        total += (1.0 / w1 - 1.0 / w2) if _inverse_square_weight(model) else (w2 - w1)
    return total


def flat_ceiling_db(model: ModelName, r_ohm: float, x: float, bands: list[tuple[float, float]]) -> float:
    """Highest return loss (dB) held flat over ``bands``: ln(1/Γm) = bound / ∫ w dω."""
    return NP_TO_DB * bound(model, r_ohm, x) / weight_integral(model, bands)


def demand(model: ModelName, levels: list[tuple[float, float, float]]) -> float:
    """Σ ln(1/Γreq)·∫ w dω of a mask given as disjoint (f_lo, f_hi, return loss dB) pieces."""
    return sum(rl / NP_TO_DB * weight_integral(model, [(lo, hi)]) for lo, hi, rl in levels)


def mask_levels(grid: Grid) -> list[tuple[float, float, float]]:
    """The mask as disjoint pieces (f_lo, f_hi, strictest return loss dB) over its segments."""
    segs = [s for s in grid.segments if s.f_hi > s.f_lo]
    edges = sorted({e for s in segs for e in (s.f_lo, s.f_hi)})
    out = []
    for lo, hi in zip(edges[:-1], edges[1:], strict=False):
        mid = 0.5 * (lo + hi)
        req = [s.min_rl_db for s in segs if s.f_lo <= mid <= s.f_hi]
        if req and max(req) > 0:
            out.append((lo, hi, max(req)))
    return out


# ---------------------------------------------------------------- fitting


def _model_z(model: ModelName, r_ohm: float, x: float, omega: np.ndarray) -> np.ndarray:
    if model == "series RC":
        return r_ohm + 1.0 / (1j * omega * x)
    if model == "series RL":
        return r_ohm + 1j * omega * x
    if model == "parallel RC":
        return 1.0 / (1.0 / r_ohm + 1j * omega * x)
    return 1.0 / (1.0 / r_ohm + 1.0 / (1j * omega * x))  # parallel RL


def model_impedance(model: ModelName, r_ohm: float, x: float, freq_hz: np.ndarray) -> np.ndarray:
    """Impedance (Ω) of one of the four models with R and C (F) or L (H) ``x`` at ``freq_hz``."""
    return _model_z(model, r_ohm, x, 2 * np.pi * np.asarray(freq_hz, dtype=float))


def _gamma(z: np.ndarray, z_sys: float) -> np.ndarray:
    return (z - z_sys) / (z + z_sys)


Family = Literal["series", "parallel"]


def fit_family(family: Family, z: np.ndarray, freq: np.ndarray, z_sys: float) -> dict | None:
    """Closest R with L and/or C, all in series or all in parallel, to the load ``z`` (Ω) on
    ``freq`` (Hz): least squares on Γ in the system impedance, each reactive part ≥ 0.

    Returns {"r_ohm", "l_h" (or None), "c_f" (or None), "error": largest |ΔΓ|}, or None when the
    fitted resistance is not positive.  The series family holds series R–L, R–C and R–L–C; the
    parallel one parallel R–C, R–L and R–L–C.
    """
    omega = 2 * np.pi * freq
    w0 = float(np.sqrt(omega.min() * omega.max()))
    up, down = omega / w0, w0 / omega
    if family == "series":
        resist, react, scale = z.real, z.imag, 1.0 / z_sys  # ohms, made dimensionless
    else:
        y = 1.0 / z
        resist, react, scale = y.real, y.imag, z_sys  # siemens, made dimensionless
    r0 = float(np.mean(resist))
    if not r0 > 0:
        return None
    coef, _ = nnls(np.column_stack([up, -down]), react)  # reactive part ≈ a·ω/ω0 − b·ω0/ω
    start = np.array([r0, *coef]) * scale
    g_load = _gamma(z, z_sys)

    def model(p: np.ndarray) -> np.ndarray:
        part = (p[0] + 1j * (p[1] * up - p[2] * down)) / scale
        return part if family == "series" else 1.0 / part

    def resid(p: np.ndarray) -> np.ndarray:
        d = _gamma(model(p), z_sys) - g_load
        return np.concatenate([d.real, d.imag])

    best = start
    if np.max(np.abs(resid(start))) > EXACT_FIT:
        lo = np.array([1e-12, 0.0, 0.0])
        sol = least_squares(resid, np.maximum(start, lo), bounds=(lo, np.inf), method="trf", xtol=1e-15,
                            ftol=1e-15, gtol=1e-15, max_nfev=2000)
        if np.all(np.isfinite(sol.x)) and np.sum(resid(sol.x) ** 2) <= np.sum(resid(start) ** 2):
            best = sol.x
    err = float(np.max(np.abs(_gamma(model(best), z_sys) - g_load)))
    r_part, a, b = best / scale
    tiny = 1e-9 * max(a, b)
    if family == "series":  # R + jωL + 1/(jωC): a = ω0·L, b = 1/(ω0·C)
        return {"r_ohm": float(r_part), "l_h": float(a / w0) if a > tiny else None,
                "c_f": float(1.0 / (b * w0)) if b > tiny else None, "error": err}
    # 1/R + jωC + 1/(jωL): a = ω0·C, b = 1/(ω0·L)
    return {"r_ohm": float(1.0 / r_part), "l_h": float(1.0 / (b * w0)) if b > tiny else None,
            "c_f": float(a / w0) if a > tiny else None, "error": err}


def _limits(family: Family, fit: dict) -> list[tuple[ModelName, float]]:
    """The Bode–Fano limits that hold for a fitted load: (two-element model, its C or L).  A
    series R–L–C obeys both the series R–L and the series R–C limit (the other reactance can be
    taken into the lossless network), and likewise in parallel."""
    out: list[tuple[ModelName, float]] = []
    if fit["l_h"] is not None:
        out.append(("series RL" if family == "series" else "parallel RL", fit["l_h"]))
    if fit["c_f"] is not None:
        out.append(("series RC" if family == "series" else "parallel RC", fit["c_f"]))
    return out


# Every model name by its text; a fit with limits has at least one reactance, so its name is here.
_MODEL_NAMES: dict[str, ModelName] = {name: name for name in get_args(ModelName)}
RESISTIVE_FRACTION = 1e-6  # |X| below this share of |Z| everywhere: a resistive load


def ceiling(zload: np.ndarray, grid: Grid, z_sys: float) -> Feasibility:
    """The Bode–Fano ceiling of a load ``zload`` (Ω, on ``grid.freq``) against ``grid``'s mask.

    The load is fitted by R with L and/or C in series and in parallel (the four simple loads and
    the two R–L–C loads); the closer fit is taken, every Bode–Fano limit that holds for it is
    applied, and the tightest gives the ceiling.  Exact when the load is one of the four simple
    loads; an estimate otherwise, with the fit's largest |ΔΓ|.
    """
    levels = mask_levels(grid)
    mask_rl = max((rl for _, _, rl in levels), default=float(np.max(grid.min_rl_db)))
    lo = min((a for a, _, _ in levels), default=float(grid.freq.min()))
    hi = max((b for _, b, _ in levels), default=float(grid.freq.max()))
    inside = (grid.freq >= lo) & (grid.freq <= hi)
    f, z = grid.freq[inside], np.asarray(zload)[inside]
    if not levels or f.size == 0:  # single frequencies only: no band, no limit
        return Feasibility("resistive", {}, None, "exact", 0.0, 0.0, mask_rl)
    if np.all(np.abs(z.imag) <= RESISTIVE_FRACTION * np.abs(z)):
        return Feasibility("resistive", {"r_ohm": float(np.mean(z.real))}, None, "exact", 0.0, 0.0, mask_rl)
    if np.any(z.real <= 0.0):
        return Feasibility("reactive", {}, 0.0, "exact", 0.0, math.inf, mask_rl)
    families: tuple[Family, ...] = ("series", "parallel")
    fits = [(fit["error"], family, fit) for family in families
            if (fit := fit_family(family, z, f, z_sys)) is not None and _limits(family, fit)]
    if not fits:
        return Feasibility("resistive", {}, None, "estimated", math.inf, 0.0, mask_rl)
    err, family, fit = min(fits, key=lambda t: t[0])
    bands = [(a, b) for a, b, _ in levels]
    limits = _limits(family, fit)
    ceilings = [(flat_ceiling_db(m, fit["r_ohm"], x, bands), m, x) for m, x in limits]
    ceil_db, limit, _ = min(ceilings)
    share = max(demand(m, levels) / bound(m, fit["r_ohm"], x) for m, x in limits)
    name = _MODEL_NAMES[f"{family} R{'L' if fit['l_h'] is not None else ''}{'C' if fit['c_f'] is not None else ''}"]
    values = {k: fit[k] for k in ("r_ohm", "l_h", "c_f") if fit[k] is not None}
    exact = err <= EXACT_FIT and len(limits) == 1
    return Feasibility(name, values, ceil_db, "exact" if exact else "estimated", 0.0 if exact else err, share,
                       mask_rl, limit)


def lowest_ceiling(zloads: np.ndarray, names: tuple[str, ...], grid: Grid, z_sys: float) -> Feasibility:
    """The lowest :func:`ceiling` over several loads (``zloads`` (L, F), Ω on ``grid.freq``; a
    resistive load, with no limit, counts as the highest), naming the load that sets it.  One
    load (no ``names``): its own ceiling."""
    z = np.atleast_2d(np.asarray(zloads))
    if not names:
        return ceiling(z[0], grid, z_sys)
    each = [ceiling(row, grid, z_sys) for row in z]
    k = min(range(len(each)), key=lambda i: (math.inf if each[i].ceiling_return_loss_db is None
                                            else each[i].ceiling_return_loss_db, -each[i].demand_share))
    return replace(each[k], load=names[k], loads=len(each))
