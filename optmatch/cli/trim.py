"""``optmatch trim RESULTS --measured FILE.s1p``: fit the as-built network to a bench measurement and
say what to trim.

Exit codes: 0 the trims (or none) bring the build onto the mask; 1 no trim can (a recut is proposed);
2 bad input, or a measurement the fitted model does not explain (one line, nothing written).
"""

from __future__ import annotations

import argparse
import json
import re
from collections.abc import Callable
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from optmatch.bench.asbuilt import BuildModel, measured_margin_db
from optmatch.bench.fit import MIN_FIT_POINTS, fit_build
from optmatch.bench.trims import TrimRules, plan_trims
from optmatch.cli.terminal import console, table
from optmatch.domain.design import Design
from optmatch.domain.loads import TabulatedLoad
from optmatch.errors import OptmatchError, did_you_mean
from optmatch.io.touchstone import read_one_port
from optmatch.outputs.trim_report import (
    TRIM_MD,
    TRIM_PNG,
    json_ready,
    ours,
    step_text,
    trim_document,
    verdict_text,
    write_trim_files,
)
from optmatch.running.reload import design_of, read_folder, reload_study
from optmatch.studyfile.loader import Study

EXIT_NO_TRIM_RESTORES = 1
MAX_MEASURED_BYTES = 64 * 2**20  # a bench sweep is kilobytes; refuse anything absurd before parsing it
MAX_SUMMARY_BYTES = 256 * 2**20


class TrimInputError(OptmatchError):
    """Input to `optmatch trim` that cannot be used (one line)."""


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("trim", help="fit a measured build of a design and say what to trim",
                       description="Fit the as-built network (length error per piece, VF and Z0 per cable) to a "
                                   "bench measurement of the input reflection of network plus load, and say "
                                   "which pieces to trim, by how much and in what order.")
    p.add_argument("results", type=Path, help="the study's results folder (holding summary.json)")
    p.add_argument("--measured", type=Path, required=True, help="1-port Touchstone file (.s1p) measured at the "
                   "network's input with the load connected")
    p.add_argument("--design", type=int, default=1, metavar="RANK", help="rank of the design you built (default 1)")
    p.add_argument("--load", type=Path, default=None, help="a fresh 1-port measurement of the bare load, used in "
                   "place of the study's load")
    p.add_argument("--load-name", default=None, metavar="NAME", help="with a study of several loads: the one the "
                   "build was measured with")
    p.add_argument("--trim-short-stubs", action="store_true", help="also shorten short stubs (at the shorted end)")
    p.add_argument("--trim-lines", action="store_true", help="also shorten lines")
    p.add_argument("--json", action="store_true", help="print one JSON document instead of the tables")
    p.set_defaults(handler=run_trim)


# ------------------------------------------------------------------ inputs


@dataclass(frozen=True)
class Built:
    """What the results folder says was built: the reloaded ``study`` and its design of ``rank``."""

    study: Study
    design: Design
    rank: int
    own_files: frozenset[str]


def read_results(folder: Path, rank: int) -> Built:
    """The study and design ``rank`` of a results folder, through its typed summary document
    (``running/reload.py``): the study file is loaded again and must still have the same digest."""
    doc = read_folder(folder)
    summary = folder / "summary.json"
    designs = doc.designs
    if not 1 <= rank <= len(designs):
        raise TrimInputError(f"{summary}: --design {rank}: no such design (the study kept "
                             f"{len(designs)}: 1 to {len(designs)})" if designs
                             else f"{summary}: the study found no design")
    study = reload_study(folder, doc)
    sub, design = design_of(study, designs[rank - 1], f"{summary}: designs[{rank - 1}]")
    return Built(sub, design, rank, frozenset(str(k) for k in doc.files))


def study_load(study: Study, name: str | None = None) -> tuple[Callable[[np.ndarray], np.ndarray], tuple[float, float]]:
    """The study's load (with several, the one called ``name``) as a function of frequency (Hz → Ω)
    and the range where it is known (Hz)."""
    src = study.loads[pick_load(study, name)]
    return src.fn, src.range_hz


