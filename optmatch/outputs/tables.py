"""Tabular and written results of a study: the ``designs.csv`` rows and the ``summary.md`` report.

Units in column names: ``_db``, ``_hz``, ``_wl`` (wavelengths at the reference frequency),
``_ohm``, ``_deg``, ``_mm``; lumped values in Ω, H or F as named by ``e{i}_value_unit``.
"""

from __future__ import annotations

import csv
import io
import math
import os
from collections.abc import Mapping, Sequence
from pathlib import Path

from optmatch.domain.design import Design, describe, performance
from optmatch.domain.problem import Problem
from optmatch.io.atomic import write_text_atomic
from optmatch.units import parse_frequency

VALUE_UNIT = {"r": "ohm", "l": "H", "c": "F"}

CAUTIONS = (
    "Open stub ends, and lines that are not matched, carry high RF voltage at transmit power: "
    "keep hands and tools clear, and insulate open ends.",
    "RF burns can be deep and are not felt at once; switch the transmitter off before touching "
    "the network or the antenna.",
    "Keep people outside the RF exposure limits that apply at your power, frequency and site.",
    "A cable's power and voltage ratings fall as the frequency rises and as the mismatch grows; "
    "check the maker's derating before running power through a stub or a mismatched line.",
    "These figures are design aids. Defer to local regulations, the equipment makers' ratings and "
    "licensed practice.",
)


def design_summary(problem: Problem, design: Design, rank: int) -> dict:
    """One entry of the summary document's ``designs`` list (see :func:`summary_markdown`)."""
    perf = performance(problem, design)
    return {
        "rank": rank,
        "margin_db": float(design.margin_db),
        "worst_rl_db": float(perf.worst_rl_db),
        "worst_freq_hz": float(perf.freq[perf.worst_index]),
        "length_wl": float(design.length_wl),
        "trial": int(design.trial),
        "elements": [rep.as_dict() for rep in describe(problem, design)],
    }


def design_rows(problem: Problem, designs: Sequence[Design]) -> list[dict]:
    """One flat row per design, best first (``rank`` 1), for ``designs.csv``.

    Columns: rank, margin_db, worst_rl_db, worst_freq_hz, length_wl, then per element ``e{i}_``
    kind, end, connection, part, medium, z0_ohm, length_deg (cable + allowances), length_wl,
    length_mm (cable to cut), value, value_unit.  Elements are numbered from the load outwards.
    Missing quantities are None.
    """
    rows = []
    for rank, design in enumerate(designs, start=1):
        entry = design_summary(problem, design, rank)
        row: dict = {key: entry[key] for key in ("rank", "margin_db", "worst_rl_db", "worst_freq_hz", "length_wl")}
        for el in entry["elements"]:
            i = el["index"]
            phys = el["physical_m"]
            row.update({
                f"e{i}_kind": el["kind"],
                f"e{i}_end": el["end"],
                f"e{i}_connection": el["connection"],
                f"e{i}_part": el["part"],
                f"e{i}_medium": el["medium"] or None,
                f"e{i}_z0_ohm": el["z0_ohm"],
                f"e{i}_length_deg": el["electrical_deg"],
                f"e{i}_length_wl": el["wavelengths"],
                f"e{i}_length_mm": None if phys is None else phys * 1e3,
                f"e{i}_value": el["value"],
                f"e{i}_value_unit": VALUE_UNIT.get(el["part"] or ""),
            })
        rows.append(row)
    return rows


def _csv_cell(value: object) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ("inf" if value > 0 else "-inf" if value < 0 else "nan")
    return str(value)


def write_designs_csv(rows: Sequence[Mapping], path: str | os.PathLike) -> Path:
    """Write the rows as CSV (header from the union of keys, in first-seen order), atomically.

    Floats are written in full precision so that the file reads back to the same numbers.
    """
    fields: list[str] = []
    for row in rows:
        fields.extend(k for k in row if k not in fields)
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(fields)
    for row in rows:
        writer.writerow([_csv_cell(row.get(k)) for k in fields])
    return write_text_atomic(path, buf.getvalue())


# ---------------------------------------------------------------- summary.md


