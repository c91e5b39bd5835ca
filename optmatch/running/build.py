"""The build view of a finished design: the cut list, shelf pieces used, cable per type, band loss
and delivered power, and the power check against the cables' ratings (with warnings).

Everything here is JSON-ready (plain dicts); lengths in mm, delays in ns, voltages in V peak, W.
"""

from __future__ import annotations

import numpy as np

from optmatch.domain.design import Design, describe, performance
from optmatch.domain.microstrip import printed_line
from optmatch.domain.power import check_ratings, drive
from optmatch.studyfile.loader import Study

TRIM_FRACTION = 0.03  # open stubs: cut long by 3 % ...
TRIM_MIN_MM = 5.0  # ... or 5 mm, whichever is more, then trim while measuring


def _element_name(kind: str, end: str | None) -> str:
    if kind == "line":
        return "line"
    return f"{kind.replace('_', ' ')}, {end} end"


def cut_list(study: Study, design: Design) -> list[dict]:
    """One row per line or stub (load outwards): what to cut, from what, and how to finish it."""
    net = study.problem.network
    rows = []
    for rep in describe(study.problem, design):
        if rep.kind == "lumped":
            continue
        el = net.elements[rep.index]
        option = design.choice.medium[rep.index]
        med = el.media[option]
        mm = (rep.physical_m or 0.0) * 1e3
        if med.printed is not None:
            source = "printed"
        elif el.piece(option) is not None:
            source = "stock piece"
        elif el.cut_step_m is not None:
            source = "cut from reel"
        else:
            source = "cut"
        row = {
            "element": rep.index + 1,
            "part": _element_name(rep.kind, rep.end),
            "label": el.label,
            "cable": med.name or f"Z0 {rep.z0_ohm:g} Ω, VF {rep.vf:.3g}",
            "source": source,
            "cut_mm": round(mm, 1),
            "electrical_deg": rep.electrical_deg,
            "cable_delay_ns": (rep.delay_s or 0.0) * 1e9,
            "allowance_ns": (rep.extra_delay_s or 0.0) * 1e9,
            "z0_ohm": rep.z0_ohm,
            "vf": rep.vf,
            "width_mm": None,
            "cut_long_mm": None,
            "advice": "",
        }
        if med.printed is not None:
            line = printed_line(float(rep.z0_ohm or med.z0), rep.delay_s or 0.0, med.printed)
            row["width_mm"] = round(line.width_m * 1e3, 3)
            row["advice"] = "etch to this width and length; trim open ends with a knife while measuring"
        elif rep.kind != "line" and rep.end == "open":
            extra = max(TRIM_FRACTION * mm, TRIM_MIN_MM)
            if source == "stock piece":
                row["advice"] = ("stock piece: cannot be cut long; check the match with an analyser "
                                 "before running power")
            else:
                row["cut_long_mm"] = round(mm + extra, 1)
                row["advice"] = (f"cut {extra:.0f} mm long ({TRIM_FRACTION:.0%} or {TRIM_MIN_MM:.0f} mm, whichever is "
                                 f"more), then trim while measuring; insulate the open end (high RF voltage)")
        elif rep.kind != "line" and rep.end == "short":
            row["advice"] = "short the far end with the shortest possible strap; check the match after"
        rows.append(row)
    return rows


def cable_totals(rows: list[dict]) -> list[dict]:
    """Cable drawn from reels per type (mm), counting the extra length of open stubs cut long."""
    totals: dict[str, dict] = {}
    for r in rows:
        if r["source"] in ("stock piece", "printed"):
            continue
        t = totals.setdefault(r["cable"], {"cable": r["cable"], "pieces": 0, "total_mm": 0.0})
        t["pieces"] += 1
        t["total_mm"] = round(t["total_mm"] + (r["cut_long_mm"] or r["cut_mm"]), 1)
    return list(totals.values())


def stock_used(study: Study, design: Design) -> list[dict]:
    """Shelf pieces the design takes, with what the shelf holds."""
    net = study.problem.network
    have = {(name, round(length, 9)): count for name, length, count in net.stock}
    return [{"cable": name, "length_mm": round(length * 1e3, 1), "used": n, "on_shelf": have.get((name, length), 0)}
            for (name, length), n in sorted(net.pieces_used(design.choice).items())]


