"""The cut list as a technician reads it (markdown) and as a spreadsheet takes it (CSV).

Input: the ``cut_list`` document of summary.json (see :func:`optmatch.running.build.build_view`).
Lengths in mm, delays in ns, electrical lengths in degrees at the reference frequency.
"""

from __future__ import annotations

import csv
import io
from collections.abc import Mapping

CSV_COLUMNS = ("element", "part", "cable", "source", "cut_mm", "cut_long_mm", "width_mm", "electrical_deg",
               "cable_delay_ns", "allowance_ns", "z0_ohm", "vf", "advice")

CAUTION = ("Open stub ends and mismatched lines carry high RF voltage at transmit power: insulate open ends, "
           "switch off before touching, and defer to the cable and connector makers' ratings.")


def _n(value: object, fmt: str) -> str:
    return "–" if value is None else format(value, fmt)


def cut_list_markdown(doc: Mapping, study: str = "", f_ref_hz: float | None = None) -> str:
    """The cut list page: pieces in build order (load outwards), stock used, cable totals, power check."""
    ref = f" at {f_ref_hz / 1e6:.3f} MHz" if f_ref_hz else ""
    lines = [f"# Cut list{': ' + study if study else ''}", "",
             "Pieces from the load outwards. *Cut* is the cable itself, connector to connector, after the "
             f"allowances of connectors, adapters and tees; *electrical* includes those allowances{ref}.", ""]
    head = ["#", "part", "cable", "from", "cut (mm)", "cut long to (mm)", "electrical (°)", "cable delay (ns)",
            "allowance (ns)", "advice"]
    widths = any(p.get("width_mm") is not None for p in doc["pieces"])
    if widths:
        head.insert(5, "strip width (mm)")
    lines += ["| " + " | ".join(head) + " |", "|" + "|".join("---:" if h.endswith(")") else ":---" for h in head) + "|"]
    for p in doc["pieces"]:
        cells = [str(p["element"]), p["part"], p["cable"], p["source"], f"{p['cut_mm']:.1f}",
                 _n(p.get("cut_long_mm"), ".1f"), f"{p['electrical_deg']:.1f}", f"{p['cable_delay_ns']:.3f}",
                 f"{p['allowance_ns']:.3f}", p.get("advice") or ""]
        if widths:
            cells.insert(5, _n(p.get("width_mm"), ".3f"))
        lines.append("| " + " | ".join(str(c).replace("|", "\\|") for c in cells) + " |")
    lines.append("")
    lines.append(f"Trim rule: {doc.get('trim_rule', '')}.")
    lines.append("")
    if doc.get("stock_used"):
        lines += ["## Stock pieces used", "", "| cable | length (mm) | used | on the shelf |", "|:---|---:|---:|---:|"]
        lines += [f"| {s['cable']} | {s['length_mm']:.1f} | {s['used']} | {s['on_shelf']} |" for s in doc["stock_used"]]
        lines.append("")
    if doc.get("cable_totals"):
        lines += ["## Cable from reels", "", "| cable | pieces | total to draw (mm) |", "|:---|---:|---:|"]
        lines += [f"| {t['cable']} | {t['pieces']} | {t['total_mm']:.1f} |" for t in doc["cable_totals"]]
        lines.append("")
    band = doc.get("band") or {}
    if band:
        lines += ["## Across the band", "",
                  f"- Network loss: {band['network_loss_db_min']:.2f} to {band['network_loss_db_max']:.2f} dB",
                  f"- Share of the available power reaching the load: {band['delivered_share_min']:.1%} to "
                  f"{band['delivered_share_max']:.1%}"]
        if "delivered_w_min" in band:
            lines.append(f"- Delivered power: {band['delivered_w_min']:.1f} to {band['delivered_w_max']:.1f} W")
        lines.append("")
    power = doc.get("power")
    if power:
        lines += [f"## Power check at {power['drive_w']:g} W available", "",
                  "| # | part | cable | peak V | rating V | peak A | heating (W, matched-line equivalent) | "
                  "rating (W) | dissipated (W) | verdict |", "|---:|:---|:---|---:|---:|---:|---:|---:|---:|:---|"]
        for s in power["sections"]:
            ok = [s["voltage_ok"], s["power_ok"]]
            verdict = "no rating" if None in ok else ("ok" if all(ok) else "**OVER RATING**")
            lines.append(f"| {s['element']} | {s['part']} | {s['cable'] or '–'} | {s['peak_voltage_v']:.0f} | "
                         f"{_n(s['max_voltage_v'], '.0f')} | {s['peak_current_a']:.2f} | {_n(s['heating_w'], '.1f')} | "
                         f"{_n(s['power_rating_w'], '.0f')} | {s['dissipated_w']:.2f} | {verdict} |")
        lines += ["", f"Note: {power['note']}. The heating column is the local heating at the hottest point "
                  "(current and voltage maxima of the standing wave) stated as the power of a matched line that "
                  "heats as much; the cable's rating is for a matched line.", ""]
    lines += ["## Caution", "", CAUTION, ""]
    return "\n".join(lines)


def cut_list_csv(doc: Mapping) -> str:
    """One CSV row per piece, columns :data:`CSV_COLUMNS`."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(CSV_COLUMNS)
    for p in doc["pieces"]:
        w.writerow(["" if p.get(c) is None else p.get(c) for c in CSV_COLUMNS])
    return buf.getvalue()