def _si(value: float, unit: str) -> str:
    """A value with an SI prefix, e.g. 2.2e-11 F -> '22 pF'."""
    if value == 0 or not math.isfinite(value):
        return f"{value:g} {unit}"
    for factor, prefix in ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"),
                           (1e-9, "n"), (1e-12, "p"), (1e-15, "f")):
        if abs(value) >= factor:
            return f"{value / factor:.4g} {prefix}{unit}"
    return f"{value:.3g} {unit}"


def _mhz(hz: float) -> str:
    return f"{hz / 1e6:.3f} MHz"


def _num(value: object, fmt: str) -> str:
    return "–" if value is None else format(value, fmt)


def _element_name(el: Mapping) -> str:
    kind = el["kind"]
    if kind == "line":
        return "line"
    if kind in ("shunt_stub", "series_stub"):
        return f"{kind.replace('_', ' ')}, {el['end']} end"
    part = {"r": "resistor", "l": "inductor", "c": "capacitor"}.get(el.get("part") or "", "part")
    return f"{el.get('connection') or ''} {part}".strip()


def _element_value(el: Mapping) -> str:
    if el.get("value") is None:
        return "–"
    unit = {"r": "Ω", "l": "H", "c": "F"}.get(el.get("part") or "", "")
    return _si(float(el["value"]), unit)


def _table(header: Sequence[str], rows: Sequence[Sequence[str]], align: str) -> list[str]:
    marks = {"l": ":---", "r": "---:", "c": ":---:"}
    out = ["| " + " | ".join(header) + " |", "|" + "|".join(marks[a] for a in align) + "|"]
    out += ["| " + " | ".join(str(c).replace("|", "\\|") for c in row) + " |" for row in rows]
    return out


DEFAULT_PLOTS = {
    "Return loss against the mask": "return_loss.png",
    "Smith chart of the input": "smith.png",
    "Margin against size (Pareto front)": "pareto.png",
}
RESULT_FILES = {
    "Ranked designs (CSV)": "designs.csv",
    "Best network, 2-port Touchstone (port 1 to the source)": "best_network.s2p",
    "Matched input, 1-port Touchstone": "matched_input.s1p",
    "All figures (JSON)": "summary.json",
}


def _get(d: Mapping, *keys: str, default: object = None) -> object:
    """The first of ``keys`` present in ``d`` (documents from different writers name things apart)."""
    for key in keys:
        if key in d and d[key] is not None:
            return d[key]
    return default


def _hz(value: object) -> float | None:
    """A frequency in Hz from a number or a typed quantity such as ``'420MHz'``."""
    if value is None:
        return None
    try:
        return parse_frequency(value)  # type: ignore[arg-type]
    except ValueError:
        return None


def _mask_rows(mask: Sequence[Mapping]) -> list[list[str]]:
    rows = []
    for seg in mask:
        f_lo, f_hi = _get(seg, "f_lo_hz", "from", "from_"), _get(seg, "f_hi_hz", "to")
        lo_hz, hi_hz = _hz(f_lo), _hz(f_hi)
        req, loss = _get(seg, "min_rl_db", "return_loss"), _get(seg, "max_loss_db", "max_loss")
        rows.append([
            _mhz(lo_hz) if lo_hz is not None else str(f_lo),
            _mhz(hi_hz) if hi_hz is not None else str(f_hi),
            "–" if req is None else f"{float(req):g}",
            "–" if loss is None else f"{float(loss):g}",
        ])
    return rows


def _describe_load(load: object) -> str:
    if isinstance(load, Mapping):
        return "; ".join(f"{k}: {v}" for k, v in load.items())
    return "not described" if load is None else str(load)