def pick_load(study: Study, name: str | None) -> int:
    """The index of the study's load the build was measured with: ``name`` among several loads."""
    names = [src.name for src in study.loads]
    if len(names) == 1:
        if name is not None and name != names[0]:
            raise TrimInputError(f"--load-name {name}: the study has one load ({names[0]}); leave --load-name out")
        return 0
    shown = ", ".join(names[:8]) + (" ..." if len(names) > 8 else "")
    if name is None:
        raise TrimInputError(f"{study.path}: the study has {len(names)} loads ({shown}); say which one the build was "
                             "measured with (--load-name NAME), or give a measurement of the bare load (--load FILE)")
    if name not in names:
        raise TrimInputError(f"--load-name {name}: no such load in {study.path}{did_you_mean(name, names, quote=True)} "
                             f"(the loads: {shown})")
    return names.index(name)


def read_measurement(path: Path, what: str) -> TabulatedLoad:
    """A 1-port Touchstone file; a file of more ports or an absurd size is refused."""
    m = re.fullmatch(r"\.s(\d+)p", path.suffix.lower())
    if m and m.group(1) != "1":
        raise TrimInputError(f"{path}: a {m.group(1)}-port file; {what} must be a 1-port reflection measurement (.s1p)")
    if path.is_file() and path.stat().st_size > MAX_MEASURED_BYTES:
        raise TrimInputError(f"{path}: larger than {MAX_MEASURED_BYTES // 2**20} MiB; not a bench sweep")
    return read_one_port(path)


def _mhz(f: float) -> str:
    return f"{f / 1e6:.6g} MHz"


def _covers(tab: TabulatedLoad, lo: float, hi: float) -> bool:
    a, b = tab.range_hz
    slack = 1e-9 * hi
    return a <= lo + slack and b >= hi - slack


def gamma_against(tab: TabulatedLoad, freq: np.ndarray, z_sys: float) -> np.ndarray:
    """The measured reflection at ``freq`` re-referred from the file's impedance to ``z_sys`` (Ω)."""
    g = tab.gamma_on(freq)
    zr = tab.z_ref_ohm
    return ((1 + g) * zr - (1 - g) * z_sys) / ((1 + g) * zr + (1 - g) * z_sys)


# ------------------------------------------------------------------ command


def run_trim(args: argparse.Namespace) -> int:
    folder: Path = args.results
    built = read_results(folder, args.design)
    study, problem = built.study, built.study.problem
    for name in (TRIM_MD, TRIM_PNG):  # check before any work: never replace a file we did not write
        target = folder / name
        if name in built.own_files:
            raise TrimInputError(f"{target}: belongs to the study's results; optmatch trim will not replace it")
        if target.exists() and not ours(target):
            raise TrimInputError(f"{target}: exists and was not written by optmatch trim; move it away first")

    lo, hi = float(problem.grid.freq[0]), float(problem.grid.freq[-1])
    measured = read_measurement(args.measured, "--measured")
    if not _covers(measured, lo, hi):
        a, b = measured.range_hz
        raise TrimInputError(f"{args.measured}: covers {_mhz(a)} to {_mhz(b)}, "
                             f"not the mask band {_mhz(lo)} to {_mhz(hi)}")
    load_fn: Callable[[np.ndarray], np.ndarray]
    if args.load is not None:
        if args.load_name is not None:
            raise TrimInputError("--load-name and --load: give one of the two (--load replaces the study's load)")
        fresh = read_measurement(args.load, "--load")
        if not _covers(fresh, lo, hi):
            a, b = fresh.range_hz
            raise TrimInputError(f"{args.load}: covers {_mhz(a)} to {_mhz(b)}, "
                                 f"not the mask band {_mhz(lo)} to {_mhz(hi)}")
        load_fn, load_range = fresh, fresh.range_hz
        problem = problem.single(0) if problem.several else problem
        problem = replace(problem, zload=fresh(problem.grid.freq))
    else:
        k = pick_load(study, args.load_name)
        load_fn, load_range = study_load(study, args.load_name)
        problem = problem.single(k) if problem.several else problem
    f = measured.freq_hz
    inside = (f >= load_range[0] * (1 - 1e-12)) & (f <= load_range[1] * (1 + 1e-12))
    f = f[inside]
    if f.size < MIN_FIT_POINTS:
        raise TrimInputError(f"{args.measured}: only {f.size} measured points where the load is known "
                             f"({_mhz(load_range[0])} to {_mhz(load_range[1])}); at least {MIN_FIT_POINTS} are needed")
    gamma = gamma_against(measured, f, problem.z_sys)
    model = BuildModel.of(problem, built.design)
    fit = fit_build(model, f, gamma, load_fn(f))
    rules = TrimRules(short_stubs=args.trim_short_stubs, lines=args.trim_lines)
    if not fit.explained:
        raise TrimInputError(f"{args.measured}: {verdict_text(fit, args.load is not None)}")
    plan = plan_trims(fit, rules)
    measured_margin = measured_margin_db(gamma_against(measured, problem.grid.freq, problem.z_sys), problem)
    doc = trim_document(fit=fit, plan=plan, rules=rules, measured_margin_db=measured_margin, study=problem.name,
                        results=str(folder), rank=built.rank, measured=str(args.measured),
                        load=str(args.load) if args.load is not None else None, grid=problem.grid,
                        design_margin_db=built.design.margin_db)
    files = write_trim_files(folder, doc, fit, plan, problem.grid)
    doc["files"] = [str(p) for p in files]
    if args.json:
        print(json.dumps(json_ready(doc), indent=2, ensure_ascii=False, allow_nan=False))
    else:
        print_trim(doc)
    return 0 if plan.restores else EXIT_NO_TRIM_RESTORES


