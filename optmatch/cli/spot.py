"""``optmatch spot``: every closed-form solution for one load at one frequency."""

from __future__ import annotations

import argparse
import json

from optmatch.cli.terminal import console, table
from optmatch.domain.closed_form import SpotResult, all_solutions
from optmatch.units import (
    InputError,
    format_hz,
    length_views,
    parse_complex,
    parse_frequency,
    parse_impedance_real,
    parse_length,
    parse_velocity_factor,
)


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("spot", help="closed-form solutions for one load at one frequency",
                       description="List every closed-form stub and quarter-wave solution for one load "
                                   "at one frequency, shortest first within each topology.")
    p.add_argument("--load", required=True, help="load impedance, e.g. 60-80j, 60-j80 or '60 - j80' (Ω)")
    p.add_argument("--freq", required=True, help="design frequency, e.g. 2GHz")
    p.add_argument("--system", default="50", help="system impedance (Ω, real), default 50")
    p.add_argument("--vf", default=None, help="velocity factor of the line, for the mm column (e.g. 0.66)")
    p.add_argument("--cable", default=None, metavar="NAME",
                   help="a catalog cable (optmatch cables) whose velocity factor the mm column uses; its "
                        "trade designation will do (RG-58 finds RG-58-class)")
    p.add_argument("--spacing", default="0.125wl", help="double-stub spacing (e.g. 45deg, 0.125wl, 30mm)")
    p.add_argument("--load-line", default="0wl", help="line between load and first double stub")
    p.add_argument("--json", action="store_true", help="print one JSON document instead of a table")
    p.set_defaults(handler=run_spot)


def _wavelengths(text: str, what: str, f_hz: float, vf: float) -> float:
    return parse_length(text, what).delay_s(f_hz, vf) * f_hz


def spot_document(zl: complex, f_hz: float, z0: float, vf: float, spacing_wl: float,
                  load_line_wl: float) -> dict:
    """All solutions as a JSON-ready document; every length under ``length_{deg,wavelengths,ns,m}``."""

    def lengths(prefix: str, wl: float) -> dict:
        v = length_views(wl, f_hz, vf)
        return {f"{prefix}_deg": v.deg, f"{prefix}_wavelengths": v.wavelengths,
                f"{prefix}_ns": v.ns, f"{prefix}_m": v.m}

    def topology(res: SpotResult) -> dict:
        doc: dict = {"topology": res.topology, "matchable": res.matchable, "note": res.note, "solutions": []}
        if res.min_load_line_wl is not None:
            doc.update(lengths("min_load_line", res.min_load_line_wl))
        for sol in res.solutions:
            doc["solutions"].append({
                "branch": sol.branch,
                "note": sol.note,
                **lengths("total_length", sol.total_length_wl),
                "elements": [
                    {"role": el.role, "kind": el.kind, "end": el.end, "z0_ohm": el.z0_ohm,
                     **lengths("length", el.length_wl)}
                    for el in sol.elements
                ],
            })
        return doc

    results = all_solutions(zl, z0, spacing_wl=spacing_wl, load_line_wl=load_line_wl)
    return {
        "load_ohm": {"re": zl.real, "im": zl.imag},
        "freq_hz": f_hz,
        "system_ohm": z0,
        "velocity_factor": vf,
        **lengths("spacing", spacing_wl),
        **lengths("load_line", load_line_wl),
        "topologies": [topology(r) for r in results],
    }


FREE_SPACE_WARNING = ("no --vf or --cable given: the mm column is a FREE-SPACE length (velocity factor 1.0); "
                      "in coax it is shorter (solid polyethylene about 0.66, foam about 0.8), so a piece cut to "
                      "it is far too long")


def _velocity_factor(args: argparse.Namespace, z0: float) -> tuple[float, str]:
    """(velocity factor, where it came from: 'given', 'cable NAME' or 'free space')."""
    if args.vf is not None and args.cable is not None:
        raise InputError("--vf and --cable both set the velocity factor; give one of them")
    if args.vf is not None:
        return parse_velocity_factor(args.vf, "--vf"), "given"
    if args.cable is None:
        return 1.0, "free space"
    from optmatch.io.catalog import shipped_catalog
    from optmatch.studyfile.shelf import lookup_cable, unknown_cable

    catalog = shipped_catalog()
    name, _ = lookup_cable(args.cable, catalog)
    if name is None:
        raise InputError(f"--cable: {unknown_cable(args.cable, catalog)}")
    cable = catalog[name]
    if abs(cable.z0_ohm - z0) > 1e-9 * z0:
        raise InputError(f"--cable: {name} is a {cable.z0_ohm:g} Ω cable but the system is {z0:g} Ω; the "
                         f"solutions here use lines of the system impedance (give --system {cable.z0_ohm:g} "
                         "or --vf)")
    return cable.vf, f"cable {name}"


def run_spot(args: argparse.Namespace) -> int:
    zl = parse_complex(args.load, "--load")
    f_hz = parse_frequency(args.freq, "--freq")
    z0 = parse_impedance_real(args.system, "--system")
    vf, vf_source = _velocity_factor(args, z0)
    spacing = _wavelengths(args.spacing, "--spacing", f_hz, vf)
    load_line = _wavelengths(args.load_line, "--load-line", f_hz, vf)
    doc = spot_document(zl, f_hz, z0, vf, spacing, load_line)
    doc["velocity_factor_source"] = vf_source
    doc["warnings"] = [FREE_SPACE_WARNING] if vf_source == "free space" else []
    if args.json:
        print(json.dumps(doc, indent=2))
        return 0
    out = console()
    if vf_source == "free space":
        out.print(f"[bold red]warning:[/] [bold]{FREE_SPACE_WARNING}[/]")
    out.print(f"Load {zl.real:g} {'+' if zl.imag >= 0 else '-'} j{abs(zl.imag):g} Ω at {format_hz(f_hz)}, "
              f"system {z0:g} Ω, velocity factor {vf:g} ({vf_source})")
    tab = table("topology", "branch", "element", "end", "Z0 Ω", "λ", "deg", "ns", "mm")
    notes = []
    for topo in doc["topologies"]:
        if topo.get("min_load_line_wavelengths") is not None and not topo["matchable"]:
            notes.append(f"{topo['topology']}: not matchable at this spacing; a load-side line of at least "
                         f"{topo['min_load_line_wavelengths']:.4f} λ ({topo['min_load_line_deg']:.1f}°) makes it so "
                         "(--load-line)")
        elif not topo["solutions"]:
            notes.append(f"{topo['topology']}: {topo['note'] or 'no solution'}")
        if not topo["solutions"]:
            continue
        for sol in topo["solutions"]:
            for j, el in enumerate(sol["elements"]):
                tab.add_row(
                    topo["topology"] if j == 0 else "", str(sol["branch"]) if j == 0 else "",
                    el["role"], el["end"] or "", f"{el['z0_ohm']:.2f}", f"{el['length_wavelengths']:.4f}",
                    f"{el['length_deg']:.1f}", f"{el['length_ns']:.4f}", f"{el['length_m'] * 1e3:.1f}",
                    end_section=j == len(sol["elements"]) - 1,
                )
    out.print(tab)
    for note in notes:
        out.print(note)
    out.print(f"Lengths are from the load outwards; mm uses velocity factor {vf:g} ({vf_source}).")
    return 0