def _robustness_markdown(rob: Mapping | None, tol: Mapping) -> list[str]:
    """The yield and sensitivity section for the best design (empty without a Monte Carlo)."""
    if not rob:
        return []
    spreads = [f"cut ±{float(tol.get('cut_m', 0.0)) * 1e3:g} mm"]
    for key, label in (("z0_rel", "Z0"), ("vf_rel", "velocity factor"), ("parts_rel", "lumped values")):
        val = tol.get(key)
        spreads.append(f"{label} ±{float(val) * 100:g} %" if val is not None else f"{label}: the cable's own tolerance")
    lines = ["## Robustness of the best design", "",
             f"Of {rob['samples']} simulated builds ({', '.join(spreads)}; uniform spreads), "
             f"**{100.0 * float(rob['yield_frac']):.0f} %** meet the mask. Margin: median "
             f"{float(rob['margin_p50_db']):+.2f} dB, 5th percentile {float(rob['margin_p5_db']):+.2f} dB, "
             f"worst {float(rob['margin_min_db']):+.2f} dB. A low yield says: trim the open stubs while "
             "measuring.", ""]
    rows = []
    for sens in rob.get("sensitivities", []):
        rows.append([str(sens["index"] + 1), _num(sens.get("db_per_mm"), "+.3f"), _num(sens.get("db_per_pct_vf"), "+.3f"),
                     _num(sens.get("db_per_pct_z0"), "+.3f"), _num(sens.get("db_per_pct_value"), "+.3f")])
    lines += _table(["#", "margin dB per mm longer", "per % VF", "per % Z0", "per % value"], rows, "rrrrr")
    return [*lines, ""]


