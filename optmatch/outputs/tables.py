"""Tables and the written report of one study, all from its summary document: the rows shared by the
terminal, summary.md, the cut list and the study page; ``designs.csv``; ``summary.md``.

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

from optmatch.domain.design import ElementReport
from optmatch.io.atomic import write_text_atomic
from optmatch.outputs.document import AlternativeDoc, BuildSheet, DesignDoc, LoadView, MaskSegment, SummaryDoc
from optmatch.outputs.markdown import md, md_block, table

VALUE_UNIT = {"r": "ohm", "l": "H", "c": "F"}
PART_NAMES = {"r": "resistor", "l": "inductor", "c": "capacitor"}
PART_UNITS = {"r": "Ω", "l": "H", "c": "F"}
DASH = "–"

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


# ---------------------------------------------------------------- shared formatting


def si(value: float, unit: str) -> str:
    """A value with an SI prefix, e.g. 2.2e-11 F -> '22 pF'."""
    if value == 0 or not math.isfinite(value):
        return f"{value:g} {unit}"
    for factor, prefix in ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "µ"),
                           (1e-9, "n"), (1e-12, "p"), (1e-15, "f")):
        if abs(value) >= factor:
            return f"{value / factor:.4g} {prefix}{unit}"
    return f"{value:.3g} {unit}"


def mhz(hz: float) -> str:
    return f"{hz / 1e6:.3f} MHz"


def num(value: float | None, fmt: str, infinite: str = "∞") -> str:
    """A number, a dash for None, ``infinite`` for +inf."""
    if value is None:
        return DASH
    if value == math.inf:
        return infinite
    return format(value, fmt)


def element_text(e: ElementReport) -> str:
    """One element in a line: ``line 44.1° 50 Ω``, ``shunt stub (open) 68.7° 50 Ω``, ``shunt capacitor 3.3 pF``."""
    if e.kind == "lumped":
        part = e.part or ""
        return f"{e.connection} {PART_NAMES.get(part, 'part')} {si(float(e.value or 0.0), PART_UNITS.get(part, ''))}"
    label = e.kind.replace("_", " ") + (f" ({e.end})" if e.end else "")
    return f"{label} {float(e.electrical_deg or 0.0):.1f}° {float(e.z0_ohm or 0.0):.4g} Ω"


def elements_text(d: DesignDoc) -> str:
    return " · ".join(element_text(e) for e in d.elements)


def yield_text(d: DesignDoc) -> str:
    return DASH if d.robustness is None else f"{100.0 * d.robustness.yield_frac:.0f}%"


DESIGN_HEAD = ("rank", "verdict", "margin (dB)", "worst RL (dB)", "at (MHz)", "length (λ)", "yield",
               "elements, load outwards (electrical length, Z0)")


def design_cells(d: DesignDoc) -> list[str]:
    """A ranked design's row (shared by the terminal, summary.md and the study page)."""
    rank = f"{d.rank} ({d.alternative})" if d.alternative else str(d.rank)
    return [rank, d.verdict, num(d.margin_db, "+.2f", "+∞"), num(d.worst_return_loss_db, ".2f"),
            f"{d.worst_freq_hz / 1e6:.2f}", f"{d.total_length_wl:.3f}", yield_text(d), elements_text(d)]


ALTERNATIVE_HEAD = ("alternative", "network", "best rank", "verdict", "best margin (dB)", "best yield",
                    "length (λ)", "cable (mm)", "pieces", "junctions")
ALTERNATIVE_ALIGN = "llrlrrrrrr"


def alternative_cells(a: AlternativeDoc) -> list[str]:
    """One alternative's row, by its best design (shared by the terminal, summary.md, the report and the explorer)."""
    return [a.name, a.network, num(a.best_rank, "d"), a.verdict or "no design", num(a.best_margin_db, "+.2f", "+∞"),
            DASH if a.best_yield is None else f"{100.0 * a.best_yield:.0f}%", num(a.total_length_wl, ".3f"),
            num(a.total_mm, ".0f"), num(a.pieces, "d"), num(a.junctions, "d")]


def alternatives_markdown(doc: SummaryDoc, heading: str = "##") -> list[str]:
    """The comparison of a study's alternatives (empty for a study with one network)."""
    if not doc.alternatives:
        return []
    return [f"{heading} Alternatives compared", "",
            "Each named network was searched with the same budget; each row is its best design.", "",
            *table(ALTERNATIVE_HEAD, _cells([alternative_cells(a) for a in doc.alternatives]), ALTERNATIVE_ALIGN), ""]


