"""Live tuning of one design: a control per piece in mm of its cable (and Z0 where the study leaves it
free), mapped back onto the design's search vector, and the design's figures from our own engine.

A tuned design is an ordinary :class:`~optmatch.domain.design.Design` (its discrete ``choice`` and its
vector ``u`` over the network's free parameters), so it is evaluated, checked for yield and kept exactly
like the search's designs.  Each control's range is the study's own bound for that quantity: a length
fixed by the study file (a fixed spacing) or a stock piece cannot be tuned, and says why.

Units: mm (cable section, connector to connector, allowances excluded), Ω, dB.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace

import numpy as np

from optmatch.domain.design import Design, Performance, worst_and_each
from optmatch.domain.microstrip import velocity_factor
from optmatch.domain.network import ElementSpec, Medium
from optmatch.domain.problem import Problem
from optmatch.domain.tolerance import Robustness, Spread, monte_carlo
from optmatch.units import C0

DEFAULT_STEP_MM = 0.1
Z0_STEP_OHM = 0.1


@dataclass(frozen=True)
class Control:
    """One tuning control: ``key`` (``e{i}.length`` or ``e{i}.z0``), element ``i`` (load outwards, from 0),
    the value now and its range (mm or Ω), the step, and whether it can move (``why`` not, when fixed)."""

    key: str
    element: int
    quantity: str
    label: str
    unit: str
    value: float
    lo: float
    hi: float
    step: float
    free: bool
    why: str = ""


def _vf(el: ElementSpec, med: Medium, z0: float) -> float:
    """The velocity factor that turns the element's delay into mm of its cable (a printed line's follows Z0)."""
    return velocity_factor(z0, med.printed) if med.printed is not None else med.vf


def _z0(problem: Problem, design: Design, i: int) -> float:
    vals = problem.network.values(design.vector())
    el = problem.network.elements[i]
    return float(vals[i]["z0"][0]) if "z0" in vals[i] else el.media[design.choice.medium[i]].z0


def _length_mm(problem: Problem, design: Design, i: int) -> float:
    """The cable section of element ``i`` in mm (as the build sheet gives it)."""
    net = problem.network
    tau = float(net.delay(net.values(design.vector()), design.choice, i)[0])
    el = net.elements[i]
    return tau * _vf(el, el.media[design.choice.medium[i]], _z0(problem, design, i)) * C0 * 1e3


def part_label(el: ElementSpec, i: int, short: bool) -> str:
    """``2 · shunt stub (open)``: the element's number (load outwards, from 1) and kind."""
    end = f" ({'short' if short else 'open'})" if el.kind in ("shunt_stub", "series_stub") else ""
    return f"{i + 1} · {el.kind.replace('_', ' ')}{end}"


def controls(problem: Problem, design: Design) -> list[Control]:
    """The tuning controls of ``design``, one per piece (its length in mm) and per free Z0."""
    net = problem.network
    columns = {(fp.element, fp.quantity): col for col, fp in enumerate(net.free)}
    out: list[Control] = []
    for i, el in enumerate(net.elements):
        if not el.is_line_like:
            continue
        option = design.choice.medium[i]
        med = el.media[option]
        label = part_label(el, i, design.choice.short[i])
        mm = _length_mm(problem, design, i)
        z0 = _z0(problem, design, i)
        vf = _vf(el, med, z0)
        step = el.cut_step_m * 1e3 if el.cut_step_m else DEFAULT_STEP_MM
        if el.piece(option) is not None:
            out.append(Control(f"e{i}.length", i, "length", label, "mm", mm, mm, mm, step, False, "a stock piece"))
        elif (i, "length") not in columns or el.length is None:
            out.append(Control(f"e{i}.length", i, "length", label, "mm", mm, mm, mm, step, False,
                               "fixed by the study file"))
        else:
            b = el.length
            scale = 1e3 if el.length_basis == "physical" else vf * C0 * 1e3
            out.append(Control(f"e{i}.length", i, "length", label, "mm", mm, b.lo * scale, b.hi * scale, step, True))
        if (i, "z0") in columns and el.z0_free is not None:
            out.append(Control(f"e{i}.z0", i, "z0", label, "Ω", z0, el.z0_free.lo, el.z0_free.hi, Z0_STEP_OHM, True))
    return out


def tuned(problem: Problem, design: Design, values: Mapping[str, float]) -> Design:
    """``design`` with the controls in ``values`` (key → mm or Ω) set, clipped to their ranges; margin and
    total length computed again by the engine.  Keys of fixed or unknown controls are ignored."""
    net = problem.network
    columns = {(fp.element, fp.quantity): col for col, fp in enumerate(net.free)}
    u = np.array(design.u, dtype=float)
    for (i, quantity), col in columns.items():  # Z0 first: a printed line's mm depend on it
        if quantity == "z0" and f"e{i}.z0" in values:
            u[col] = net.free[col].bound.to_unit(float(values[f"e{i}.z0"]))
    with_z0 = replace(design, u=tuple(float(x) for x in u))
    for (i, quantity), col in columns.items():
        key = f"e{i}.length"
        el = net.elements[i]
        if quantity != "length" or key not in values or el.piece(design.choice.medium[i]) is not None:
            continue
        metres = float(values[key]) * 1e-3
        if el.length_basis == "physical":
            x = metres
        else:
            vf = _vf(el, el.media[design.choice.medium[i]], _z0(problem, with_z0, i))
            x = metres / (vf * C0)
        u[col] = net.free[col].bound.to_unit(x)
    vec = u.reshape(1, -1)
    margin = float(problem.margins(vec, design.choice)[0])
    length = float(problem.length_wl(vec, design.choice)[0])
    return Design(design.choice, tuple(float(x) for x in u), margin, length, design.trial)


@dataclass(frozen=True)
class Tuned:
    """A tuned design with its band figures (one engine evaluation per load) and its yield (Monte Carlo
    builds).  ``performance``: on the worst load (the only one with one load); ``each``: on every load
    of a study with several (empty otherwise)."""

    design: Design
    performance: Performance
    robustness: Robustness
    each: tuple[Performance, ...] = ()


def evaluate(problem: Problem, design: Design, spread: Spread) -> Tuned:
    """The figures shown while tuning: the curve and margin, and the yield under the study's spreads."""
    worst, each = worst_and_each(problem, design)
    return Tuned(design, worst, monte_carlo(problem, design, spread), tuple(each))


__all__ = ["Control", "Tuned", "controls", "evaluate", "part_label", "tuned"]
