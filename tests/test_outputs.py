"""Checks of the presentation edge: atomic writes, plots, network export, designs.csv and summary.md.

References: scikit-rf (independent library) for the 2-port cascade and Touchstone read-back;
D. M. Pozar, *Microwave Engineering*, 4th ed., Example 5.2 (recalled from memory) for a known match;
the PNG specification (ISO/IEC 15948) for the file signature; physical identities otherwise.
"""

from __future__ import annotations

import csv
import json
import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
import skrf

from optmatch.domain.design import Design, bare_load, describe, performance
from optmatch.domain.mask import Segment, build_grid
from optmatch.domain.network import Bound, Choice, ElementSpec, Medium, NetworkSpec
from optmatch.domain.problem import Problem
from optmatch.domain.tolerance import Spread
from optmatch.io.atomic import save_figure_atomic, write_bytes_atomic, write_json_atomic, write_text_atomic
from optmatch.outputs.document import ResultsFileError, read_batch_state, read_summary, to_json
from optmatch.outputs.network_export import export_touchstone, matched_input, network_sparams
from optmatch.outputs.plots import Caption, mask_spans, plot_pareto, plot_return_loss, plot_smith
from optmatch.outputs.tables import design_rows, mask_text, summary_markdown, write_designs_csv
from optmatch.running.results import data_is_invented, summary_document
from optmatch.running.search import SearchOutcome
from optmatch.studyfile.loader import SearchSettings, Study

C0 = 299_792_458.0  # m/s
F_REF = 433.92e6
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), section 5.2


# ---------------------------------------------------------------- problem and design builders


def _problem(elements, zload_fn, segments, z_sys=50.0, name="invented test") -> Problem:
    grid = build_grid(segments)
    return Problem(name=name, z_sys=z_sys, grid=grid, zload=zload_fn(grid.freq), network=NetworkSpec(tuple(elements)),
                   f_ref=F_REF)


def _design(problem: Problem, choice: Choice, values: list[float], trial: int = -1) -> Design:
    """A design whose free parameters take ``values`` (in the order of ``network.free``)."""
    u = tuple(fp.bound.to_unit(v) for fp, v in zip(problem.network.free, values, strict=True))
    margin = float(problem.margins(np.array([u]), choice)[0])
    length = float(problem.length_wl(np.array([u]), choice)[0])
    return Design(choice=choice, u=u, margin_db=margin, length_wl=length, trial=trial)


def pozar_problem(segments=None) -> Problem:
    """Single shunt short stub for ZL = 60 − j80 Ω on 50 Ω (Pozar 4th ed., Ex. 5.2)."""
    span = Bound(0.0, 0.5 / F_REF)
    elements = [ElementSpec("line", length=span), ElementSpec("shunt_stub", length=span, end="short")]
    segs = segments or [Segment(0.98 * F_REF, 1.02 * F_REF, 15.0, points=41)]
    return _problem(elements, lambda f: np.full(f.shape, 60 - 80j), segs)


def pozar_design(problem: Problem) -> Design:
    # Pozar, Microwave Engineering, 4th ed., Example 5.2 (recalled from memory): d = 0.110 λ, short stub 0.095 λ
    return _design(problem, Choice((0, 0), (False, True)), [0.110 / F_REF, 0.095 / F_REF])


def mixed_problem() -> tuple[Problem, Design]:
    """Lossy coax, a series open stub, lumped parts and an allowance on a frequency-dependent load."""
    coax = Medium(75.0, vf=0.66, kc=3e-6, kd=2e-11, name="invented 75 ohm coax")
    elements = [
        ElementSpec("line", length=Bound(0.05, 0.6), length_basis="physical", media=(coax,), extra_delay=40e-12),
        ElementSpec("series_stub", length=Bound(0.0, 0.4 / F_REF), end="either", media=(Medium(62.0),)),
        ElementSpec("lumped", connection="shunt", part="c", value=Bound(0.5e-12, 20e-12, log=True)),
        ElementSpec("lumped", connection="series", part="l", value=Bound(1e-9, 120e-9, log=True)),
        ElementSpec("shunt_stub", length=Bound(0.0, 0.5 / F_REF), end="open", media=(Medium(50.0, kc=1e-6),)),
    ]
    segs = [Segment(400e6, 420e6, 10.0, points=21), Segment(440e6, 470e6, 14.0, points=31)]
    problem = _problem(elements, lambda f: 22.0 + 1j * (2 * np.pi * f * 35e-9 - 1 / (2 * np.pi * f * 8e-12)), segs)
    choice = Choice((0, 0, 0, 0, 0), (False, False, False, False, False))
    design = _design(problem, choice, [0.23, 0.17 / F_REF, 3.3e-12, 12e-9, 0.31 / F_REF])
    return problem, design


