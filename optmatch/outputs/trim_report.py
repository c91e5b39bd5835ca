"""What `optmatch trim` reports: one JSON-ready document, the trim.md page and the trim.png overlay
(measured, fitted model, predicted after the trims, and the mask).

Both files carry a mark saying that `optmatch trim` wrote them, so a later run replaces its own
files and never one it did not write.  Lengths in mm, margins in dB, frequencies in Hz (MHz on the
page and the plot).
"""

from __future__ import annotations

import os
from collections.abc import Callable, Mapping
from pathlib import Path

import numpy as np

from optmatch import __version__
from optmatch.bench.fit import EXPLAINED_RATIO, ROUGH_RATIO, SCATTER_FLOOR, Fit
from optmatch.bench.trims import MIN_TRIM_MM, PieceTrim, TrimPlan, TrimRules
from optmatch.domain.mask import Grid
from optmatch.io.atomic import save_figure_atomic, write_text_atomic
from optmatch.outputs.plots import (
    DESIGN_COLOURS,
    FORBIDDEN,
    REQUIREMENT,
    RL_CAP_DB,
    TEXT_INK,
    _figure,
    _style,
)

TRIM_MD = "trim.md"
TRIM_PNG = "trim.png"
MD_MARK = "<!-- written by optmatch trim -->"
PNG_MARK = "optmatch trim"  # the PNG's Software text entry

CAUTION = ("Trim with the transmitter off and the network disconnected from it: open stub ends and "
           "mismatched lines carry high RF voltage at transmit power, and RF burns are deep and not felt at "
           "once. Measure at low power only, and defer to local regulations, the cable and connector makers' "
           "ratings and licensed practice.")

HOW_TO = {
    "open": "trim at the open end",
    "short": "shorten at the shorted end and short it again",
    "line": "shorten and fit its connector again",
}


def part_name(kind: str, end: str | None, stock: bool = False) -> str:
    """``line`` or ``shunt stub, open end``, marked when a ready-made stock piece."""
    name = "line" if kind == "line" else f"{kind.replace('_', ' ')}, {end} end"
    return name + (" (stock piece)" if stock else "")


def _how(t: PieceTrim) -> str:
    return HOW_TO["line" if t.piece.kind == "line" else (t.piece.end or "open")]


def verdict_text(fit: Fit, load_given: bool) -> str:
    """One line: does the fitted model explain the measurement, and if not, why it might not."""
    figures = (f"residual {fit.residual_rms:.4f} rms, {fit.ratio:.1f}× the measurement's scatter "
               f"{max(fit.scatter, SCATTER_FLOOR):.4f}")
    if fit.verdict == "explained":
        return f"the fitted model explains the measurement ({figures})"
    if fit.verdict == "rough":
        return (f"the fitted model explains the measurement only roughly ({figures}): trim in small steps and "
                "measure after each")
    causes = []
    model = fit.model
    for k in fit.pieces_at_bound:
        causes.append(f"element {k + 1} would have to be off by more than its bound (a wrong piece?)")
    n = len(model.pieces)
    names = list(model.cables) + list(model.z0_cables)
    for j, b in enumerate(fit.at_bound[n:]):
        if b:
            what = "VF" if j < len(model.cables) else "Z0"
            causes.append(f"cable {names[j]} would need its {what} off by {abs(fit.x[n + j]):.0f} % "
                          "(a piece of another cable?)")
    likely = "; ".join(causes) + "; " if causes else ""
    advice = ("the load changed since it was measured, a bad connector or a wrong piece; measure the bare load again "
              "and give it with --load" if not load_given else
              "a bad connector, a wrong piece or a load that changed again since its measurement")
    return f"the fitted model does not explain the measurement ({figures}): {likely}likely causes: {advice}"