BUILD_HEAD = ("#", "part", "cable", "Z0 (Ω)", "end", "electrical incl. allowances (°)", "allowances (°)", "cut (mm)")


def build_cells(sheet: BuildSheet) -> list[list[str]]:
    """The build sheet's rows, one per piece (shared by the terminal, summary.md, cut list and study page)."""
    return [[str(p.element), p.kind.replace("_", " "), p.cable, f"{p.z0_ohm:.4g}", p.end or DASH,
             f"{p.electrical_deg:.1f}", f"{p.allowance_deg:.1f}", f"{p.cut_mm:.1f}"] for p in sheet.pieces]


MASK_HEAD = ("from", "to", "min. return loss (dB)", "max. VSWR", "max. network loss (dB)")


def mask_cells(mask: Sequence[MaskSegment]) -> list[list[str]]:
    """Every segment with both its return loss and its VSWR (the same requirement)."""
    return [[mhz(s.f_lo_hz), mhz(s.f_hi_hz), f"{s.min_rl_db:g}", num(s.max_vswr, ".3g"), num(s.max_loss_db, "g")]
            for s in mask]


def mask_text(mask: Sequence[MaskSegment]) -> str:
    """The mask in one line, each segment as return loss and VSWR: ``420.000–450.000 MHz: RL ≥ 15 dB (VSWR ≤ 1.43)``."""
    parts = []
    for s in mask:
        span = mhz(s.f_lo_hz) if s.f_lo_hz == s.f_hi_hz else f"{s.f_lo_hz / 1e6:.3f}–{mhz(s.f_hi_hz)}"
        loss = f", network loss ≤ {s.max_loss_db:g} dB" if s.max_loss_db is not None else ""
        parts.append(f"{span}: return loss ≥ {s.min_rl_db:g} dB (VSWR ≤ {num(s.max_vswr, '.3g')}){loss}")
    return "; ".join(parts)


LOAD_HEAD = ("where", "frequency", "impedance (Ω)", "return loss (dB)", "VSWR")


def load_cells(load: LoadView) -> list[list[str]]:
    return [[p.label, mhz(p.freq_hz), f"{p.r_ohm:.2f} {'+' if p.x_ohm >= 0 else '−'} j{abs(p.x_ohm):.2f}",
             num(p.return_loss_db, ".2f"), num(p.vswr, ".2f")] for p in load.points]


def load_sentence(load: LoadView) -> str:
    """The unmatched margin, and "no network needed" when the bare load meets the mask."""
    text = (f"Unmatched margin against the mask: {num(load.unmatched_margin_db, '+.2f', '+∞')} dB (worst return loss "
            f"{num(load.worst_return_loss_db, '.2f')} dB at {mhz(load.worst_freq_hz)}).")
    if load.meets_mask:
        text += " The bare load already meets the mask: no network needed."
    return text


# ---------------------------------------------------------------- several loads

MANY_LOADS = 6  # above this many loads, a design's row gives the loads met, the worst load and its margin


def _share_text(d: DesignDoc) -> str:
    n = len(d.load_margins)
    met = f"{d.loads_met} of {n}"
    if d.share is not None and abs(d.share - (d.loads_met or 0) / n) > 1e-9:
        met += f" ({100 * d.share:.0f} % by weight)"
    return met


def load_margin_head(doc: SummaryDoc) -> tuple[str, ...]:
    """Columns of the per-load table of the ranked designs: the margin on each load (up to
    :data:`MANY_LOADS` loads), or the loads met, the worst load and its margin."""
    if len(doc.loads) <= MANY_LOADS:
        return ("rank", "verdict", *(f"{c.name} (dB)" for c in doc.loads), "loads met")
    return ("rank", "verdict", "loads met", "worst load", "its margin (dB)", "at (MHz)", "yield, builds × loads")


def load_margin_align(doc: SummaryDoc) -> str:
    """One letter per column of :func:`load_margin_head` (``l`` text, ``r`` a number)."""
    if len(doc.loads) <= MANY_LOADS:
        return "ll" + "r" * (len(load_margin_head(doc)) - 2)
    return "llrlrrr"