# ---------------------------------------------------------------- scikit-rf reference


def _media(freq, z_sys, z0, loss_c=0.0, loss_d=0.0, length_m=1.0):
    alpha = (loss_c * np.sqrt(freq) + loss_d * freq) / length_m  # whole-line nepers spread per metre
    gamma = alpha + 1j * 2.0 * np.pi * freq / C0
    return skrf.media.DefinedGammaZ0(skrf.Frequency.from_f(freq, unit="Hz"), z0_port=z_sys, z0=z0, gamma=gamma)


def skrf_network(problem: Problem, design: Design) -> skrf.Network:
    """The design's network as a scikit-rf 2-port, port 1 at the input, built element by element."""
    freq, z = problem.grid.freq, problem.z_sys
    main = _media(freq, z, z)
    params = problem.network.engine_params(design.vector(), design.choice)
    net = None
    for stage, p in zip(problem.network.stages, params, strict=True):
        p = {k: (np.ravel(v)[0] if np.ndim(v) else v) for k, v in p.items()}
        if stage.kind in ("line", "stub"):
            length_m = float(p["delay"]) * C0
            med = _media(freq, z, float(p["z0"]), p.get("loss_c", 0.0), p.get("loss_d", 0.0), max(length_m, 1e-300))
            if stage.kind == "line":
                el = med.line(length_m, unit="m")
            else:
                one = med.delay_short(length_m, unit="m") if p["short"] else med.delay_open(length_m, unit="m")
                el = main.shunt(one) if stage.connection == "shunt" else main.resistor(one.z[:, 0, 0])
        else:
            maker = {("series", "r"): main.resistor, ("series", "l"): main.inductor,
                     ("series", "c"): main.capacitor, ("shunt", "r"): main.shunt_resistor,
                     ("shunt", "l"): main.shunt_inductor, ("shunt", "c"): main.shunt_capacitor}
            el = maker[(stage.connection, stage.part)](float(p["value"]))
        net = el if net is None else el ** net  # each new element sits on the input side
    return net


CASES = {"pozar": lambda: (lambda p: (p, pozar_design(p)))(pozar_problem()), "mixed": mixed_problem}


@pytest.mark.parametrize("case", sorted(CASES))
def test_network_sparams_match_skrf_cascade(case):
    problem, design = CASES[case]()
    np.testing.assert_allclose(  # scikit-rf cascade of the same elements as an independent reference
        network_sparams(problem, design), skrf_network(problem, design).s, rtol=0, atol=1e-9
    )


@pytest.mark.parametrize("case", sorted(CASES))
def test_terminated_network_reproduces_input_reflection(case):
    problem, design = CASES[case]()
    s = network_sparams(problem, design)
    gl = (problem.zload - problem.z_sys) / (problem.zload + problem.z_sys)
    gin = s[:, 0, 0] + s[:, 0, 1] * s[:, 1, 0] * gl / (1.0 - s[:, 1, 1] * gl)
    # physical identity: a 2-port terminated in Γ_L presents S11 + S12·S21·Γ_L / (1 − S22·Γ_L)
    np.testing.assert_allclose(gin, performance(problem, design).gamma, rtol=0, atol=1e-9)
    np.testing.assert_allclose(gin, matched_input(problem, design), rtol=0, atol=1e-9)


