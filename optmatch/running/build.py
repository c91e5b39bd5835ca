"""The build view of a finished design: the pieces in mm of their cable, the assembly from load to
source, cable and stock used, band figures, and the power check against the ratings.

Everything here is typed (:mod:`optmatch.outputs.document`); lengths in mm, delays in ns, electrical
lengths in degrees at the reference frequency, voltages in V peak, W.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from optmatch.domain.design import Design, ElementReport, Performance, describe, performances
from optmatch.domain.microstrip import printed_line
from optmatch.domain.power import check_ratings, drive
from optmatch.outputs.document import (
    Band,
    BuildSheet,
    CableTotal,
    Piece,
    PowerCheck,
    SectionRating,
    StockUse,
)
from optmatch.outputs.tables import element_text
from optmatch.studyfile.loader import Study

TRIM_FRACTION = 0.03  # open stubs: cut long by 3 % ...
TRIM_MIN_MM = 5.0  # ... or 5 mm, whichever is more, then trim while measuring


def element_part(kind: str, end: str | None) -> str:
    """``line``, ``shunt stub, open end`` …: what an element is, in words."""
    if kind == "line":
        return "line"
    return f"{kind.replace('_', ' ')}, {end} end"


def pieces(study: Study, design: Design, elements: Sequence[ElementReport]) -> list[Piece]:
    """One piece per line or stub (load outwards): what to cut, from what, and how to finish it."""
    net = study.problem.network
    f_ref = study.problem.f_ref
    out = []
    for rep in elements:
        if rep.kind == "lumped":
            continue
        el = net.elements[rep.index]
        option = design.choice.medium[rep.index]
        med = el.media[option]
        mm = (rep.physical_m or 0.0) * 1e3
        z0, vf = float(rep.z0_ohm or med.z0), float(rep.vf or med.vf)
        if med.printed is not None:
            source = "printed"
        elif el.piece(option) is not None:
            source = "stock piece"
        elif el.cut_step_m is not None:
            source = "cut from reel"
        else:
            source = "cut"
        width = cut_long = None
        advice = ""
        if med.printed is not None:
            width = round(printed_line(z0, rep.delay_s or 0.0, med.printed).width_m * 1e3, 3)
            advice = "etch to this width and length; trim open ends with a knife while measuring"
        elif rep.kind != "line" and rep.end == "open":
            extra = max(TRIM_FRACTION * mm, TRIM_MIN_MM)
            if source == "stock piece":
                advice = "stock piece: cannot be cut long; check the match with an analyser before running power"
            else:
                cut_long = round(mm + extra, 1)
                advice = (f"cut {extra:.0f} mm long ({TRIM_FRACTION:.0%} or {TRIM_MIN_MM:.0f} mm, whichever is more), "
                          "then trim while measuring; insulate the open end (high RF voltage)")
        elif rep.kind != "line" and rep.end == "short":
            advice = "short the far end with the shortest possible strap, soldered; check the match after"
        out.append(Piece(
            element=rep.index + 1, part=element_part(rep.kind, rep.end), kind=rep.kind, end=rep.end, label=el.label,
            cable=med.name or f"line of Z0 {z0:g} Ω at VF {vf:.3g}", named_cable=bool(med.name), source=source,
            z0_ohm=z0, vf=vf, cut_mm=round(mm, 1), electrical_deg=float(rep.electrical_deg or 0.0),
            allowance_deg=360.0 * el.extra_delay * f_ref, cable_delay_ns=(rep.delay_s or 0.0) * 1e9,
            allowance_ns=el.extra_delay * 1e9, cut_long_mm=cut_long, width_mm=width, advice=advice,
        ))
    return out


def piece_text(p: Piece) -> str:
    """``element 2 (shunt stub, open end, RG-58-class, 60.0 mm)``: a piece as the assembly names it."""
    return f"element {p.element} ({p.part}, {p.cable}, {p.cut_mm:.1f} mm)"


def _finish(p: Piece) -> str:
    if p.end == "open":
        return "leave its far end open and insulate it (high RF voltage there)"
    if p.end == "short":
        return "short its far end with the shortest strap, soldered"
    return ""


def assembly(elements: Sequence[ElementReport], built: Sequence[Piece]) -> list[str]:
    """The network put together from the load to the source, one step per junction.

    Series elements (lines, series stubs, series parts) form the through path; shunt stubs and
    shunt parts hang at the junction between them, a stub on a tee's branch arm.
    """
    by_element = {p.element: p for p in built}

    def name(e: ElementReport) -> str:
        p = by_element.get(e.index + 1)
        return piece_text(p) if p is not None else f"element {e.index + 1} ({element_text(e)})"

    nodes: list[list[ElementReport]] = [[]]  # what hangs at each junction, load first
    through: list[ElementReport] = []  # what runs between junction k and k + 1
    for e in elements:
        if e.kind == "shunt_stub" or (e.kind == "lumped" and e.connection == "shunt"):
            nodes[-1].append(e)
        else:
            through.append(e)
            nodes.append([])
    steps = []
    last = len(nodes) - 1
    for k, hung in enumerate(nodes):
        before = "the load" if k == 0 else name(through[k - 1])
        after = "the source (transmitter or analyser)" if k == last else name(through[k])
        where = "At the load" if k == 0 else ("At the source" if k == last else f"Junction {k}")
        stubs = [e for e in hung if e.kind == "shunt_stub"]
        parts = [e for e in hung if e.kind == "lumped"]
        neighbours = ([through[k - 1]] if k else []) + ([through[k]] if k < last else [])
        if not stubs and any(e.kind == "lumped" for e in neighbours):
            text = f"{where}: solder {before} to {after} with the shortest leads"
        elif not stubs:
            text = f"{where}: a connector pair joins {before} to {after}"
        else:
            tee = "a tee" if len(stubs) == 1 else f"{len(stubs)} tees back to back"
            arms = "; ".join(f"{'its' if len(stubs) == 1 else f'tee {j + 1}'} branch arm takes {name(e)}: "
                             f"{_finish(by_element[e.index + 1])}" for j, e in enumerate(stubs))
            text = f"{where}: {tee}; the through arms take {before} and {after}; {arms}"
        if parts:
            text += "; " + "; ".join(f"solder {name(e)} across the junction with the shortest leads" for e in parts)
        steps.append(text + ".")
        if k < last and through[k].kind == "series_stub":
            p = by_element[through[k].index + 1]
            steps.append(f"Then {name(through[k])} goes in series with the line: break the return conductor and "
                         f"connect the stub across the break (practical on printed or balanced line); {_finish(p)}.")
    return steps


def allowances_sentence(built: Sequence[Piece]) -> str:
    """Whether the lengths count connector allowances, in one sentence."""
    if any(p.allowance_ns > 0 for p in built):
        return ("Connector, adapter and tee allowances are included in the electrical lengths (the allowance "
                "column); the mm to cut are the cable alone, connector to connector, with the allowances taken off.")
    return ("No connector allowances are given: each electrical length is the cable alone, so connectors and tees "
            "add length that the design does not count.")


def cable_totals(built: Sequence[Piece]) -> list[CableTotal]:
    """Cable drawn from reels per type (mm), counting the extra length of open stubs cut long."""
    totals: dict[str, list[float]] = {}
    for p in built:
        if p.source in ("stock piece", "printed"):
            continue
        t = totals.setdefault(p.cable, [0, 0.0])
        t[0] += 1
        t[1] = round(t[1] + (p.cut_long_mm or p.cut_mm), 1)
    return [CableTotal(name, int(n), mm) for name, (n, mm) in totals.items()]


def stock_used(study: Study, design: Design) -> list[StockUse]:
    """Shelf pieces the design takes, with what the shelf holds."""
    net = study.problem.network
    have = {(name, round(length, 9)): count for name, length, count in net.stock}
    return [StockUse(name, round(length * 1e3, 1), n, have.get((name, length), 0))
            for (name, length), n in sorted(net.pieces_used(design.choice).items())]


def band(perf: Performance | Sequence[Performance], drive_w: float | None) -> Band:
    """Network loss and delivered power over the band (and over every load, given each one's)."""
    perfs = [perf] if isinstance(perf, Performance) else list(perf)
    delivered = np.concatenate([pf.delivered for pf in perfs])
    loss = np.concatenate([pf.network_loss_db for pf in perfs])
    lo, hi = float(np.min(delivered)), float(np.max(delivered))
    return Band(network_loss_db_min=float(np.nanmin(loss)),
                network_loss_db_max=float(np.nanmax(loss)),
                delivered_share_min=lo, delivered_share_max=hi,
                delivered_w_min=None if drive_w is None else lo * drive_w,
                delivered_w_max=None if drive_w is None else hi * drive_w)


def _mhz(f: float) -> str:
    return f"{f / 1e6:.1f} MHz"


def power_check(study: Study, design: Design) -> PowerCheck | None:
    """Peak voltage, current and heating per section at the study's drive power, against the ratings.

    ``over_rating`` holds one line per rating exceeded: the cable's peak voltage, its power rating
    derated to the frequency (heating), or the peak voltage of a connector or adapter whose
    allowance gives ``max_voltage``.
    """
    if study.drive_w is None:
        return None
    problem = study.problem
    net = problem.network
    params = net.engine_params(design.vector(), design.choice)
    scalar = [{k: (np.asarray(v).reshape(-1)[0] if np.ndim(v) else v) for k, v in p.items()} for p in params]
    freq, zl = problem.stacked()  # with several loads: peaks over the band and over every load
    res = drive(net.stages, scalar, freq, zl, problem.z_sys, study.drive_w)
    cables = {}
    for i, el in enumerate(net.elements):
        if el.is_line_like:
            name = el.media[design.choice.medium[i]].name
            if name in study.cables:
                cables[i] = study.cables[name]
    connectors = {i: el.max_voltage_v for i, el in enumerate(net.elements) if el.max_voltage_v is not None}
    checks = {c.index: c for c in check_ratings(res, cables, connectors)}
    sections, over = [], []
    for sec in res.sections:
        el = net.elements[sec.index]
        end = None if el.kind == "line" else ("short" if design.choice.short[sec.index] else "open")
        part = element_part(el.kind, end)
        peak_v = float(np.max(sec.voltage_v))
        jv = int(np.argmax(sec.voltage_v))
        row = SectionRating(element=sec.index + 1, part=part, cable=None, peak_voltage_v=peak_v,
                            voltage_freq_hz=float(res.freq[jv]), peak_current_a=float(np.max(sec.current_a)),
                            dissipated_w=float(np.max(sec.dissipated_w)),
                            open_end_voltage_v=None if sec.open_end_v is None else float(np.max(sec.open_end_v)))
        chk = checks.get(sec.index)
        if chk is not None:
            what = f"element {sec.index + 1} ({part}{', ' + chk.cable if chk.cable else ''})"
            row = SectionRating(
                element=row.element, part=part, cable=chk.cable, peak_voltage_v=peak_v,
                voltage_freq_hz=row.voltage_freq_hz, peak_current_a=row.peak_current_a,
                dissipated_w=row.dissipated_w, open_end_voltage_v=row.open_end_voltage_v,
                max_voltage_v=chk.max_voltage_v, heating_w=chk.heating_w, heating_freq_hz=chk.heating_freq_hz,
                power_rating_w=chk.power_rating_w, connector_max_voltage_v=chk.connector_max_voltage_v,
                voltage_ok=chk.voltage_ok, power_ok=chk.power_ok, connector_ok=chk.connector_ok)
            if chk.voltage_ok is False:
                over.append(f"{what}: peak RF voltage {chk.peak_voltage_v:.0f} V at {_mhz(chk.voltage_freq_hz)}, "
                            f"above the cable's {chk.max_voltage_v:.0f} V peak rating")
            if chk.power_ok is False and chk.heating_freq_hz is not None:
                over.append(f"{what}: heats like {chk.heating_w:.0f} W in a matched line at "
                            f"{_mhz(chk.heating_freq_hz)}, above the cable's {chk.power_rating_w:.0f} W rating there")
            if chk.connector_ok is False:
                over.append(f"{what}: peak RF voltage {chk.peak_voltage_v:.0f} V at {_mhz(chk.voltage_freq_hz)}, "
                            f"above its connectors' {chk.connector_max_voltage_v:.0f} V peak rating")
        sections.append(row)
    return PowerCheck(
        drive_w=study.drive_w, accepted_w_min=float(np.min(res.accepted_w)),
        delivered_w_min=float(np.min(res.delivered_w)), delivered_w_max=float(np.max(res.delivered_w)),
        sections=tuple(sections), over_rating=tuple(over),
        note="peak values over the band and along each section, standing waves included; the source is the "
             "drive power available into the system impedance")


def rating_warnings(power: PowerCheck | None) -> list[str]:
    """The lines of ``over_rating`` as warnings, with the remedy."""
    if power is None:
        return []
    return [f"OVER RATING at {power.drive_w:g} W: {line} (use a cable or connector rated higher, or less power)"
            for line in power.over_rating]


def build_sheet(study: Study, design: Design, elements: Sequence[ElementReport] | None = None,
                perf: Performance | Sequence[Performance] | None = None, rank: int = 1) -> BuildSheet:
    """The build sheet of one design (pass its ``elements`` and ``perf`` when already computed; with
    several loads, every load's performance)."""
    elements = describe(study.problem, design) if elements is None else elements
    if perf is None:
        perf = performances(study.problem, design)
    built = pieces(study, design, elements)
    return BuildSheet(
        design_rank=rank, pieces=tuple(built), assembly=tuple(assembly(elements, built)),
        allowances=allowances_sentence(built),
        trim_rule=f"open stubs cut long by {TRIM_FRACTION:.0%} or {TRIM_MIN_MM:g} mm, whichever is more",
        band=band(perf, study.drive_w), cable_totals=tuple(cable_totals(built)),
        stock_used=tuple(stock_used(study, design)),
    )


def stock_warnings(sheet: BuildSheet) -> list[str]:
    """A line for every stock piece the design takes beyond what the shelf holds."""
    return [f"the design uses {s.used} stock pieces of {s.cable} {s.length_mm:g} mm; the shelf holds {s.on_shelf}"
            for s in sheet.stock_used if s.used > s.on_shelf]