def trim_document(*, study: str, results: str, rank: int, measured: str, load: str | None, fit: Fit,
                  plan: TrimPlan, rules: TrimRules, design_margin_db: float, measured_margin_db: float,
                  grid: Grid) -> dict:
    """Everything `optmatch trim` found, JSON-ready."""
    model = fit.model
    n = len(model.pieces)
    pieces = []
    for t, at_bound in zip(plan.pieces, fit.at_bound[:n], strict=True):
        pieces.append({
            "element": t.piece.index + 1, "part": part_name(t.piece.kind, t.piece.end, t.piece.stock),
            "cable": t.piece.cable,
            "design_mm": t.piece.nominal_mm, "error_mm": t.error_mm, "sigma_mm": t.sigma_mm,
            "built_mm": t.built_mm, "trim_mm": t.trim_mm, "new_mm": t.new_mm, "step": t.step or None,
            "effect_db": t.effect_db if t.step else None, "may_trim": t.may, "at_bound": at_bound,
        })
    cables = []
    for name in model.z0_cables:
        first = next(p for p in model.pieces if p.cable == name)
        row: dict = {"cable": name, "vf_design": first.vf, "vf_scale_pct": None, "vf_sigma_pct": None,
                     "vf_fitted": None}
        if name in model.cables:
            j = model.cables.index(name)
            scale, sig = float(fit.vf_scale_pct[j]), float(fit.vf_sigma_pct[j])
            row.update(vf_scale_pct=scale, vf_sigma_pct=sig, vf_fitted=first.vf * (1 + scale / 100))
        j = model.z0_cables.index(name)
        row.update(z0_scale_pct=float(fit.z0_scale_pct[j]), z0_sigma_pct=float(fit.z0_sigma_pct[j]))
        cables.append(row)
    steps = [{"step": t.step, "element": t.piece.index + 1, "part": part_name(t.piece.kind, t.piece.end, t.piece.stock),
              "trim_mm": t.trim_mm, "new_mm": t.new_mm, "how": _how(t), "effect_db": t.effect_db}
             for t in plan.steps]
    recut = None
    if plan.recut is not None and plan.recut_plan is not None:
        r = plan.recut
        recut = {"element": r.piece.index + 1, "part": part_name(r.piece.kind, r.piece.end, r.piece.stock),
                 "cable": r.piece.cable, "length_mm": r.length_mm, "margin_db": r.margin_db,
                 "margin_sigma_db": r.margin_sigma_db, "restores": r.restores,
                 "trims": [{"element": t.piece.index + 1, "trim_mm": t.trim_mm, "new_mm": t.new_mm, "how": _how(t)}
                           for t in plan.recut_plan.steps]}
    return {
        "tool": f"optmatch {__version__}",
        "study": study,
        "results": results,
        "design_rank": rank,
        "measured": measured,
        "load": load,
        "fit_band_hz": [float(fit.freq[0]), float(fit.freq[-1])],
        "fit_points": int(fit.freq.size),
        "mask_band_hz": [float(grid.freq[0]), float(grid.freq[-1])],
        "fit": {
            "verdict": fit.verdict,
            "verdict_text": verdict_text(fit, load is not None),
            "residual_rms": fit.residual_rms,
            "scatter": fit.scatter,
            "scatter_floor": SCATTER_FLOOR,
            "ratio": fit.ratio,
            "explained_up_to_ratio": EXPLAINED_RATIO,
            "rough_up_to_ratio": ROUGH_RATIO,
            "pieces": pieces,
            "cables": cables,
        },
        "margin_db": {
            "design": design_margin_db,
            "measured": measured_margin_db,
            "fitted": plan.margin_before_db,
            "after_trims": plan.margin_after_db,
            "after_trims_sigma": plan.margin_after_sigma_db,
        },
        "restores": plan.restores,
        "steps": steps,
        "recut": recut,
        "rules": {"open_stubs": True, "short_stubs": rules.short_stubs, "lines": rules.lines,
                  "min_trim_mm": MIN_TRIM_MM},
        "caution": CAUTION,
    }