def test_lossless_network_is_unitary_and_lossy_one_is_not():
    problem = pozar_problem()
    s = network_sparams(problem, pozar_design(problem))
    eye = np.broadcast_to(np.eye(2), s.shape)
    # physical identity: a lossless network has a unitary scattering matrix, S^H S = I
    np.testing.assert_allclose(np.conj(np.swapaxes(s, 1, 2)) @ s, eye, rtol=0, atol=1e-12)
    problem, design = mixed_problem()
    s = network_sparams(problem, design)
    power_out = np.abs(s[:, 0, 0]) ** 2 + np.abs(s[:, 1, 0]) ** 2
    assert np.all(power_out < 1.0 - 1e-6)  # physical identity: a lossy passive network absorbs power


def test_pozar_design_is_matched_at_design_frequency():
    problem = pozar_problem([Segment(F_REF, F_REF, 20.0)])
    gamma = matched_input(problem, pozar_design(problem))
    # Pozar 4th ed., Example 5.2 (recalled from memory): the three-figure lengths leave |Γ| small (< 0.02)
    assert abs(gamma[0]) < 0.02


def test_touchstone_export_reads_back_in_skrf(tmp_path):
    problem, design = mixed_problem()
    s2p, s1p = export_touchstone(problem, design, tmp_path / "out", rank=2)
    net2, net1 = skrf.Network(str(s2p)), skrf.Network(str(s1p))
    assert (net2.nports, net1.nports) == (2, 1)
    np.testing.assert_allclose(net2.f, problem.grid.freq, rtol=1e-12)
    # scikit-rf's reader and cascade as the independent reference for the written 2-port
    np.testing.assert_allclose(net2.s, skrf_network(problem, design).s, rtol=0, atol=1e-8)
    np.testing.assert_allclose(np.real(net2.z0), problem.z_sys)
    terminated = skrf_network(problem, design) ** _media(problem.grid.freq, 50.0, 50.0).load(
        (problem.zload - 50.0) / (problem.zload + 50.0))
    np.testing.assert_allclose(net1.s[:, 0, 0], terminated.s[:, 0, 0], rtol=0, atol=1e-8)
    header = s2p.read_text().lower()
    for phrase in ("invented test", "rank 2", "port 1 faces the source", "port 2 faces the load", "50 ohm"):
        assert phrase in header


# ---------------------------------------------------------------- atomic writes


class _FailingFigure:
    def savefig(self, fh, format=None, **kwargs):
        fh.write(b"partial")
        raise RuntimeError("disk trouble")


def test_failed_writes_leave_the_old_file_intact(tmp_path):
    # common practice, no source: write a temp file, then rename over the target (POSIX rename is atomic)
    target = tmp_path / "result.png"
    write_bytes_atomic(target, b"old contents")
    with pytest.raises(RuntimeError):
        save_figure_atomic(_FailingFigure(), target)
    with pytest.raises(TypeError):
        write_bytes_atomic(target, "not bytes")  # type: ignore[arg-type]
    with pytest.raises(TypeError):
        write_json_atomic(target, {"x": {1, 2}})  # a set has no JSON form
    assert target.read_bytes() == b"old contents"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["result.png"]  # no temp files left behind


def test_text_and_json_round_trip(tmp_path):
    text = "Γ = 0.1 ∠ 30°\nline two\n"
    assert write_text_atomic(tmp_path / "a.txt", text).read_text(encoding="utf-8") == text
    obj = {"margin_db": np.float64(2.5), "rl": np.array([10.0, np.inf]), "n": np.int64(3)}
    back = json.loads(write_json_atomic(tmp_path / "a.json", obj).read_text(encoding="utf-8"))
    # RFC 8259 has no infinity: a perfect match is written as null
    assert back == {"margin_db": 2.5, "rl": [10.0, None], "n": 3}


# ---------------------------------------------------------------- plots


def _is_png(path) -> bool:
    data = path.read_bytes()
    return data[:8] == PNG_SIGNATURE and len(data) > 20_000


def _png_size(path) -> tuple[int, int]:
    data = path.read_bytes()
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")  # IHDR width, height


def _ranked(problem: Problem, design: Design) -> list[tuple[str, object]]:
    other = Design(design.choice, tuple(min(1.0, x * 1.04) for x in design.u), 0.0, 0.0)
    return [("rank 1", performance(problem, design)), ("rank 2", performance(problem, other))]


