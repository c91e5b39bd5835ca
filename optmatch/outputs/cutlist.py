"""The cut list as a technician reads it (markdown) and as a spreadsheet takes it (CSV), from the
summary document's build sheet (and the best design's power check).

Lengths in mm, delays in ns, electrical lengths in degrees at the reference frequency.
"""

from __future__ import annotations

import csv
import io
from dataclasses import asdict

from optmatch.outputs.document import BuildSheet, SummaryDoc
from optmatch.outputs.markdown import md, md_block, table
from optmatch.outputs.tables import BUILD_HEAD, build_cells, mhz, num

CSV_COLUMNS = ("element", "part", "cable", "source", "z0_ohm", "vf", "end", "cut_mm", "cut_long_mm", "width_mm",
               "electrical_deg", "allowance_deg", "cable_delay_ns", "allowance_ns", "advice")

CAUTION = ("Open stub ends and mismatched lines carry high RF voltage at transmit power: insulate open ends, "
           "switch off before touching, and defer to the cable and connector makers' ratings.")


def cut_list_markdown(doc: SummaryDoc) -> str:
    """The cut list page: pieces in build order (load outwards), assembly, stock, cable totals, power check."""
    sheet = doc.build
    assert sheet is not None
    lines = [f"# Cut list: {md(doc.study)}", "",
             f"Pieces of the design ranked {sheet.design_rank}, from the load outwards; electrical lengths at "
             f"{mhz(doc.reference_hz)}. {md(sheet.allowances)}", ""]
    widths = any(p.width_mm is not None for p in sheet.pieces)
    head = [*BUILD_HEAD, "from", "cut long to (mm)", "cable delay (ns)", "allowance (ns)",
            *(["strip width (mm)"] if widths else []), "advice"]
    rows = []
    for cells, p in zip(build_cells(sheet), sheet.pieces, strict=True):
        rows.append([*(md(c) for c in cells), md(p.source), num(p.cut_long_mm, ".1f"), f"{p.cable_delay_ns:.3f}",
                     f"{p.allowance_ns:.3f}", *([num(p.width_mm, ".3f")] if widths else []), md(p.advice)])
    lines += table(head, rows, "l" * 8 + "lrrr" + ("r" if widths else "") + "l")
    lines += ["", f"Trim rule: {sheet.trim_rule}.", "", "## Assembly, from the load to the source", ""]
    lines += [f"{k}. {md_block(step)}" for k, step in enumerate(sheet.assembly, start=1)]
    lines.append("")
    if sheet.stock_used:
        lines += ["## Stock pieces used", "", *table(
            ["cable", "length (mm)", "used", "on the shelf"],
            [[md(s.cable), f"{s.length_mm:.1f}", str(s.used), str(s.on_shelf)] for s in sheet.stock_used], "lrrr"), ""]
    if sheet.cable_totals:
        lines += ["## Cable from reels", "", *table(
            ["cable", "pieces", "total to draw (mm)"],
            [[md(t.cable), str(t.pieces), f"{t.total_mm:.1f}"] for t in sheet.cable_totals], "lrr"), ""]
    b = sheet.band
    lines += ["## Across the band", "",
              f"- Network loss: {b.network_loss_db_min:.2f} to {b.network_loss_db_max:.2f} dB",
              f"- Share of the available power reaching the load: {b.delivered_share_min:.1%} to "
              f"{b.delivered_share_max:.1%}"]
    if b.delivered_w_min is not None and b.delivered_w_max is not None:
        lines.append(f"- Delivered power: {b.delivered_w_min:.1f} to {b.delivered_w_max:.1f} W")
    lines.append("")
    power = doc.designs[sheet.design_rank - 1].power if doc.designs else None
    if power is not None:
        lines += [f"## Power check at {power.drive_w:g} W available", ""]
        rows = []
        for s in power.sections:
            oks = [ok for ok in (s.voltage_ok, s.power_ok, s.connector_ok) if ok is not None]
            verdict = "no rating" if not oks else ("ok" if all(oks) else "**OVER RATING**")
            rows.append([str(s.element), md(s.part), md(s.cable or "–"), f"{s.peak_voltage_v:.0f}",
                         num(s.max_voltage_v, ".0f"), num(s.connector_max_voltage_v, ".0f"), f"{s.peak_current_a:.2f}",
                         num(s.heating_w, ".1f"), num(s.power_rating_w, ".0f"), f"{s.dissipated_w:.2f}", verdict])
        lines += table(["#", "part", "cable", "peak V", "cable rating V", "connector rating V", "peak A",
                        "heating (W, matched-line equivalent)", "rating (W)", "dissipated (W)", "verdict"],
                       rows, "lllrrrrrrrl")
        lines += ["", f"Note: {power.note}. The heating column is the local heating at the hottest point "
                  "(current and voltage maxima of the standing wave) stated as the power of a matched line that "
                  "heats as much; the cable's rating is for a matched line, derated to the frequency.", ""]
        lines += [f"- **Over rating:** {md(line)}" for line in power.over_rating]
        if power.over_rating:
            lines.append("")
    lines += ["## Caution", "", CAUTION, ""]
    return "\n".join(lines)


def cut_list_csv(sheet: BuildSheet) -> str:
    """One CSV row per piece, columns :data:`CSV_COLUMNS`."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(CSV_COLUMNS)
    for p in sheet.pieces:
        row = asdict(p)
        w.writerow(["" if row.get(c) is None else row.get(c) for c in CSV_COLUMNS])
    return buf.getvalue()