def json_ready(obj: object) -> object:
    """A copy with numpy numbers made plain and non-finite numbers made None (strict JSON)."""
    if isinstance(obj, dict):
        return {str(k): json_ready(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [json_ready(v) for v in obj]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        return float(obj) if np.isfinite(obj) else None
    return obj


def _mm(v: float | None, fmt: str = ".1f") -> str:
    return "–" if v is None else format(v, fmt)


def _sign(v: float) -> str:
    return f"{v:+.2f}".replace("-", "−")


def step_text(step: Mapping, sign: Callable[[float], str] = _sign) -> str:
    """One trim step of the plan as a sentence (the terminal and trim.md say the same words)."""
    return (f"element {step['element']} ({step['part']}): {step['how']}, {step['trim_mm']:.1f} mm off, "
            f"to {step['new_mm']:.1f} mm ({sign(step['effect_db'])} dB if made alone)")


def trim_markdown(doc: Mapping, plot_name: str | None = TRIM_PNG) -> str:
    """The trim.md page of a trim document."""
    fit, m = doc["fit"], doc["margin_db"]
    f0, f1 = (f / 1e6 for f in doc["fit_band_hz"])
    load = "the study's own" if doc["load"] is None else f"`{doc['load']}`"
    lines = [MD_MARK, f"# Trim: {doc['study']}, design #{doc['design_rank']}", "",
             f"Measured: `{doc['measured']}` ({doc['fit_points']} points used, {f0:.3f}–{f1:.3f} MHz); "
             f"load: {load}.",
             "", f"**Verdict:** {fit['verdict_text']}.", ""]
    lines += ["## Pieces (load outwards)", "",
              "| # | part | cable | design (mm) | fitted error (mm) | as built (mm) | trim (mm) | new length (mm) |",
              "|---:|:---|:---|---:|---:|---:|---:|---:|"]
    for p in fit["pieces"]:
        err = f"{p['error_mm']:+.1f} ± {p['sigma_mm']:.1f}" + (" (at its bound)" if p["at_bound"] else "")
        trim = _mm(p["trim_mm"]) if p["trim_mm"] else ("0" if p["may_trim"] else "not trimmed")
        lines.append(f"| {p['element']} | {p['part']} | {p['cable']} | {p['design_mm']:.1f} | {err} | "
                     f"{p['built_mm']:.1f} | {trim} | {p['new_mm']:.1f} |")
    lines += ["", "| cable | VF design | VF scale (%) | Z0 scale (%) |", "|:---|---:|---:|---:|"]
    for c in fit["cables"]:
        vf = (f"{c['vf_scale_pct']:+.2f} ± {c['vf_sigma_pct']:.2f}" if c["vf_scale_pct"] is not None
              else "not separable (one piece)")
        z0 = f"{c['z0_scale_pct']:+.2f} ± {c['z0_sigma_pct']:.2f}"
        lines.append(f"| {c['cable']} | {c['vf_design']:.3g} | {vf} | {z0} |")
    lines += ["", "## Margin against the mask", "",
              f"- as designed: {_sign(m['design'])} dB",
              f"- measured: {_sign(m['measured'])} dB (return loss only)",
              f"- fitted model, as built: {_sign(m['fitted'])} dB",
              f"- predicted after the trims: {_sign(m['after_trims'])} dB (± {m['after_trims_sigma']:.2f} dB from the "
              "fit's uncertainty)", ""]
    lines += ["## What to do", ""]
    if doc["steps"]:
        lines.append("Make the trims one at a time, largest effect first, and measure again after each "
                     "(run `optmatch trim` on the new measurement):")
        lines.append("")
        for s in doc["steps"]:
            lines.append(f"{s['step']}. {step_text(s)}.")
    elif doc["restores"]:
        lines.append("Nothing to trim: the build meets the mask as it is.")
    else:
        lines.append("No trim under the rules helps.")
    if not doc["restores"]:
        lines += ["", "The trims cannot bring the build onto the mask."]
        r = doc["recut"]
        if r is not None:
            verb = "restores the mask" if r["restores"] else "comes closest, but does not reach the mask"
            lines.append(f"Recut element {r['element']} ({r['part']}, {r['cable']}) to {r['length_mm']:.1f} mm: "
                         f"it {verb} (predicted {_sign(r['margin_db'])} ± {r['margin_sigma_db']:.2f} dB).")
            if r["trims"]:
                lines.append("With it: " + "; ".join(f"element {t['element']} {t['trim_mm']:.1f} mm off "
                                                        f"({t['how']})" for t in r["trims"]) + ".")
            if "open" in r["part"]:
                lines.append("Cut the new open stub a few mm long and trim it while measuring.")
    lines += ["", "## How the fit works", "",
              "Each piece gets a length error and each cable a Z0 scale, plus a velocity-factor scale where two "
              "or more pieces share the cable (on a lone piece a VF change and a cut error shift the same delay). "
              "Bounded least squares fits them to the measured reflection; ± figures are standard errors from the "
              "Jacobian. The measurement's scatter is the point-to-point roughness of the measured trace (fourth "
              "differences along frequency). The model explains the measurement when the residual is at most "
              f"{doc['fit']['explained_up_to_ratio']:g}× that scatter (never judged against less than "
              f"{doc['fit']['scatter_floor']:g}).", ""]
    if plot_name:
        lines += [f"![measured, fitted and predicted return loss]({plot_name})", ""]
    lines += ["## Caution", "", doc["caution"], ""]
    return "\n".join(lines)


def plot_trim(fit: Fit, plan: TrimPlan, grid: Grid, path: str | os.PathLike) -> Path:
    """Return loss (dB) against frequency (MHz): measured, fitted, predicted after the trims (or the
    recut), with the mask shaded; saved atomically with the trim mark in its metadata."""
    fig = _figure()
    ax = fig.add_subplot(1, 1, 1)
    _style(ax)
    f = fit.freq / 1e6
    model = fit.model

    def rl(g: np.ndarray) -> np.ndarray:
        with np.errstate(divide="ignore"):
            return np.minimum(-20.0 * np.log10(np.maximum(np.abs(g), 1e-12)), RL_CAP_DB)

    after_plan = plan.recut_plan if (not plan.restores and plan.recut_plan is not None) else plan
    after = model.gamma(after_plan.x_after.reshape(1, -1), fit.freq, fit.zload)[0]
    curves = [(rl(fit.gamma_measured), "measured", "#a3a9af", 2.2, "-"),
              (rl(fit.gamma_fitted), "fitted model (as built)", DESIGN_COLOURS[1], 1.6, "--"),
              (rl(after), "predicted after the recut and trims" if after_plan is not plan else
               "predicted after the trims", DESIGN_COLOURS[0], 2.4, "-")]
    top = max(float(np.max(c[0])) for c in curves)
    req_top = float(np.max(grid.min_rl_db))
    y_top = min(max(top, req_top * 1.6) + 3.0, RL_CAP_DB)
    for k, seg in enumerate(grid.segments):
        x = np.array([seg.f_lo, seg.f_hi]) / 1e6
        ax.fill_between(x, 0.0, seg.min_rl_db, color=FORBIDDEN, alpha=0.55, linewidth=0,
                        label="below the mask (fails)" if k == 0 else None)
        ax.plot(x, [seg.min_rl_db] * 2, color=REQUIREMENT, linewidth=1.6,
                label="required return loss" if k == 0 else None)
    for y, label, colour, width, style in curves:
        ax.plot(f, y, color=colour, linewidth=width, linestyle=style, label=label)
    ax.set_ylim(0.0, y_top)
    ax.set_xlim(f[0], f[-1])
    ax.set_xlabel("frequency (MHz)", color=TEXT_INK)
    ax.set_ylabel("return loss (dB, higher is better)", color=TEXT_INK)
    ax.set_title(f"Bench fit: margin {_sign(plan.margin_before_db)} dB as built, "
                 f"{_sign(after_plan.margin_after_db)} dB predicted", color=TEXT_INK, fontsize=11, loc="left")
    ax.legend(loc="upper right", fontsize=8, frameon=True, framealpha=0.9, edgecolor="#d0d4d8")
    fig.tight_layout()
    return save_figure_atomic(fig, path, metadata={"Software": f"{PNG_MARK} {__version__}"})


def ours(path: Path) -> bool:
    """Whether an existing trim.md or trim.png was written by `optmatch trim` (then it may be replaced)."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(65536)
    except OSError:
        return False
    if path.suffix == ".md":
        return head.startswith(MD_MARK.encode())
    return b"Software\x00" + PNG_MARK.encode() in head


def write_trim_files(folder: Path, doc: Mapping, fit: Fit, plan: TrimPlan, grid: Grid) -> list[Path]:
    """trim.png and trim.md in ``folder``, atomically (callers check :func:`ours` first)."""
    png = plot_trim(fit, plan, grid, folder / TRIM_PNG)
    md = write_text_atomic(folder / TRIM_MD, trim_markdown(doc))
    return [md, png]