def load_margin_cells(d: DesignDoc, doc: SummaryDoc) -> list[str]:
    """A ranked design's row of the per-load table (terminal, summary.md, and the study page)."""
    if len(doc.loads) <= MANY_LOADS:
        return [str(d.rank), d.verdict, *(num(lm.margin_db, "+.2f", "+∞") for lm in d.load_margins), _share_text(d)]
    worst = next((lm for lm in d.load_margins if lm.load == d.worst_load), None)
    return [str(d.rank), d.verdict, _share_text(d), d.worst_load or DASH,
            num(worst.margin_db if worst else None, "+.2f", "+∞"),
            f"{worst.worst_freq_hz / 1e6:.2f}" if worst else DASH, yield_text(d)]


LOADS_HEAD = ("load", "weight", "from", "margin alone (dB)", "worst RL (dB)", "at (MHz)")
LOADS_ALIGN = "lrlrrr"


def loads_rows(doc: SummaryDoc) -> tuple[list[list[str]], int]:
    """The loads alone, one row each (up to :data:`MANY_LOADS`; beyond that the worst alone), and
    how many are left out."""
    cases = list(doc.loads)
    if len(cases) > MANY_LOADS:
        cases = sorted(cases, key=lambda c: c.alone.unmatched_margin_db)[:MANY_LOADS]
    rows = [[c.name, f"{c.weight:g}", c.source, num(c.alone.unmatched_margin_db, "+.2f", "+∞"),
             num(c.alone.worst_return_loss_db, ".2f"), f"{c.alone.worst_freq_hz / 1e6:.2f}"] for c in cases]
    return rows, len(doc.loads) - len(cases)


def loads_sentence(doc: SummaryDoc) -> str:
    """How many loads, how they rank the designs, and how many meet the mask alone."""
    n = len(doc.loads)
    met = sum(1 for c in doc.loads if c.alone.meets_mask)
    rule = ("by the weighted share of loads whose mask they meet, ties broken by the worst margin"
            if doc.load_rule == "share" else "by their worst margin over every load")
    return (f"{n} loads; designs are ranked {rule}. Alone, {met} of {n} meet the mask"
            + (": no network needed." if met == n else "."))


# ---------------------------------------------------------------- designs.csv


