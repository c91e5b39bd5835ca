"""Figures of a finished study: return loss against the mask, Smith chart of the input, Pareto front.

Drawn with matplotlib's object interface on the Agg canvas (no GUI, no global pyplot state) and
saved atomically.  Units on the axes: MHz, dB, wavelengths.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle

from optmatch.domain.design import Performance
from optmatch.domain.mask import Grid, Segment
from optmatch.io.atomic import save_figure_atomic

FIGSIZE_IN = (8.0, 5.0)
SMITH_FIGSIZE_IN = (11.0, 6.0)
DPI = 120
# our own palette: designs in ranked order, then the mask and the chart grid
DESIGN_COLOURS = ("#1b6f8a", "#d9822b", "#6c4f9e", "#3f8f4f", "#a63d57")
FORBIDDEN = "#e8b4b0"
REQUIREMENT = "#9b2d20"
GRID_INK = "#b9bec4"
TEXT_INK = "#2b2f33"
LOAD_INK = "#7d848c"  # the bare load, dashed
RL_CAP_DB = 60.0  # a perfect match is infinite return loss; draw it at the top of the axes


@dataclass(frozen=True)
class Caption:
    """What every figure says about where it comes from: the study's name, and whether the study says
    its data is invented."""

    study: str
    invented: bool = False

    def text(self) -> str:
        note = " · INVENTED data (the study says so): not a measurement" if self.invented else ""
        return f"optmatch study: {self.study}{note}"


def _caption(fig: Figure, caption: Caption | None) -> tuple[float, float, float, float]:
    """Write the caption along the bottom edge; returns the rectangle left for the axes."""
    if caption is None:
        return (0.0, 0.0, 1.0, 1.0)
    fig.text(0.01, 0.012, caption.text(), fontsize=8, color="#5b6168" if not caption.invented else REQUIREMENT,
             ha="left", va="bottom", parse_math=False)
    return (0.0, 0.04, 1.0, 1.0)


def _figure(size: tuple[float, float] = FIGSIZE_IN) -> Figure:
    fig = Figure(figsize=size, dpi=DPI)
    FigureCanvasAgg(fig)
    return fig


def _style(ax) -> None:
    ax.set_facecolor("white")
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color("#7a8087")
    ax.tick_params(colors=TEXT_INK, labelsize=9)
    ax.grid(True, color="#e3e6e9", linewidth=0.8)
    ax.set_axisbelow(True)


def _gaps(freq: np.ndarray) -> np.ndarray:
    """Flags (F−1,) for the grid intervals that lie between mask segments, not inside one.

    A step counts as a gap when it is over 1.5 times both neighbouring steps and over twice the
    median step; pass the segments themselves to the plot when the mask is unusual.
    """
    steps = np.diff(freq)
    if steps.size < 2:
        return np.zeros(steps.size, dtype=bool)
    prev = np.concatenate([[0.0], steps[:-1]])
    nxt = np.concatenate([steps[1:], [0.0]])
    return (steps > 1.5 * np.maximum(prev, nxt)) & (steps > 2.0 * np.median(steps))


def mask_spans(grid: Grid) -> list[tuple[float, float, float]]:
    """Spans ``(f_lo, f_hi, min_rl_db)`` (Hz, dB) of equal requirement recovered from a grid.

    Each interval between grid points takes the stricter requirement of its two ends (so that
    a strict segment nested in a looser one shows whole); gaps between segments are left out and
    a single-frequency segment becomes a span of zero width.
    """
    f, req = grid.freq, grid.min_rl_db
    if f.size == 1:
        return [(float(f[0]), float(f[0]), float(req[0]))]
    gaps = _gaps(f)
    spans: list[tuple[float, float, float]] = []
    cur: list[float] | None = None  # [f_lo, f_hi, req] of the span being grown
    for i, gap in enumerate(gaps):
        if gap:
            if cur is None:  # an isolated point before this gap
                spans.append((float(f[i]), float(f[i]), float(req[i])))
            else:
                spans.append((cur[0], cur[1], cur[2]))
            cur = None
            continue
        value = float(max(req[i], req[i + 1]))
        if cur is not None and cur[2] == value:
            cur[1] = float(f[i + 1])
            continue
        if cur is not None:
            spans.append((cur[0], cur[1], cur[2]))
        cur = [float(f[i]), float(f[i + 1]), value]
    if cur is None:
        spans.append((float(f[-1]), float(f[-1]), float(req[-1])))
    else:
        spans.append((cur[0], cur[1], cur[2]))
    return spans


def _gap_breaks(freq: np.ndarray) -> np.ndarray:
    """Indices after which a plotted curve should be broken (gaps between mask segments)."""
    return np.nonzero(_gaps(freq))[0]


def _broken(x: np.ndarray, y: np.ndarray, breaks: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    return np.insert(x, breaks + 1, np.nan), np.insert(y, breaks + 1, np.nan)


def _finish_xy(fig, ax, path: str | os.PathLike, xlabel: str, ylabel: str, title: str, legend_loc: str,
               caption: Caption | None = None) -> Path:
    """Labels, title, legend and caption in the house style of the x–y plots, then an atomic save."""
    ax.set_xlabel(xlabel, color=TEXT_INK)
    ax.set_ylabel(ylabel, color=TEXT_INK)
    ax.set_title(title, color=TEXT_INK, fontsize=11, loc="left")
    ax.legend(loc=legend_loc, fontsize=8, frameon=True, framealpha=0.9, edgecolor="#d0d4d8")
    fig.tight_layout(rect=_caption(fig, caption))
    return save_figure_atomic(fig, path)


def plot_return_loss(
    perfs: Sequence[tuple[str, Performance]],
    grid: Grid,
    path: str | os.PathLike,
    segments: Sequence[Segment] | None = None,
    load: Performance | None = None,
    caption: Caption | None = None,
) -> Path:
    """Return loss (dB, positive, higher is better) against frequency (MHz) for ranked designs.

    ``perfs`` is best first; the mask is drawn as shaded forbidden areas under each segment's
    requirement, taken from ``segments`` when given, otherwise recovered from ``grid``.
    ``load``: the bare load (no network), drawn dashed.  The worst point of the best design is marked.
    """
    fig = _figure()
    ax = fig.add_subplot(1, 1, 1)
    _style(ax)
    spans = (
        [(s.f_lo, s.f_hi, s.min_rl_db) for s in segments] if segments else mask_spans(grid)
    )
    finite = [rl[np.isfinite(rl)] for _, p in perfs for rl in [p.return_loss_db]]
    top_data = max((float(np.max(v)) for v in finite if v.size), default=0.0)
    top_req = max(s[2] for s in spans)
    y_top = min(max(top_data, top_req * 1.6) + 3.0, RL_CAP_DB)
    for k, (f_lo, f_hi, req) in enumerate(spans):
        x = np.array([f_lo, f_hi]) / 1e6
        if f_hi == f_lo:  # a spot frequency: a bar up to the requirement
            ax.plot([x[0], x[0]], [0.0, req], color=FORBIDDEN, linewidth=6, solid_capstyle="butt")
            ax.plot([x[0]], [req], marker="_", markersize=14, markeredgewidth=2, color=REQUIREMENT)
            continue
        ax.fill_between(x, 0.0, req, color=FORBIDDEN, alpha=0.55, linewidth=0,
                        label="below the mask (fails)" if k == 0 else None)
        ax.plot(x, [req, req], color=REQUIREMENT, linewidth=1.6,
                label="required return loss" if k == 0 else None)
    breaks = _gap_breaks(grid.freq)
    if load is not None:
        x, y = _broken(load.freq / 1e6, np.minimum(load.return_loss_db, y_top), breaks)
        ax.plot(x, y, color=LOAD_INK, linewidth=1.4, linestyle=(0, (5, 3)), label="load alone (no network)", zorder=2)
    for k, (label, perf) in enumerate(perfs):
        rl = np.minimum(perf.return_loss_db, y_top)
        x, y = _broken(perf.freq / 1e6, rl, breaks)
        colour = DESIGN_COLOURS[k % len(DESIGN_COLOURS)]
        ax.plot(x, y, color=colour, linewidth=2.4 if k == 0 else 1.4, alpha=1.0 if k == 0 else 0.85,
                label=label, zorder=3 if k == 0 else 2)
    if perfs:
        label, best = perfs[0]
        i = best.worst_index
        fw, rlw = best.freq[i] / 1e6, min(best.worst_rl_db, y_top)
        margin = best.worst_rl_db - float(grid.min_rl_db[i])
        ax.plot([fw], [rlw], marker="o", markersize=8, markerfacecolor="white",
                markeredgecolor=DESIGN_COLOURS[0], markeredgewidth=2.0, zorder=4)
        span = float(grid.freq.max() - grid.freq.min()) / 1e6 or 1.0
        left = fw > grid.freq.min() / 1e6 + 0.6 * span
        down = rlw > 0.45 * y_top  # put the note where the axes have room
        ax.annotate(
            f"worst point of {label}\n{best.worst_rl_db:.2f} dB at {fw:.3f} MHz\nmargin {margin:+.2f} dB",
            xy=(fw, rlw), xytext=(-18 if left else 18, -30 if down else 26), textcoords="offset points",
            ha="right" if left else "left", va="top" if down else "bottom", fontsize=9, color=TEXT_INK,
            bbox={"boxstyle": "round,pad=0.3", "facecolor": "white", "edgecolor": "#9aa0a6", "alpha": 0.95},
            arrowprops={"arrowstyle": "-", "color": "#5b6168", "linewidth": 1.0},
            zorder=5,
        )
    ax.set_ylim(0.0, y_top)
    pad = 0.03 * (float(grid.freq.max() - grid.freq.min()) / 1e6 or 1.0)
    ax.set_xlim(grid.freq.min() / 1e6 - pad, grid.freq.max() / 1e6 + pad)
    return _finish_xy(fig, ax, path, "frequency (MHz)", "return loss (dB, higher is better)",
                      "Return loss of the ranked designs against the mask", "upper right", caption)


LOAD_COLOURS = ("#1b6f8a", "#d9822b", "#6c4f9e", "#3f8f4f", "#a63d57", "#8a6d1b")
ENVELOPE = "#9ec5d3"


def _mask_patches(ax, spans: Sequence[tuple[float, float, float]]) -> None:
    for k, (f_lo, f_hi, req) in enumerate(spans):
        x = np.array([f_lo, f_hi]) / 1e6
        if f_hi == f_lo:
            ax.plot([x[0], x[0]], [0.0, req], color=FORBIDDEN, linewidth=6, solid_capstyle="butt")
            ax.plot([x[0]], [req], marker="_", markersize=14, markeredgewidth=2, color=REQUIREMENT)
            continue
        ax.fill_between(x, 0.0, req, color=FORBIDDEN, alpha=0.55, linewidth=0,
                        label="below the mask (fails)" if k == 0 else None)
        ax.plot(x, [req, req], color=REQUIREMENT, linewidth=1.6, label="required return loss" if k == 0 else None)


def plot_return_loss_loads(
    design: str,
    per_load: Sequence[tuple[str, Performance]],
    grid: Grid,
    path: str | os.PathLike,
    segments: Sequence[Segment] | None = None,
    caption: Caption | None = None,
    many: int = 6,
) -> Path:
    """Return loss (dB) of one ``design`` on each of several loads, against the mask.

    ``per_load``: (load name, performance) in the study's order.  Up to ``many`` loads, each load's
    curve in its own colour; beyond that, the envelope over every load (shaded, lowest to highest
    return loss at each frequency) and the curve of the worst load.  The worst point is marked.
    """
    fig = _figure()
    ax = fig.add_subplot(1, 1, 1)
    _style(ax)
    spans = [(s.f_lo, s.f_hi, s.min_rl_db) for s in segments] if segments else mask_spans(grid)
    rl_all = np.array([pf.return_loss_db for _, pf in per_load])
    finite = rl_all[np.isfinite(rl_all)]
    top_req = max(sp[2] for sp in spans)
    y_top = min(max(float(np.max(finite)) if finite.size else 0.0, top_req * 1.6) + 3.0, RL_CAP_DB)
    _mask_patches(ax, spans)
    breaks = _gap_breaks(grid.freq)
    worst_k = int(np.argmin([pf.margin_db for _, pf in per_load]))
    if len(per_load) <= many:
        for k, (name, pf) in enumerate(per_load):
            x, y = _broken(pf.freq / 1e6, np.minimum(pf.return_loss_db, y_top), breaks)
            ax.plot(x, y, color=LOAD_COLOURS[k % len(LOAD_COLOURS)], linewidth=2.2 if k == worst_k else 1.5,
                    label=f"on {name}", zorder=3)
    else:
        lo, hi = np.min(np.minimum(rl_all, y_top), axis=0), np.max(np.minimum(rl_all, y_top), axis=0)
        x = per_load[0][1].freq / 1e6
        ax.fill_between(x, lo, hi, color=ENVELOPE, alpha=0.7, linewidth=0,
                        label=f"envelope over all {len(per_load)} loads", zorder=2)
        name, pf = per_load[worst_k]
        xw, yw = _broken(pf.freq / 1e6, np.minimum(pf.return_loss_db, y_top), breaks)
        ax.plot(xw, yw, color=DESIGN_COLOURS[0], linewidth=2.2, label=f"on {name} (the worst load)", zorder=3)
    name, worst = per_load[worst_k]
    i = worst.worst_index
    fw, rlw = worst.freq[i] / 1e6, min(worst.worst_rl_db, y_top)
    ax.plot([fw], [rlw], marker="o", markersize=8, markerfacecolor="white", markeredgecolor=TEXT_INK,
            markeredgewidth=2.0, zorder=4)
    span = float(grid.freq.max() - grid.freq.min()) / 1e6 or 1.0
    left = fw > grid.freq.min() / 1e6 + 0.6 * span
    down = rlw > 0.45 * y_top
    ax.annotate(f"worst point: load {name}\n{worst.worst_rl_db:.2f} dB at {fw:.3f} MHz\n"
                f"margin {worst.margin_db:+.2f} dB",
                xy=(fw, rlw), xytext=(-18 if left else 18, -30 if down else 26), textcoords="offset points",
                ha="right" if left else "left", va="top" if down else "bottom", fontsize=9, color=TEXT_INK,
                bbox={"boxstyle": "round,pad=0.3", "facecolor": "white", "edgecolor": "#9aa0a6", "alpha": 0.95},
                arrowprops={"arrowstyle": "-", "color": "#5b6168", "linewidth": 1.0}, zorder=5)
    ax.set_ylim(0.0, y_top)
    pad = 0.03 * span
    ax.set_xlim(grid.freq.min() / 1e6 - pad, grid.freq.max() / 1e6 + pad)
    return _finish_xy(fig, ax, path, "frequency (MHz)", "return loss (dB, higher is better)",
                      f"Return loss of design {design} on each load, against the mask", "upper right", caption)


def _smith_grid(ax, labels: bool = True) -> None:
    """Constant-resistance circles and constant-reactance arcs, clipped to the unit circle."""
    t = np.linspace(0.0, 2.0 * np.pi, 721)
    ax.plot(np.cos(t), np.sin(t), color="#7a8087", linewidth=1.2)
    ax.plot([-1.0, 1.0], [0.0, 0.0], color=GRID_INK, linewidth=0.8)
    for r in (0.2, 0.5, 1.0, 2.0, 5.0):
        c, rad = r / (1.0 + r), 1.0 / (1.0 + r)
        ax.plot(c + rad * np.cos(t), rad * np.sin(t), color=GRID_INK, linewidth=0.8)
        if labels:
            ax.text(c - rad, 0.015, f"{r:g}", fontsize=7, color="#6b7177", ha="right", va="bottom")
    r_run = np.concatenate([[0.0], np.logspace(-3, 4, 600)])
    for x in (0.2, 0.5, 1.0, 2.0, 5.0):
        for sign in (1.0, -1.0):
            z = r_run + 1j * sign * x
            g = (z - 1.0) / (z + 1.0)
            ax.plot(g.real, g.imag, color=GRID_INK, linewidth=0.8)
            if labels:
                edge = (1j * sign * x - 1.0) / (1j * sign * x + 1.0)
                ax.text(1.07 * edge.real, 1.07 * edge.imag, f"{'+' if sign > 0 else '−'}j{x:g}", fontsize=7,
                        color="#6b7177", ha="center", va="center")


def _rl_rings(ax, radius: float) -> None:
    """Circles of constant return loss inside a zoomed view, labelled in dB."""
    t = np.linspace(0.0, 2.0 * np.pi, 361)
    for rl in (6.0, 10.0, 15.0, 20.0, 30.0):
        rho = 10.0 ** (-rl / 20.0)
        if rho > 0.97 * radius or rho < 0.06 * radius:
            continue
        ax.plot(rho * np.cos(t), rho * np.sin(t), color="#d5d9dd", linewidth=0.7, linestyle=":")
        ax.text(rho * 0.7071, -rho * 0.7071, f"{rl:g} dB", fontsize=7, color="#6b7177", ha="left", va="top")


def _label_edges(ax, perf: Performance, reach: float) -> None:
    """The band-edge frequencies of one trace, labelled outwards from the centre with a leader line."""
    g = perf.gamma
    for idx, text in ((0, f"{perf.freq[0] / 1e6:.3f} MHz"), (-1, f"{perf.freq[-1] / 1e6:.3f} MHz")):
        point = complex(g[idx])
        away = point / abs(point) if abs(point) > 0.05 * reach else (1j if idx == 0 else -1j)
        dx, dy = 40.0 * away.real, 40.0 * away.imag
        ax.annotate(text, xy=(point.real, point.imag), xytext=(dx, dy), textcoords="offset points",
                    ha="left" if dx >= 0 else "right", va="center", fontsize=8, color=TEXT_INK,
                    zorder=9, arrowprops={"arrowstyle": "-", "color": "#5b6168", "linewidth": 0.8},
                    bbox={"boxstyle": "round,pad=0.2", "facecolor": "white", "edgecolor": "#c3c8cd", "alpha": 0.9})


def _traces(ax, perfs: Sequence[tuple[str, Performance]], load: Performance | None, legend: bool,
            load_label: str = "load alone (no network)") -> None:
    """The load (dashed) and the designs, drawn worst rank first so that rank 1 lies on top."""
    if load is not None:
        g = load.gamma
        ax.plot(g.real, g.imag, color=LOAD_INK, linewidth=1.4, linestyle=(0, (5, 3)), zorder=3,
                label=load_label if legend else None)
        ax.plot([g[0].real], [g[0].imag], marker="o", markersize=5, color=LOAD_INK, zorder=3)
        ax.plot([g[-1].real], [g[-1].imag], marker="s", markersize=5, color=LOAD_INK, zorder=3)
    for k in reversed(range(len(perfs))):
        label, perf = perfs[k]
        colour = DESIGN_COLOURS[k % len(DESIGN_COLOURS)]
        g = perf.gamma
        z = 8 if k == 0 else 4 + 0.1 * (len(perfs) - k)
        ax.plot(g.real, g.imag, color=colour, linewidth=2.4 if k == 0 else 1.3, zorder=z,
                label=label if legend else None)
        ax.plot([g[0].real], [g[0].imag], marker="o", markersize=6, color=colour, zorder=z)
        ax.plot([g[-1].real], [g[-1].imag], marker="s", markersize=6, color=colour, zorder=z)


def _limit_circle(ax, min_rl_db: float | None, legend: bool) -> None:
    if min_rl_db is None:
        return
    t = np.linspace(0.0, 2.0 * np.pi, 361)
    rho = 10.0 ** (-min_rl_db / 20.0)
    ax.fill(rho * np.cos(t), rho * np.sin(t), color="#dcefe3", alpha=0.6, zorder=1, linewidth=0)
    ax.plot(rho * np.cos(t), rho * np.sin(t), color=REQUIREMENT, linewidth=1.4, linestyle="--", zorder=2,
            label=f"|Γ| = {rho:.3f} ({min_rl_db:g} dB return loss)" if legend else None)


def zoom_radius(perfs: Sequence[tuple[str, Performance]], min_rl_db: float | None) -> float:
    """Half-width of the zoomed panel: the mask circle with room around it, or the best trace's reach."""
    rho = 10.0 ** (-min_rl_db / 20.0) if min_rl_db is not None else 0.1
    reach = float(np.max(np.abs(perfs[0][1].gamma))) if perfs else rho
    return float(min(1.05, max(1.6 * rho, 1.15 * reach, 0.05)))


