"""``optmatch cables``: list the cable catalog (shipped, extended by the user's own files)."""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from optmatch.cli.terminal import console, table
from optmatch.io.catalog import load_catalog
from optmatch.units import parse_frequency


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("cables", help="list the cable catalog",
                       description="List the cable types optmatch knows: impedance, velocity factor, loss "
                                   "and ratings. Figures are typical of each class; check your cable's sheet.")
    p.add_argument("--catalog", type=Path, action="append", default=[],
                   help="your own catalog file (YAML, same layout); entries of the same name replace "
                        "the shipped ones; may be given more than once")
    p.add_argument("--freq", default="435MHz", help="frequency for the loss and power columns (default 435MHz)")
    p.add_argument("--json", action="store_true", help="print JSON instead of a table")
    p.set_defaults(handler=run_cables)


def run_cables(args: argparse.Namespace) -> int:
    catalog = load_catalog(*args.catalog)
    f = parse_frequency(args.freq, "--freq")
    if args.json:
        doc = []
        for c in catalog.values():
            kc, kd = c.loss_coefficients
            doc.append({
                "name": c.name, "description": c.description, "z0_ohm": c.z0_ohm,
                "z0_tolerance_ohm": c.z0_tolerance_ohm, "vf": c.vf, "vf_tolerance": c.vf_tolerance,
                "attenuation_points": [{"freq_hz": pf, "db_per_100m": pa} for pf, pa in c.loss_points],
                "loss_kc_db_per_100m_per_sqrt_hz": kc, "loss_kd_db_per_100m_per_hz": kd,
                "max_voltage_peak_v": c.max_voltage_v, "max_power_w": c.max_power_w,
                "power_ref_hz": c.power_ref_hz, "freq_hz": f,
                "attenuation_db_per_100m_at_freq": float(c.attenuation_db_per_100m(f)),
                "power_rating_w_at_freq": float(c.power_rating_w(f)), "source": c.source,
            })
        print(json.dumps(doc, indent=2))
        return 0
    mhz = f / 1e6
    tab = table("cable", "description", "Z0 Ω", "VF", f"loss dB/100m @{mhz:g} MHz",
                "max V peak", f"max W @{mhz:g} MHz", title="Cable catalog (typical figures of each class)")
    for c in catalog.values():
        tab.add_row(c.name, c.description, f"{c.z0_ohm:g} ± {c.z0_tolerance_ohm:g}",
                    f"{c.vf:.2f} ± {c.vf_tolerance:.2f}", f"{float(c.attenuation_db_per_100m(f)):.1f}",
                    f"{c.max_voltage_v:.0f}", f"{float(c.power_rating_w(f)):.0f}")
    out = console()
    out.print(tab)
    sources = sorted({c.source for c in catalog.values() if c.source})
    out.print("Sources: " + "; ".join(sources))
    out.print("Power ratings are for a matched line and fall as 1/attenuation with frequency; standing "
              "waves raise the local heating and voltage. Check the maker's sheet of the cable you have.")
    return 0