def design_rows(designs: Sequence[DesignDoc]) -> list[dict]:
    """One flat row per design, best first (``rank`` 1), for ``designs.csv``.

    Columns: rank, verdict, margin_db, worst_rl_db, worst_freq_hz, length_wl, yield_frac (with
    several loads: loads_met, share, worst_load and, up to six loads, ``margin_db_<load>``), then per
    element ``e{i}_`` kind, end, connection, part, medium, z0_ohm, length_deg (cable + allowances),
    length_wl, length_mm (cable to cut), value, value_unit.  Elements are numbered from the load
    outwards.  Missing quantities are None.
    """
    rows = []
    for d in designs:
        row: dict = {"rank": d.rank, **({"alternative": d.alternative} if d.alternative else {}),
                     "verdict": d.verdict, "margin_db": d.margin_db, "worst_rl_db": d.worst_return_loss_db,
                     "worst_freq_hz": d.worst_freq_hz,
                     "length_wl": d.total_length_wl,
                     "yield_frac": None if d.robustness is None else d.robustness.yield_frac}
        if d.load_margins:
            row.update({"loads_met": d.loads_met, "share": d.share, "worst_load": d.worst_load})
            if len(d.load_margins) <= MANY_LOADS:
                row.update({f"margin_db_{lm.load}": lm.margin_db for lm in d.load_margins})
        for el in d.elements:
            i = el.index
            row.update({
                f"e{i}_kind": el.kind,
                f"e{i}_end": el.end,
                f"e{i}_connection": el.connection,
                f"e{i}_part": el.part,
                f"e{i}_medium": el.medium or None,
                f"e{i}_z0_ohm": el.z0_ohm,
                f"e{i}_length_deg": el.electrical_deg,
                f"e{i}_length_wl": el.wavelengths,
                f"e{i}_length_mm": None if el.physical_m is None else el.physical_m * 1e3,
                f"e{i}_value": el.value,
                f"e{i}_value_unit": VALUE_UNIT.get(el.part or ""),
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


DEFAULT_PLOTS = {
    "Return loss against the mask": "return_loss.png",
    "Smith chart of the input": "smith.png",
    "Margin against size (Pareto front)": "pareto.png",
}
RESULT_FILES = {
    "Ranked designs (CSV)": "designs.csv",
    "Cut list": "cut_list.md",
    "Best network, 2-port Touchstone (port 1 to the source)": "best_network.s2p",
    "Matched input, 1-port Touchstone": "matched_input.s1p",
    "All figures (JSON)": "summary.json",
}


def ceiling_sentence(doc: SummaryDoc) -> str:
    """The Bode–Fano ceiling said before the search, as one plain sentence ("" when not known)."""
    return f"Bode–Fano {doc.feasibility.statement}." if doc.feasibility is not None else ""


def matched_input_files(doc: SummaryDoc) -> dict[str, str]:
    """With several loads, the matched input of the best design on each load (up to
    :data:`MANY_LOADS` loads; beyond that on its worst load), by load name: ``matched_input_<load>.s1p``.
    Empty with one load (its file is ``matched_input.s1p``)."""
    if not doc.several_loads or not doc.designs:
        return {}
    names = [c.name for c in doc.loads]
    if len(names) > MANY_LOADS:
        names = [doc.designs[0].worst_load or names[0]]
    return {name: f"matched_input_{name}.s1p" for name in names}


def _cells(rows: Sequence[Sequence[str]]) -> list[list[str]]:
    """Every cell escaped as markdown text."""
    return [[md(c) for c in row] for row in rows]


def build_markdown(doc: SummaryDoc) -> list[str]:
    """The build sheet section: pieces in mm of their cable, the allowance sentence, the assembly."""
    sheet = doc.build
    if sheet is None:
        return []
    lines = [f"## Build sheet of the best design (rank {sheet.design_rank})", "",
             f"Pieces from the load outwards; electrical lengths at {mhz(doc.reference_hz)}. "
             f"{md(sheet.allowances)}", ""]
    if sheet.pieces:
        lines += table(BUILD_HEAD, _cells(build_cells(sheet)), "llllllrr")
    else:
        lines.append("No lines or stubs to cut.")
    lines += ["", "Assembly, from the load to the source:", ""]
    lines += [f"{k}. {md_block(step)}" for k, step in enumerate(sheet.assembly, start=1)]
    return [*lines, ""]


def _robustness_markdown(d: DesignDoc, doc: SummaryDoc) -> list[str]:
    """The yield and sensitivity section for the best design (empty without a Monte Carlo)."""
    rob, tol = d.robustness, doc.tolerance
    if rob is None:
        return []
    spreads = [f"cut ±{tol.cut_m * 1e3:g} mm"]
    for val, label in ((tol.z0_rel, "Z0"), (tol.vf_rel, "velocity factor"), (tol.parts_rel, "lumped values")):
        spreads.append(f"{label} ±{val * 100:g} %" if val is not None else f"{label}: the cable's own tolerance")
    if rob.load_yields:
        each = ""
        if len(rob.load_yields) <= MANY_LOADS:
            each = " On each load: " + ", ".join(f"{md(lm.load)} {100.0 * y:.0f} %"
                                                 for lm, y in zip(d.load_margins, rob.load_yields, strict=False)) + "."
        lead = (f"Each of {rob.samples} simulated builds ({', '.join(spreads)}; uniform spreads) was tried on every "
                f"one of the {len(rob.load_yields)} loads: **{100.0 * rob.yield_frac:.0f} %** of the build–load "
                f"pairs meet the mask (weighted by load).{each} Margin over the pairs")
    else:
        lead = (f"Of {rob.samples} simulated builds ({', '.join(spreads)}; uniform spreads), "
                f"**{100.0 * rob.yield_frac:.0f} %** meet the mask. Margin")
    lines = ["## Robustness of the best design", "",
             f"{lead}: median {rob.margin_p50_db:+.2f} dB, "
             f"5th percentile {rob.margin_p5_db:+.2f} dB, worst {rob.margin_min_db:+.2f} dB. A low yield says: "
             "trim the open stubs while measuring.", ""]
    rows = [[str(s.index + 1), num(s.db_per_mm, "+.3f"), num(s.db_per_pct_vf, "+.3f"), num(s.db_per_pct_z0, "+.3f"),
             num(s.db_per_pct_value, "+.3f")] for s in rob.sensitivities]
    lines += table(["#", "margin dB per mm longer", "per % VF", "per % Z0", "per % value"], rows, "rrrrr")
    return [*lines, ""]


def _ratings_markdown(d: DesignDoc) -> list[str]:
    if d.power is None:
        return []
    lines = [f"## Ratings at {d.power.drive_w:g} W available (best design)", ""]
    if d.power.within:
        lines.append("Within every cable and connector rating in force (the cut list gives each section's figures).")
    else:
        lines += [f"- **Over rating:** {md(line)}" for line in d.power.over_rating]
    return [*lines, ""]


def summary_markdown(doc: SummaryDoc) -> str:
    """The readable report of one study as Markdown; every text that came from the user is escaped."""
    lines: list[str] = [f"# Matching study: {md(doc.study)}", ""]
    if doc.description:
        lines += [md_block(doc.description), ""]
    lines += [f"**Verdict:** {md(doc.verdict_line)}", ""]
    if doc.invented:
        lines += ["*The study says its data is invented: these results are not about a measured device.*", ""]

    lines += ["## Problem", "", f"- System impedance: {doc.system_ohm:g} Ω", f"- Load: {md(doc.load.source)}",
              f"- Electrical lengths at {mhz(doc.reference_hz)}", f"- Designs ranked by: {md(doc.ranked_by)}"
              + (", within the ratings first" if doc.drive_w is not None else "")]
    if doc.drive_w is not None:
        lines.append(f"- Drive: {doc.drive_w:g} W available from the source")
    lines += ["", "Mask:", "", *table(MASK_HEAD, mask_cells(doc.mask), "rrrrr"), ""]

    if doc.several_loads:
        rows, left = loads_rows(doc)
        lines += ["## The loads alone (no network)", "", md(loads_sentence(doc)), "",
                  *table(LOADS_HEAD, _cells(rows), LOADS_ALIGN), ""]
        if left:
            lines += [f"The {len(rows)} worst alone are shown; {left} more are in summary.json.", ""]
        worst = min(doc.loads, key=lambda c: c.alone.unmatched_margin_db)
        lines += [f"The worst alone, {md(worst.name)} ({md(worst.source)}):", "",
                  *table(LOAD_HEAD, load_cells(worst.alone), "lrrrr"), ""]
    else:
        lines += ["## The load alone (no network)", "", *table(LOAD_HEAD, load_cells(doc.load), "lrrrr"), "",
                  load_sentence(doc.load), ""]
    if doc.feasibility is not None:
        lines += [md(ceiling_sentence(doc)), ""]

    lines += alternatives_markdown(doc)
    if doc.designs:
        lines += ["## Ranked designs", "", *table(DESIGN_HEAD, _cells([design_cells(d) for d in doc.designs]),
                                                  "llrrrrrl"), ""]
        if doc.several_loads:
            lines += ["The margin is the worst over every load. On each load:", "",
                      *table(load_margin_head(doc), _cells([load_margin_cells(d, doc) for d in doc.designs]),
                             load_margin_align(doc)), ""]
        lines += build_markdown(doc)
        lines += _ratings_markdown(doc.designs[0])
        lines += _robustness_markdown(doc.designs[0], doc)

    plots = dict(list(DEFAULT_PLOTS.items())[:2]) if doc.designs else {}
    if doc.pareto:
        plots.update(list(DEFAULT_PLOTS.items())[2:])
    links = [f"- [{title}]({path})" for title, path in plots.items()]
    if doc.designs:
        per_load = matched_input_files(doc)
        links += [f"- [{title}]({path})" for title, path in RESULT_FILES.items()
                  if (path != "cut_list.md" or doc.build is not None)
                  and not (per_load and path == "matched_input.s1p")]
        links[-1:-1] = [f"- [Matched input on load {md(name)}, 1-port Touchstone]({path})"
                        for name, path in per_load.items()]
    if links:
        lines += ["## Plots and files", "", *links, ""]

    s = doc.search
    lines += ["## Search", "", f"- Trials: {s.trials_complete}", f"- Network evaluations: {s.evaluations}",
              f"- Elapsed: {s.elapsed_s:.1f} s", f"- Time in trials, all runs: {s.trial_time_s:.1f} s"]
    if s.stopped_early:
        lines.append("- Stopped early: the target margin was reached")
    if s.seeds:
        lines.append(f"- Seeds: {md(', '.join(s.seeds))}")
    lines.append("")

    if doc.warnings:
        lines += ["## Warnings", "", *[f"- {md_block(w)}" for w in doc.warnings], ""]
    lines += ["## Cautions", "", *[f"- {c}" for c in CAUTIONS], ""]
    return "\n".join(lines)