def summary_markdown(doc: Mapping) -> str:
    """The readable report of one study as Markdown.

    Expected keys of ``doc`` (units in the names; alternative names in brackets are accepted):

    - ``name`` [``study``] (str), ``description`` (str, optional)
    - ``z_sys_ohm`` [``system_ohm``] (float): system impedance; ``load`` (str or dict; else
      ``inputs.load`` is shown); ``f_ref_hz`` [``reference_hz``] (float, optional)
    - ``mask`` (list of dict): ``f_lo_hz`` [``from``], ``f_hi_hz`` [``to``] (Hz, or text such as
      ``'420MHz'``), ``min_rl_db`` [``return_loss``], optional ``max_loss_db`` [``max_loss``]
    - ``designs`` (list of dict, best first), as made by :func:`design_summary`: ``rank``,
      ``margin_db``, ``worst_rl_db`` [``worst_return_loss_db``], ``worst_freq_hz``,
      ``length_wl`` [``total_length_wl``], ``elements`` (``ElementReport.as_dict()``, load outwards)
    - ``search`` (dict, optional): ``trials`` [``trials_complete``], ``evaluations``,
      ``elapsed_s``, ``stopped_early``, ``seeds``
    - ``seeds`` (list, optional; else ``search.seeds``): seeds used, shown as text
    - ``warnings`` (list of str, optional)
    - ``pareto`` (list, optional): when non-empty, the Pareto plot is linked
    - ``plots`` (dict title -> relative path, optional): replaces the default plot links
    """
    lines: list[str] = [f"# Matching study: {_get(doc, 'name', 'study', default='unnamed')}", ""]
    if doc.get("description"):
        lines += [str(doc["description"]).strip(), ""]
    designs = list(doc.get("designs") or [])
    mask = list(doc.get("mask") or [])
    reqs = [float(r) for r in (_get(s, "min_rl_db", "return_loss") for s in mask) if r is not None]
    strictest = max(reqs, default=None)
    if designs:
        best = designs[0]
        margin = float(best["margin_db"])
        verdict = "PASS" if margin >= 0.0 else "FAIL"
        clause = (f"meets the mask with {margin:.2f} dB to spare" if margin >= 0.0
                  else f"misses the mask by {-margin:.2f} dB")
        lines += [
            f"**Verdict: {verdict}.** The best design {clause} (margin {margin:+.2f} dB). Its worst return "
            f"loss is {float(_get(best, 'worst_rl_db', 'worst_return_loss_db')):.2f} dB at "
            f"{_mhz(float(best['worst_freq_hz']))}, with "
            f"{float(_get(best, 'length_wl', 'total_length_wl')):.3f} λ of line in total.",
            "",
        ]
    else:
        lines += ["**Verdict: FAIL.** The search produced no design.", ""]

    lines += ["## Problem", ""]
    lines.append(f"- System impedance: {float(_get(doc, 'z_sys_ohm', 'system_ohm')):g} Ω")
    load = _get(doc, "load", default=(doc.get("inputs") or {}).get("load"))
    lines.append(f"- Load: {_describe_load(load)}")
    f_ref = _get(doc, "f_ref_hz", "reference_hz")
    if f_ref:
        lines.append(f"- Electrical lengths at {_mhz(float(f_ref))}")
    if strictest is not None:
        lines.append(f"- Strictest requirement: {strictest:g} dB return loss "
                     f"(|Γ| ≤ {10 ** (-strictest / 20):.3f}, VSWR ≤ {_vswr(strictest):.2f})")
    lines.append("")
    if mask:
        lines += ["Mask:", ""]
        lines += _table(["from", "to", "min. return loss (dB)", "max. network loss (dB)"], _mask_rows(mask), "rrrr")
        lines.append("")

    if designs:
        lines += ["## Ranked designs", ""]
        rows = []
        for d in designs:
            els = ", ".join(_short_element(e) for e in d.get("elements", []))
            rows.append([str(d["rank"]), f"{float(d['margin_db']):+.2f}",
                         f"{float(_get(d, 'worst_rl_db', 'worst_return_loss_db')):.2f}",
                         _mhz(float(d["worst_freq_hz"])), f"{float(_get(d, 'length_wl', 'total_length_wl')):.3f}",
                         els])
        lines += _table(["rank", "margin (dB)", "worst return loss (dB)", "at", "total length (λ)",
                         "elements (load outwards)"], rows, "rrrrrl")
        lines.append("")
        lines += [f"## Best design (rank {designs[0]['rank']}), from the load outwards", ""]
        rows = []
        for e in designs[0].get("elements", []):
            mm = e.get("physical_m")
            rows.append([
                str(e["index"] + 1), _element_name(e), e.get("medium") or "–", _num(e.get("z0_ohm"), ".4g"),
                _num(e.get("electrical_deg"), ".2f"), _num(e.get("wavelengths"), ".4f"),
                "–" if mm is None else f"{mm * 1e3:.1f}", _element_value(e),
            ])
        lines += _table(["#", "element", "cable", "Z0 (Ω)", "length (°)", "length (λ)", "cable to cut (mm)",
                         "value"], rows, "rllrrrrr")
        lines += ["", "Electrical lengths include connector and adapter allowances; the cable to cut "
                  "does not.", ""]
        lines += _robustness_markdown(designs[0].get("robustness"), doc.get("tolerance") or {})

    plots = doc.get("plots")
    if plots is None:
        plots = dict(list(DEFAULT_PLOTS.items())[:2]) if designs else {}
        if doc.get("pareto"):
            plots.update(list(DEFAULT_PLOTS.items())[2:])
    links = [f"- [{title}]({path})" for title, path in plots.items()]
    if designs:
        links += [f"- [{title}]({path})" for title, path in RESULT_FILES.items()]
    if links:
        lines += ["## Plots and files", "", *links, ""]

    search = doc.get("search") or {}
    seeds = list(_get(doc, "seeds", default=search.get("seeds")) or [])
    if search or seeds:
        lines += ["## Search", ""]
        trials = _get(search, "trials", "trials_complete")
        if trials is not None:
            lines.append(f"- Trials: {trials}")
        if "evaluations" in search:
            lines.append(f"- Network evaluations: {search['evaluations']}")
        if "elapsed_s" in search:
            lines.append(f"- Elapsed: {float(search['elapsed_s']):.1f} s")
        if "trial_time_s" in search:
            lines.append(f"- Time in trials, all runs: {float(search['trial_time_s']):.1f} s")
        if search.get("stopped_early"):
            lines.append("- Stopped early: the target margin was reached")
        if seeds:
            lines.append(f"- Seeds: {', '.join(str(s) for s in seeds)}")
        lines.append("")

    warnings = list(doc.get("warnings") or [])
    if warnings:
        lines += ["## Warnings", ""]
        lines += [f"- {w}" for w in warnings]
        lines.append("")

    lines += ["## Cautions", ""]
    lines += [f"- {c}" for c in CAUTIONS]
    lines.append("")
    return "\n".join(lines)


def _vswr(rl_db: float) -> float:
    rho = 10.0 ** (-rl_db / 20.0)
    return (1.0 + rho) / (1.0 - rho) if rho < 1.0 else math.inf


def _short_element(e: Mapping) -> str:
    if e.get("wavelengths") is not None:
        return f"{_element_name(e)} {float(e['wavelengths']):.3f} λ"
    return f"{_element_name(e)} {_element_value(e)}"


def write_summary_markdown(doc: Mapping, path: str | os.PathLike) -> Path:
    """Write :func:`summary_markdown` of ``doc`` atomically."""
    return write_text_atomic(path, summary_markdown(doc))
