"""The explorer's plots as plotly figures (no hand-written plotting JavaScript): return loss against
frequency with the mask and the bare load, the Smith chart, and the scatter of every kept design.

Our own plain look: white ground, thin grey grid, a few muted colours; the tuned curve is the one strong
colour.  Units: MHz on axes, dB, Ω normalised to the system impedance on the Smith chart.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import plotly.graph_objects as go

from optmatch.outputs.document import MaskSegment, SummaryDoc

INK = "#222222"
GRID = "#dddddd"
MASK_FILL = "rgba(150, 150, 150, 0.25)"
LOAD = "#777777"
TUNED = "#b03a2e"
SELECTED = "#1b4f72"
PALETTE = ("#1b4f72", "#7d6608", "#196f3d", "#6c3483", "#0e6655", "#7b241c", "#515a5a", "#a04000")
YIELD_SCALE = [[0.0, "#922b21"], [0.5, "#d4ac0d"], [1.0, "#1e8449"]]
SYMBOLS = ("circle", "square", "triangle-up", "cross", "star", "hexagon", "triangle-down", "x")
VARIANT_SYMBOL = "diamond"
FONT = {"family": "DejaVu Sans, Helvetica, Arial, sans-serif", "size": 12, "color": INK}


@dataclass(frozen=True)
class Curve:
    """One response to draw: label, frequencies (Hz), complex Γ at the input, and how to draw it."""

    label: str
    freq_hz: np.ndarray
    gamma: np.ndarray
    colour: str
    dash: str = "solid"
    width: float = 1.6


def _base(fig: go.Figure, title: str) -> go.Figure:
    fig.update_layout(title={"text": title, "x": 0.0, "xanchor": "left", "font": {"size": 13}}, font=FONT,
                      paper_bgcolor="white", plot_bgcolor="white", margin={"l": 55, "r": 15, "t": 40, "b": 45},
                      legend={"orientation": "h", "y": -0.2, "x": 0.0}, uirevision="keep")
    return fig


def _rl_db(gamma: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return np.minimum(-20.0 * np.log10(np.maximum(np.abs(gamma), 1e-15)), 80.0)


def return_loss_figure(mask: Sequence[MaskSegment], curves: Sequence[Curve]) -> go.Figure:
    """Return loss (dB, up is better) against frequency (MHz); each mask segment shades what it forbids."""
    fig = go.Figure()
    top = max([s.min_rl_db for s in mask] + [10.0])
    for k, s in enumerate(mask):
        lo, hi = s.f_lo_hz / 1e6, s.f_hi_hz / 1e6
        fig.add_trace(go.Scatter(x=[lo, lo, hi, hi, lo], y=[0, s.min_rl_db, s.min_rl_db, 0, 0], fill="toself",
                                 fillcolor=MASK_FILL, line={"color": "rgba(0,0,0,0)"}, hoverinfo="skip",
                                 name="mask (below the line fails)", showlegend=k == 0, legendgroup="mask"))
        fig.add_trace(go.Scatter(x=[lo, hi], y=[s.min_rl_db, s.min_rl_db], mode="lines",
                                 line={"color": INK, "width": 1.2}, hoverinfo="skip", showlegend=False,
                                 legendgroup="mask"))
    highest = top
    for c in curves:
        rl = _rl_db(c.gamma)
        highest = max(highest, float(np.max(rl)))
        fig.add_trace(go.Scatter(x=c.freq_hz / 1e6, y=rl, mode="lines", name=c.label,
                                 line={"color": c.colour, "dash": c.dash, "width": c.width},
                                 hovertemplate="%{x:.3f} MHz: %{y:.2f} dB<extra>" + c.label + "</extra>"))
    fig.update_xaxes(title="frequency (MHz)", gridcolor=GRID, zeroline=False, linecolor=INK)
    fig.update_yaxes(title="return loss (dB)", gridcolor=GRID, zeroline=False, linecolor=INK,
                     range=[0, min(highest, 60.0) + 3.0])
    return _base(fig, "Return loss against the mask")


def smith_figure(curves: Sequence[Curve], z_sys: float) -> go.Figure:
    """The input impedance of each curve on the Smith chart, normalised to ``z_sys``."""
    fig = go.Figure()
    for c in curves:
        with np.errstate(divide="ignore", invalid="ignore"):
            z = (1.0 + c.gamma) / (1.0 - c.gamma)
        z = np.where(np.isfinite(z), z, 1e6)
        fig.add_trace(go.Scattersmith(real=np.real(z), imag=np.imag(z), mode="lines", name=c.label,
                                      line={"color": c.colour, "dash": c.dash, "width": c.width},
                                      hovertemplate=f"{c.label}: "
                                      + "%{real:.3f} %{imag:+.3f}j (normalised)<extra></extra>"))
        fig.add_trace(go.Scattersmith(real=[np.real(z[0])], imag=[np.imag(z[0])], mode="markers", showlegend=False,
                                      marker={"color": c.colour, "size": 6, "symbol": "circle-open"},
                                      hoverinfo="skip"))
    fig.update_layout(smith={"bgcolor": "white", "realaxis": {"gridcolor": GRID, "linecolor": INK},
                             "imaginaryaxis": {"gridcolor": GRID, "linecolor": INK}})
    return _base(fig, f"Smith chart, normalised to {z_sys:g} Ω (○ = low band edge)")


def scatter_figure(summary: SummaryDoc, selected: str | None) -> go.Figure:
    """Margin against total length of every kept design; colour by yield, marker by alternative, variants
    as diamonds; the selected design ringed.  Each point's ``customdata`` is its key (``#3``, ``variant-1``)."""
    fig = go.Figure()
    groups: dict[str, list[tuple[str, str, float, float, float | None]]] = {}
    for d in summary.designs:
        y = d.robustness.yield_frac if d.robustness is not None else None
        groups.setdefault(d.alternative or "designs", []).append(
            (f"#{d.rank}", f"#{d.rank}", d.total_length_wl, d.margin_db, y))
    for v in summary.variants:
        y = v.design.robustness.yield_frac if v.design.robustness is not None else None
        groups.setdefault("kept variants", []).append((v.name, v.name, v.design.total_length_wl, v.design.margin_db, y))
    names = [a.name for a in summary.alternatives]
    first = True
    where: dict[str, tuple[float, float]] = {}
    for g, (group, points) in enumerate(groups.items()):
        if group == "kept variants":
            symbol = VARIANT_SYMBOL
        else:
            symbol = SYMBOLS[names.index(group) % len(SYMBOLS)] if group in names else SYMBOLS[g % len(SYMBOLS)]
        ys = [p[4] for p in points]
        colours = [100.0 * y if y is not None else 0.0 for y in ys]
        fig.add_trace(go.Scatter(
            x=[p[2] for p in points], y=[min(p[3], 99.0) for p in points], mode="markers", name=group,
            customdata=[p[0] for p in points],
            text=[f"{p[1]}: yield {'–' if p[4] is None else f'{100 * p[4]:.0f}%'}" for p in points],
            hovertemplate="%{text}<br>margin %{y:+.2f} dB, length %{x:.3f} λ<extra>" + group + "</extra>",
            marker={"symbol": symbol, "size": 12, "color": colours, "cmin": 0, "cmax": 100, "colorscale": YIELD_SCALE,
                    "line": {"color": INK, "width": 0.8},
                    "colorbar": {"title": {"text": "yield (%)"}, "thickness": 12} if first else None,
                    "showscale": first}))
        first = False
        for p in points:
            where[p[0]] = (p[2], min(p[3], 99.0))
    if selected in where:
        x, y = where[selected]
        fig.add_trace(go.Scatter(x=[x], y=[y], mode="markers", name=f"selected {selected}", hoverinfo="skip",
                                 marker={"symbol": "circle-open", "size": 22, "color": SELECTED,
                                         "line": {"width": 2.5, "color": SELECTED}}))
    fig.add_hline(y=0.0, line={"color": INK, "width": 1, "dash": "dot"})
    fig.update_xaxes(title="total length (wavelengths at the reference frequency)", gridcolor=GRID, zeroline=False,
                     linecolor=INK)
    fig.update_yaxes(title="margin (dB)", gridcolor=GRID, zeroline=False, linecolor=INK)
    return _base(fig, "Every kept design: margin against size (click one to select it)")


__all__ = ["PALETTE", "TUNED", "Curve", "return_loss_figure", "scatter_figure", "smith_figure"]