def plot_smith(
    perfs: Sequence[tuple[str, Performance]],
    path: str | os.PathLike,
    z_sys: float,
    min_rl_db: float | None = None,
    load: Performance | None = None,
    caption: Caption | None = None,
    load_label: str = "load alone (no network)",
) -> Path:
    """Smith chart (normalised to ``z_sys`` Ω) of the input reflection of ranked designs, and a zoom.

    Left, the whole chart with the bare ``load`` (dashed); right, the centre enlarged around the
    mask's circle so that matched traces are legible.  ``min_rl_db``: the mask's strictest
    requirement (dB), drawn as the |Γ| limit.  Band edges are marked (circle: lowest frequency,
    square: highest); rank 1 is drawn on top.
    """
    fig = _figure(SMITH_FIGSIZE_IN)
    whole, zoom = fig.add_subplot(1, 2, 1), fig.add_subplot(1, 2, 2)
    for ax in (whole, zoom):
        ax.set_aspect("equal")
        ax.set_axis_off()
    _smith_grid(whole)
    _limit_circle(whole, min_rl_db, legend=True)
    _traces(whole, perfs, load, legend=True, load_label=load_label)
    whole.set_xlim(-1.18, 1.18)
    whole.set_ylim(-1.12, 1.12)
    whole.set_title(f"Input reflection, normalised to {z_sys:g} Ω", color=TEXT_INK, fontsize=11, loc="left")

    radius = zoom_radius(perfs, min_rl_db)
    _smith_grid(zoom, labels=False)
    _rl_rings(zoom, radius)
    _limit_circle(zoom, min_rl_db, legend=False)
    _traces(zoom, perfs, load, legend=False)
    if perfs:
        _label_edges(zoom, perfs[0][1], radius)
    zoom.set_xlim(-radius, radius)
    zoom.set_ylim(-radius, radius)
    zoom.add_patch(Rectangle((-radius, -radius), 2 * radius, 2 * radius, fill=False, edgecolor="#9aa0a6",
                             linewidth=1.0, zorder=10, clip_on=False))
    zoom.set_title(f"Centre enlarged (|Γ| up to {radius:.2f})", color=TEXT_INK, fontsize=11, loc="left")
    whole.add_patch(Rectangle((-radius, -radius), 2 * radius, 2 * radius, fill=False, edgecolor="#9aa0a6",
                              linewidth=0.9, linestyle=":", zorder=10))
    whole.plot([], [], marker="o", linestyle="none", color="#5b6168", label="lowest frequency")
    whole.plot([], [], marker="s", linestyle="none", color="#5b6168", label="highest frequency")
    handles, labels = whole.get_legend_handles_labels()
    ranks = [label for label, _ in perfs]
    order = sorted(range(len(labels)),
                   key=lambda j: (labels[j] in ranks, ranks.index(labels[j]) if labels[j] in ranks else j))
    fig.legend([handles[j] for j in order], [labels[j] for j in order], loc="lower center", ncol=4, fontsize=8,
               frameon=False, bbox_to_anchor=(0.5, 0.05))
    _caption(fig, caption)
    fig.subplots_adjust(left=0.02, right=0.98, top=0.92, bottom=0.17, wspace=0.08)
    return save_figure_atomic(fig, path)