def _signed(v: float) -> str:
    return f"{v:+.2f}"


def print_trim(doc: dict) -> None:
    """The terminal view of a trim document."""
    out = console()
    fit, m = doc["fit"], doc["margin_db"]
    f0, f1 = (v / 1e6 for v in doc["fit_band_hz"])
    out.print(f"{doc['study']}, design #{doc['design_rank']}: fit of {doc['measured']} "
              f"({doc['fit_points']} points, {f0:.3f}–{f1:.3f} MHz"
              f"{', load ' + doc['load'] if doc['load'] else ''})")
    out.print(f"verdict: {fit['verdict_text']}")
    tab = table("#", "part", "cable", "design mm", "fitted error mm", "as built mm", "trim mm", "new mm", "step",
                title="pieces, load outwards")
    for p in fit["pieces"]:
        trim = f"{p['trim_mm']:.1f}" if p["trim_mm"] else ("0" if p["may_trim"] else "–")
        tab.add_row(str(p["element"]), p["part"], p["cable"], f"{p['design_mm']:.1f}",
                    f"{p['error_mm']:+.1f} ± {p['sigma_mm']:.1f}" + (" (bound)" if p["at_bound"] else ""),
                    f"{p['built_mm']:.1f}", trim, f"{p['new_mm']:.1f}", str(p["step"] or ""))
    out.print(tab)
    ctab = table("cable", "VF design", "VF scale %", "Z0 scale %", title="cables")
    for c in fit["cables"]:
        vf = f"{c['vf_scale_pct']:+.2f} ± {c['vf_sigma_pct']:.2f}" if c["vf_scale_pct"] is not None else "one piece"
        ctab.add_row(c["cable"], f"{c['vf_design']:.3g}", vf, f"{c['z0_scale_pct']:+.2f} ± {c['z0_sigma_pct']:.2f}")
    out.print(ctab)
    out.print(f"margin: designed {_signed(m['design'])} dB, measured {_signed(m['measured'])} dB, fitted "
              f"{_signed(m['fitted'])} dB; after the trims {_signed(m['after_trims'])} dB "
              f"(± {m['after_trims_sigma']:.2f})")
    if doc["steps"]:
        out.print("Trim one at a time, largest effect first, and measure again after each:")
        for s in doc["steps"]:
            out.print(f"  {s['step']}. {step_text(s, _signed)}")
    elif doc["restores"]:
        out.print("Nothing to trim: the build meets the mask as it is.")
    if not doc["restores"]:
        r = doc["recut"]
        out.print("[bold red]No trim brings the build onto the mask.[/]")
        if r is not None:
            verb = "restores the mask" if r["restores"] else "comes closest"
            extra = "; " + "; ".join(f"then element {t['element']} {t['trim_mm']:.1f} mm off" for t in r["trims"]) \
                if r["trims"] else ""
            out.print(f"Recut element {r['element']} ({r['part']}, {r['cable']}) to {r['length_mm']:.1f} mm{extra}: "
                      f"it {verb} (predicted {_signed(r['margin_db'])} ± {r['margin_sigma_db']:.2f} dB)")
    out.print(f"written: {', '.join(doc['files'])}")
    out.print(f"[bold]caution:[/] {doc['caution']}")