def _band(study: Study, design: Design) -> dict:
    perf = performance(study.problem, design)
    loss = perf.network_loss_db
    out = {
        "network_loss_db_max": float(np.nanmax(loss)),
        "network_loss_db_min": float(np.nanmin(loss)),
        "delivered_share_min": float(np.min(perf.delivered)),
        "delivered_share_max": float(np.max(perf.delivered)),
    }
    if study.drive_w is not None:
        out["delivered_w_min"] = float(np.min(perf.delivered)) * study.drive_w
        out["delivered_w_max"] = float(np.max(perf.delivered)) * study.drive_w
    return out


def _mhz(f: float) -> str:
    return f"{f / 1e6:.1f} MHz"


def power_check(study: Study, design: Design) -> tuple[dict | None, list[str]]:
    """Peak voltage, current, dissipation per section at the study's drive power, and warnings."""
    if study.drive_w is None:
        return None, []
    problem = study.problem
    net = problem.network
    params = net.engine_params(design.vector(), design.choice)
    scalar = [{k: (np.asarray(v).reshape(-1)[0] if np.ndim(v) else v) for k, v in p.items()} for p in params]
    res = drive(net.stages, scalar, problem.grid.freq, problem.zload, problem.z_sys, study.drive_w)
    cables = {}
    for i, el in enumerate(net.elements):
        if el.is_line_like:
            name = el.media[design.choice.medium[i]].name
            if name in study.cables:
                cables[i] = study.cables[name]
    checks = {c.index: c for c in check_ratings(res, cables)}
    sections, warnings = [], []
    for sec in res.sections:
        el = net.elements[sec.index]
        end = None if el.kind == "line" else ("short" if design.choice.short[sec.index] else "open")
        what = f"element {sec.index + 1} ({_element_name(el.kind, end)}"
        row = {
            "element": sec.index + 1, "part": _element_name(el.kind, end),
            "peak_voltage_v": float(np.max(sec.voltage_v)), "peak_current_a": float(np.max(sec.current_a)),
            "dissipated_w": float(np.max(sec.dissipated_w)),
            "open_end_voltage_v": None if sec.open_end_v is None else float(np.max(sec.open_end_v)),
            "cable": None, "max_voltage_v": None, "heating_w": None, "power_rating_w": None,
            "voltage_ok": None, "power_ok": None,
        }
        chk = checks.get(sec.index)
        if chk is not None:
            row.update(cable=chk.cable, max_voltage_v=chk.max_voltage_v, heating_w=chk.heating_w,
                       power_rating_w=chk.power_rating_w, voltage_ok=chk.voltage_ok, power_ok=chk.power_ok)
            what += f", {chk.cable})"
            if not chk.voltage_ok:
                warnings.append(f"OVER RATING at {study.drive_w:g} W: {what}: peak RF voltage "
                                f"{chk.peak_voltage_v:.0f} V at {_mhz(chk.voltage_freq_hz)} exceeds the cable's "
                                f"{chk.max_voltage_v:.0f} V peak rating (use a cable rated higher or less power)")
            if not chk.power_ok:
                warnings.append(f"OVER RATING at {study.drive_w:g} W: {what}: heats like {chk.heating_w:.0f} W in a "
                                f"matched line at {_mhz(chk.heating_freq_hz)}, above the cable's "
                                f"{chk.power_rating_w:.0f} W rating there (use a heavier cable or less power)")
        sections.append(row)
    doc = {
        "drive_w": study.drive_w,
        "accepted_w_min": float(np.min(res.accepted_w)),
        "delivered_w_min": float(np.min(res.delivered_w)),
        "delivered_w_max": float(np.max(res.delivered_w)),
        "sections": sections,
        "note": "peak values over the band and along each section, standing waves included; the source "
                "is the drive power available into the system impedance",
    }
    return doc, warnings


def build_view(study: Study, design: Design) -> tuple[dict, list[str]]:
    """The build document of one design (cut list, stock, totals, band, power) and its warnings."""
    rows = cut_list(study, design)
    power, warnings = power_check(study, design)
    used = stock_used(study, design)
    for s in used:
        if s["used"] > s["on_shelf"]:
            warnings.append(f"the design uses {s['used']} stock pieces of {s['cable']} {s['length_mm']:g} mm; "
                            f"the shelf holds {s['on_shelf']}")
    return {
        "pieces": rows,
        "cable_totals": cable_totals(rows),
        "stock_used": used,
        "band": _band(study, design),
        "power": power,
        "trim_rule": f"open stubs cut long by {TRIM_FRACTION:.0%} or {TRIM_MIN_MM:g} mm, whichever is more",
    }, warnings