def test_mask_spans_recover_segments():
    segs = [Segment(400e6, 420e6, 10.0, points=21), Segment(440e6, 470e6, 14.0, points=31)]
    spans = mask_spans(build_grid(segs))
    # identity: the spans recovered from the grid are the segments it was built from
    assert spans == [(s.f_lo, s.f_hi, s.min_rl_db) for s in segs]


def test_plots_are_written_as_png(tmp_path):
    problem, design = mixed_problem()
    perfs = _ranked(problem, design)
    rl = plot_return_loss(perfs, problem.grid, tmp_path / "return_loss.png")
    sm = plot_smith(perfs, tmp_path / "smith.png", problem.z_sys, min_rl_db=float(problem.grid.min_rl_db.max()),
                    load=bare_load(problem), caption=Caption("invented test", True))
    pts = [(-3.0 + 0.2 * i - 0.004 * i * i, 0.3 + 0.01 * i) for i in range(40)]  # (margin_db, length_wl)
    pa = plot_pareto(pts, pts[::5], tmp_path / "pareto.png")
    for path in (rl, sm, pa):
        assert _is_png(path)  # PNG specification, section 5.2: the eight-byte signature
    assert _png_size(rl) == _png_size(pa) == (960, 600)  # 8 × 5 in at 120 dpi
    assert _png_size(sm) == (1320, 720)  # 11 × 6 in at 120 dpi: the whole chart and the enlarged centre


# ---------------------------------------------------------------- the summary document, designs.csv and summary.md


def _study(problem: Problem, description: str = "Our own test scenario.", drive_w=None) -> Study:
    return Study(path=Path("invented_test.yaml"), problem=problem, search=SearchSettings(keep=5),
                 raw={"load": {"impedance": "60-j80"}}, digest="0" * 64, description=description, drive_w=drive_w,
                 spread=Spread(samples=64))


def _outcome(designs: list[Design]) -> SearchOutcome:
    return SearchOutcome(designs=designs, pareto=[], all_points=[], trials_complete=len(designs), evaluations=10,
                         elapsed_s=1.0, trial_time_s=1.0, seeds=[], stopped_early=False)


def test_design_rows_and_csv_round_trip(tmp_path):
    problem, design = mixed_problem()
    second = _design(problem, design.choice, [fp.bound.from_unit(0.5) for fp in problem.network.free])
    doc = summary_document(_study(problem), _outcome([design, second]))
    rows = design_rows(doc.designs)
    path = write_designs_csv(rows, tmp_path / "designs.csv")
    with path.open(newline="", encoding="utf-8") as fh:
        back = list(csv.DictReader(fh))
    assert len(back) == 2
    assert [float(r["margin_db"]) for r in back] == [design.margin_db, second.margin_db]  # exact round trip
    for row, d in zip(back, (design, second), strict=True):
        gamma = skrf_network(problem, d) ** _media(problem.grid.freq, 50.0, 50.0).load(
            (problem.zload - 50.0) / (problem.zload + 50.0))
        f_worst = float(row["worst_freq_hz"])
        k = int(np.argmin(np.abs(problem.grid.freq - f_worst)))
        # scikit-rf as an independent reference for the worst return loss reported
        assert float(row["worst_rl_db"]) == pytest.approx(-20 * math.log10(abs(gamma.s[k, 0, 0])), abs=1e-8)
        # definition: 360° per wavelength, λ = c / (vf · f)
        tau = float(row["e0_length_mm"]) / 1e3 / (0.66 * C0) + 40e-12
        assert float(row["e0_length_deg"]) == pytest.approx(360.0 * tau * F_REF, rel=1e-12)
    assert back[0]["e2_value_unit"] == "F" and float(back[0]["e2_value"]) == pytest.approx(3.3e-12, rel=1e-12)