def plot_pareto(
    points: Sequence[tuple[float, float]],
    front: Sequence[tuple[float, float]],
    path: str | os.PathLike,
    caption: Caption | None = None,
) -> Path:
    """Margin (dB) against total line length (wavelengths at the reference frequency).

    ``points`` and ``front`` are ``(margin_db, length_wl)`` pairs: every design found, and the
    non-dominated ones (shortest for its margin).  Length is drawn across, margin up.
    """
    fig = _figure()
    ax = fig.add_subplot(1, 1, 1)
    _style(ax)
    if points:
        p = np.asarray(points, dtype=float)
        ax.scatter(p[:, 1], p[:, 0], s=14, color="#9aa3ab", alpha=0.6, linewidths=0, label="designs found")
    if front:
        f = np.asarray(sorted(front, key=lambda mp: mp[1]), dtype=float)
        ax.plot(f[:, 1], f[:, 0], color=DESIGN_COLOURS[0], linewidth=1.6, zorder=3)
        ax.scatter(f[:, 1], f[:, 0], s=36, color=DESIGN_COLOURS[0], zorder=4, label="Pareto front")
    ax.axhline(0.0, color=REQUIREMENT, linewidth=1.2, linestyle="--", label="mask met above this line")
    return _finish_xy(fig, ax, path, "total line length (wavelengths at the reference frequency)",
                      "margin against the mask (dB)", "Margin against size", "lower right", caption)