def test_summary_json_reads_back_to_the_same_document(tmp_path):
    problem, design = mixed_problem()
    doc = summary_document(_study(problem), _outcome([design]))
    path = write_json_atomic(tmp_path / "summary.json", to_json(doc))
    assert read_summary(path) == doc  # every field, nested records included, survives JSON
    # identity: a perfect match has an infinite return loss, written as null and read back as inf
    perfect = replace(doc, designs=(replace(doc.designs[0], worst_return_loss_db=math.inf),))
    text = write_json_atomic(tmp_path / "perfect.json", to_json(perfect)).read_text()
    assert '"worst_return_loss_db": null' in text
    assert read_summary(tmp_path / "perfect.json").designs[0].worst_return_loss_db == math.inf


@pytest.mark.parametrize("damage, key", [
    (lambda d: d["designs"][0].__setitem__("margin_db", "abc"), "designs[0].margin_db: expected a number"),
    (lambda d: d.pop("verdict"), "verdict: required key is missing"),
    (lambda d: d.__setitem__("designs", "none"), "designs: expected a list"),
    (lambda d: d["load"].__setitem__("points", [{"label": 1}]), "load.points[0].label: expected text"),
    (lambda d: d.__setitem__("format", 1), "format: 1 is not the layout"),
])
def test_summary_of_the_wrong_shape_is_one_line_naming_the_key(tmp_path, damage, key):
    problem = pozar_problem()
    doc = json.loads(json.dumps(to_json(summary_document(_study(problem), _outcome([pozar_design(problem)]))),
                                default=str))
    damage(doc)
    path = tmp_path / "summary.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(ResultsFileError) as err:
        read_summary(path)
    message = str(err.value)
    assert message.startswith(f"{path}: {key}") and "\n" not in message


@pytest.mark.parametrize("text, key", [
    ("[1, 2]", "(top level): expected keys and values"),
    ("{", "not JSON"),
    ('{"studies": "x"}', "studies: expected a list"),
    ('{"studies": [{"name": "../outside", "status": "done"}]}', "studies[0].name: '../outside' is not a study folder"),
    ('{"studies": [{"status": "done"}]}', "studies[0].name: required key is missing"),
])
def test_batch_state_of_the_wrong_shape_is_one_line_naming_the_key(tmp_path, text, key):
    path = tmp_path / "batch.json"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ResultsFileError) as err:
        read_batch_state(path)
    assert str(err.value).startswith(f"{path}: {key}")


def test_summary_markdown_verdict_and_tables():
    problem = pozar_problem()
    best = pozar_design(problem)
    second = _design(problem, best.choice, [0.259 / F_REF, 0.405 / F_REF])  # Pozar Ex. 5.2, second solution
    text = summary_markdown(summary_document(_study(problem), _outcome([best, second])))
    # Pozar 4th ed., Example 5.2 (recalled from memory): the shorter solution is the broader one and
    # meets 15 dB over ±2 % (common practice, no source); the verdict follows the engine's margin
    assert best.margin_db > 0
    assert f"**Verdict:** PASS: the best design meets the mask by {best.margin_db:+.2f} dB" in text
    ranked = text.split("## Ranked designs")[1].split("##")[0]
    rows = [ln for ln in ranked.splitlines() if ln.startswith("| ") and ln.split("|")[1].strip().isdigit()]
    assert len(rows) == 2  # one row per design, each naming Z0 so that designs read apart
    assert all("50 Ω" in r for r in rows)
    assert "## Cautions" in text and "high RF voltage" in text and "licensed practice" in text
    assert "(return_loss.png)" in text and "(smith.png)" in text and "(pareto.png)" not in text

    strict = pozar_problem([Segment(0.8 * F_REF, 1.2 * F_REF, 30.0)])
    failing = pozar_design(strict)
    text = summary_markdown(summary_document(_study(strict), _outcome([failing])))
    # a single stub cannot hold 30 dB over ±20 %
    assert failing.margin_db < 0 and "**Verdict:** FAIL: the best design misses the mask" in text


def test_build_sheet_lists_pieces_load_outwards_in_mm():
    problem = pozar_problem()
    design = pozar_design(problem)
    text = summary_markdown(summary_document(_study(problem), _outcome([design])))
    reports = describe(problem, design)
    section = text.split("## Build sheet")[1].split("##")[0]
    rows = [ln for ln in section.splitlines() if ln.startswith("| ") and ln.split("|")[1].strip().isdigit()]
    assert [int(r.split("|")[1]) for r in rows] == [r.index + 1 for r in reports]  # numbered from 1, as the cut list
    # Pozar 4th ed., Example 5.2 (recalled from memory): 0.110 λ = 39.6°, stub 0.095 λ = 34.2°
    assert "| 39.6 |" in rows[0] and "| 34.2 |" in rows[1] and "| short |" in rows[1]
    # definition: a wavelength in air at 433.92 MHz is c / f = 690.9 mm; 0.110 λ of it is 76.0 mm
    assert f"| {0.110 * C0 / F_REF * 1e3:.1f} |" in rows[0]
    assert "No connector allowances are given" in section
    assert "short its far end" in section and "At the source: a tee" in section


def test_load_block_and_mask_show_return_loss_and_vswr():
    problem = pozar_problem()
    doc = summary_document(_study(problem), _outcome([pozar_design(problem)]))
    gamma = abs((60 - 80j - 50) / (60 - 80j + 50))
    for p in doc.load.points:
        assert (p.r_ohm, p.x_ohm) == (60.0, -80.0)
        # definitions: RL = −20·log10|Γ|, VSWR = (1 + |Γ|) / (1 − |Γ|)
        assert p.return_loss_db == pytest.approx(-20 * math.log10(gamma), rel=1e-12)
        assert p.vswr == pytest.approx((1 + gamma) / (1 - gamma), rel=1e-12)
    assert [p.label for p in doc.load.points] == ["low edge", "centre", "high edge"]
    assert doc.load.unmatched_margin_db == pytest.approx(-20 * math.log10(gamma) - 15.0, rel=1e-12)
    assert not doc.load.meets_mask and not doc.no_network_needed
    # 15 dB return loss is |Γ| = 0.1778, VSWR 1.433 (the same definitions)
    assert doc.mask[0].max_vswr == pytest.approx((1 + 10 ** -0.75) / (1 - 10 ** -0.75), rel=1e-12)
    text = summary_markdown(doc)
    assert "| 15 | 1.43 |" in text and "60.00 − j80.00" in text and "Unmatched margin" in text
    assert mask_text(doc.mask) == "425.242–442.598 MHz: return loss ≥ 15 dB (VSWR ≤ 1.43)"


def test_invented_rule_reaches_plot_captions_and_touchstone(tmp_path):
    problem, design = mixed_problem()
    assert summary_document(_study(problem, "Our INVENTED load."), _outcome([design])).invented
    assert not summary_document(_study(problem, "A measured load."), _outcome([design])).invented
    ts = tmp_path / "load.s1p"
    ts.write_text("! made up for this test: invented\n# MHz S RI R 50\n400 0.1 0\n500 0.1 0\n", encoding="utf-8")
    study = replace(_study(problem, "A load."), path=tmp_path / "s.yaml", raw={"load": {"touchstone": "load.s1p"}})
    assert data_is_invented(study)
    s2p, s1p = export_touchstone(problem, design, tmp_path / "out", invented=True)
    for path in (s2p, s1p):
        head = path.read_text()
        assert "optmatch study: invented test" in head and "INVENTED data" in head
    assert Caption("x", True).text().endswith("INVENTED data (the study says so): not a measurement")


def test_results_evaluate_each_design_once(tmp_path, monkeypatch):
    import optmatch.running.build as build_module
    import optmatch.running.results as results_module

    problem, design = mixed_problem()
    second = _design(problem, design.choice, [fp.bound.from_unit(0.5) for fp in problem.network.free])
    calls = []

    def counted(p, d):
        calls.append(d)
        return performance(p, d)

    monkeypatch.setattr(results_module, "worst_and_each", lambda p, d: (counted(p, d), []))  # one load
    monkeypatch.setattr(build_module, "performances", lambda p, d: [counted(p, d)])
    folder, doc = results_module.write_results(_study(problem), _outcome([design, second]), tmp_path)
    # one band evaluation per design feeds the document, the plots, the build sheet and the exports
    assert sorted(map(id, calls)) == sorted([id(design), id(second)])
    assert (folder / "summary.json").exists() and len(doc.designs) == 2
