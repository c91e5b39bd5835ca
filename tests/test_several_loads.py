"""Studies over several loads: `loads:` in the study file, the worst-margin and share objectives,
per-load results in the summary document and every writer, the yield over builds × loads, the
ceiling over the loads, and bad input.

Checks against outside references: the quarter-wave transformer identity Zin = Z0²/ZL (a λ/4
lossless line inverts the load; D. M. Pozar, Microwave Engineering, 4th ed., sec. 2.5, recalled
from memory), scikit-rf cascades (`skrf.media.DefinedGammaZ0`) as the independent library for the
per-load margins, and the Bode–Fano parallel R–C limit (Pozar, 4th ed., sec. 5.9, recalled from
memory) for the ceiling.  Load values and masks are our own.
"""

from __future__ import annotations

import json
import math
import re
import textwrap
from pathlib import Path

import numpy as np
import pytest
import skrf

from optmatch.cli.main import main
from optmatch.domain.design import Design
from optmatch.domain.feasibility import flat_ceiling_db
from optmatch.domain.tolerance import Spread, draw_errors, monte_carlo, yield_scores
from optmatch.outputs.document import read_summary
from optmatch.running.pipeline import run_study
from optmatch.running.search import study_seeds
from optmatch.studyfile import limits
from optmatch.studyfile.loader import StudyFileError, load_study
from optmatch.units import C0

ROOT = Path(__file__).resolve().parents[1]
F0 = 1e9
MASK = "{segments: [{from: 980MHz, to: 1020MHz, return_loss: 20}], points: 21}"
# A single line with free Z0 and free length (our own network).  At F0 a quarter-wave line of Z0
# turns a resistive load R into Z0²/R (quarter-wave identity).
LINE = "{elements: [{line: {length: {min: 10deg, max: 170deg}, z0: {min: 20, max: 150}}}]}"


def write(tmp_path: Path, text: str, name: str = "study.yaml") -> Path:
    path = tmp_path / name
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def touchstone(path: Path, freq: np.ndarray, z: np.ndarray, note: str = "made up for this test") -> Path:
    """A 1-port file of impedances ``z`` (Ω) at ``freq`` (Hz), written by scikit-rf."""
    gamma = (z - 50) / (z + 50)
    ntw = skrf.Network(frequency=skrf.Frequency.from_f(freq, unit="Hz"), s=gamma.reshape(-1, 1, 1), z0=50)
    ntw.write_touchstone(str(path.with_suffix("")), skrf_comment=False)
    path.write_text(f"! {note}\n" + path.read_text())
    return path


def skrf_margin(freq: np.ndarray, zload: np.ndarray, z0: float, delay_s: float, min_rl_db: float) -> float:
    """Margin (dB) of one series line (Z0, delay) on ``zload``, cascaded by scikit-rf (lossless TEM
    line of velocity factor 1, length delay · c)."""
    f = skrf.Frequency.from_f(freq, unit="Hz")
    media = skrf.media.DefinedGammaZ0(f, z0_port=50, z0=z0, gamma=1j * 2 * np.pi * freq / C0)
    load = skrf.Network(frequency=f, s=((zload - 50) / (zload + 50)).reshape(-1, 1, 1), z0=50)
    s11 = (media.line(delay_s * C0, unit="m") ** load).s[:, 0, 0]
    return float(np.min(-20 * np.log10(np.abs(s11)) - min_rl_db))


# ------------------------------------------------------------------ a design that serves both loads


def test_two_loads_a_design_passes_both_and_per_load_margins_agree(tmp_path):
    # Constructed so: loads of 30 Ω and 33 Ω.  The quarter-wave line of Z0 = √(50 · 31.5) = 39.7 Ω
    # turns them into 52.5 Ω and 47.7 Ω at F0 (|Γ| 0.024 and 0.023, over 32 dB), so a design that
    # meets 20 dB on both over ±2 % exists; the search must find one.
    path = write(tmp_path, f"""\
        name: two-loads
        loads:
          - {{name: a, impedance: 30}}
          - {{name: b, impedance: 33}}
        mask: {MASK}
        network: {LINE}
        search: {{trials: 4, seed: 1, population: 24, generations: 20}}
        tolerance: {{samples: 50}}
        """)
    study = load_study(path)
    assert study.problem.names == ("a", "b") and study.problem.zload.shape == (2, 21)
    folder, doc = run_study(study, tmp_path / "results")
    best = doc.designs[0]
    assert best.verdict == "PASS" and best.loads_met == 2 and best.share == 1.0
    assert [lm.load for lm in best.load_margins] == ["a", "b"]
    assert all(lm.margin_db > 0 for lm in best.load_margins)
    assert best.margin_db == pytest.approx(min(lm.margin_db for lm in best.load_margins), abs=1e-9)

    z0 = best.elements[0].z0_ohm
    delay = best.elements[0].delay_s
    freq = study.problem.grid.freq
    vec = np.array([best.u])
    from optmatch.domain.network import Choice

    choice = Choice(tuple(best.choice.medium), tuple(best.choice.short))
    for k, lm in enumerate(best.load_margins):
        # the engine on that load alone
        alone = study.problem.single(lm.load)
        assert float(alone.margins(vec, choice)[0]) == pytest.approx(lm.margin_db, abs=0.01)
        # scikit-rf's cascade of the same line onto that load (independent library)
        zl = study.problem.zloads[k]
        assert skrf_margin(freq, zl, z0, delay, 20.0) == pytest.approx(lm.margin_db, abs=0.01)
    # the design is close to the quarter-wave transformer that the identity predicts
    assert z0 == pytest.approx(math.sqrt(50 * 31.5), rel=0.05)

    # summary.json carries the per-load margins and the loads alone; reading it back gives the same
    back = read_summary(folder / "summary.json")
    assert [c.name for c in back.loads] == ["a", "b"] and back.load_rule == "worst"
    assert back.designs[0].load_margins == best.load_margins
    # the bare 30 Ω load: |Γ| = 20/80, return loss 12.04 dB (our own values, by the definition of Γ)
    assert back.loads[0].alone.worst_return_loss_db == pytest.approx(-20 * math.log10(20 / 80), abs=1e-9)
    text = (folder / "summary.md").read_text()
    assert "| rank | verdict | a (dB) | b (dB) | loads met |" in text
    assert "2 of 2" in text
    csv_head = (folder / "designs.csv").read_text().splitlines()[0]
    assert "margin_db_a" in csv_head and "margin_db_b" in csv_head
    assert {"matched_input_a.s1p", "matched_input_b.s1p"} <= set(back.files)
    # the batch report and the study pages carry the per-load view
    from optmatch.outputs.report import write_report

    write_report(tmp_path / "results")
    report = (tmp_path / "results" / "report.md").read_text()
    worst = next(lm for lm in best.load_margins if lm.load == best.worst_load)
    assert f"2 of 2 ({best.worst_load} {worst.margin_db:+.2f} dB)" in report
    page = (folder / "study.md").read_text()
    assert "## Each load" in page and "| rank | verdict | a (dB) | b (dB) | loads met |" in page
    assert "Each load" in (folder / "study.html").read_text()


# ------------------------------------------------------------------ worst against share


SHARE_LOADS = """\
loads:
  - {name: a, impedance: 30}
  - {name: b, impedance: 33}
  - {name: c, impedance: 200%s}
"""


def _run_three(tmp_path: Path, rule: str, weight_c: str = "") -> tuple:
    path = write(tmp_path, f"name: three-{rule}\n" + SHARE_LOADS % weight_c + f"""\
mask: {MASK}
network: {LINE}
search: {{trials: 6, seed: 2, population: 24, generations: 20, loads: {rule}}}
tolerance: {{samples: 20}}
""", name=f"{rule}{weight_c.strip(', :')}.yaml")
    return run_study(load_study(path), tmp_path / "results")[1]


def test_share_objective_prefers_more_loads_over_a_better_worst_margin(tmp_path):
    # Constructed so that the objectives disagree: 30 Ω and 33 Ω can both be matched by one
    # quarter-wave line (Z0 ≈ 39.7 Ω), but 200 Ω needs Z0 = 100 Ω.  A line that turns 30 Ω into
    # Z0²/30 turns 200 Ω into Z0²/200, 6.7 times lower, so no line brings all three within 20 dB:
    # the worst-margin design splits the difference and meets none, while the share design meets
    # two and fails 200 Ω badly (quarter-wave identity).
    worst_doc, share_doc = _run_three(tmp_path, "worst"), _run_three(tmp_path, "share")
    worst, share = worst_doc.designs[0], share_doc.designs[0]
    assert share.loads_met == 2 and share.share == pytest.approx(2 / 3)
    assert {lm.load for lm in share.load_margins if lm.meets_mask} == {"a", "b"}
    assert worst.loads_met < share.loads_met
    assert (worst_doc.ranked_by, share_doc.ranked_by) == ("margin", "share")
    assert worst.margin_db > share.margin_db + 1.0  # the worst-margin design has the better worst margin
    # the share design's worst load is the 200 Ω one
    assert share.worst_load == "c"


def test_share_objective_counts_weights(tmp_path):
    # With weight 3 on the 200 Ω load (total 5), meeting it alone (share 0.6) beats meeting the
    # other two (0.4): the design matches 200 Ω (near the √(50 · 200) = 100 Ω quarter-wave line; the
    # tie-break, the worst margin, then pulls Z0 down towards the two loads it misses while 200 Ω
    # stays met).
    doc = _run_three(tmp_path, "share", ", weight: 3")
    best = doc.designs[0]
    assert best.share == pytest.approx(0.6) and [lm.load for lm in best.load_margins if lm.meets_mask] == ["c"]
    assert 70.0 < best.elements[0].z0_ohm <= 100.0 * 1.05
    assert "(60 % by weight)" in (Path(doc.file).parent / "results" / doc.study / "summary.md").read_text()


# ------------------------------------------------------------------ the pieces: seeds, ceiling, yield


def test_seeds_come_from_each_load_without_duplicates(tmp_path):
    one = load_study(write(tmp_path, f"load: {{impedance: 60-j80}}\nmask: {MASK}\n"
                                     "network: {template: single_shunt_stub}\n", "one.yaml"))
    same = load_study(write(tmp_path, f"""\
        loads: [{{name: p, impedance: 60-j80}}, {{name: q, impedance: 60-j80}}]
        mask: {MASK}
        network: {{template: single_shunt_stub}}
        """, "same.yaml"))
    other = load_study(write(tmp_path, f"""\
        loads: [{{name: p, impedance: 60-j80}}, {{name: q, impedance: 25+j30}}]
        mask: {MASK}
        network: {{template: single_shunt_stub}}
        """, "other.yaml"))
    base = study_seeds(one.problem)
    assert len(study_seeds(same.problem)) == len(base)  # the second load's seeds are the first's
    mixed = study_seeds(other.problem)
    assert len(mixed) > len(base)
    assert any("(load q)" in s.origin for s in mixed) and any("(load p)" in s.origin for s in mixed)


def test_ceiling_is_the_lowest_over_the_loads(tmp_path):
    # Two parallel R–C loads (our own values); for each the Bode–Fano limit is exact, and the
    # larger C gives the lower ceiling (ln(1/Γ) ≤ π/(RCΔω)).
    path = write(tmp_path, f"""\
        loads:
          - {{name: small, parallel_rlc: {{r: 100, c: 1pF}}}}
          - {{name: large, parallel_rlc: {{r: 100, c: 3pF}}}}
        mask: {MASK}
        network: {{template: single_shunt_stub}}
        """)
    feas = load_study(path).problem.feasibility()
    bands = [(980e6, 1020e6)]
    assert feas.load == "large" and feas.loads == 2
    assert feas.ceiling_return_loss_db == pytest.approx(flat_ceiling_db("parallel RC", 100.0, 3e-12, bands), rel=1e-6)
    assert "the lowest of 2 loads, set by load large" in feas.statement()


def test_yield_runs_over_builds_and_loads(tmp_path):
    path = write(tmp_path, f"""\
        loads:
          - {{name: a, impedance: 30, weight: 1}}
          - {{name: b, impedance: 40, weight: 3}}
        mask: {MASK}
        network: {{elements: [{{line: {{length: 90deg, z0: 42, vf: 0.7}}}}]}}
        """)
    problem = load_study(path).problem
    design = Design(problem.network.choice_from({}), (), 0.0, 0.25)
    spread = Spread(cut_m=3e-3, z0_rel=0.04, samples=400, seed=5)  # our own spreads
    both = monte_carlo(problem, design, spread)
    each = [monte_carlo(problem.single(name), design, spread).yield_frac for name in ("a", "b")]
    # the same builds on each load: the pair share is the weighted mean of the loads' own yields
    assert both.load_yields == pytest.approx(tuple(each), abs=1e-12)
    assert both.yield_frac == pytest.approx(0.25 * each[0] + 0.75 * each[1], abs=1e-12)
    assert 0.0 < min(each) < 1.0  # both loads lose some builds: the test can fail
    # the yield objective's scores count build × load pairs the same way (common draws)
    draws = draw_errors(problem, design.choice, spread, 200, np.random.default_rng(9))
    y_both, _ = yield_scores(problem, design.vector(), design.choice, draws)
    y_each = [yield_scores(problem.single(k), design.vector(), design.choice, draws)[0][0] for k in range(2)]
    assert y_both[0] == pytest.approx(0.25 * y_each[0] + 0.75 * y_each[1], abs=1e-12)


# ------------------------------------------------------------------ file patterns and many loads


def test_file_pattern_many_loads_share_worst_load_and_envelope(tmp_path):
    freq = np.linspace(0.9e9, 1.1e9, 41)
    units = tmp_path / "measured"
    units.mkdir()
    for k in range(8):  # eight invented units, 28 to 35 Ω
        touchstone(units / f"unit_{k}.s1p", freq, np.full(freq.size, 28.0 + k, dtype=complex), "invented unit")
    path = write(tmp_path, f"""\
        name: units
        loads: [{{files: "measured/unit_*.s1p"}}]
        mask: {MASK}
        network: {LINE}
        search: {{trials: 2, seed: 1, population: 16, generations: 8, loads: share}}
        tolerance: {{samples: 20}}
        """)
    study = load_study(path)
    assert study.problem.names == tuple(f"unit_{k}" for k in range(8))
    folder, doc = run_study(study, tmp_path / "results")
    assert doc.invented  # the files say "invented"
    best = doc.designs[0]
    assert len(best.load_margins) == 8 and best.worst_load in study.problem.names
    text = (folder / "summary.md").read_text()
    assert "| rank | verdict | loads met | worst load | its margin (dB) | at (MHz) | yield, builds × loads |" in text
    assert "The 6 worst alone are shown; 2 more are in summary.json." in text
    assert (folder / "return_loss.png").exists()
    assert list(folder.glob("matched_input_*.s1p")) == [folder / f"matched_input_{best.worst_load}.s1p"]


def test_file_patterns_are_bounded_and_stay_in_the_study_folder(tmp_path, monkeypatch):
    freq = np.linspace(0.9e9, 1.1e9, 11)
    units = tmp_path / "study" / "units"
    units.mkdir(parents=True)
    for k in range(4):
        touchstone(units / f"u{k}.s1p", freq, np.full(freq.size, 40.0, dtype=complex))
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    touchstone(outside / "x.s1p", freq, np.full(freq.size, 40.0, dtype=complex))
    (units / "sneaky.s1p").symlink_to(outside / "x.s1p")
    body = f"mask: {MASK}\nnetwork: {LINE}\n"
    study_dir = tmp_path / "study"
    path = write(study_dir, 'loads: [{files: "units/u*.s1p"}]\n' + body, "ok.yaml")
    monkeypatch.setattr(limits, "MAX_LOADS", 3)
    assert any("matches more than 3 files; at most 3 loads" in p for p in _problems(path))
    monkeypatch.setattr(limits, "MAX_LOADS", 1000)
    assert load_study(path).problem.n_loads == 4
    path = write(study_dir, 'loads: [{files: "units/*.s1p"}]\n' + body, "link.yaml")
    assert any("sneaky.s1p, which leads outside the study file's folder" in p for p in _problems(path))
    for pattern, why in (("../elsewhere/*.s1p", "may not climb out"), ("/tmp/*.s1p", "not an absolute path"),
                         ("units/**/*.s1p", "recursively")):
        path = write(study_dir, f'loads: [{{files: "{pattern}"}}]\n' + body, "bad.yaml")
        assert any(why in p for p in _problems(path)), pattern


def _problems(path: Path) -> list[str]:
    with pytest.raises(StudyFileError) as err:
        load_study(path)
    return err.value.problems


# ------------------------------------------------------------------ bad input: one line each, exit 2


BAD = """\
name: bad-loads
loads:
  - {name: low, touchstone: low.s1p, weight: 0}
  - {name: low, impedance: 50}
  - {files: "none/unit_*.s1p"}
mask: {segments: [{from: 420MHz, to: 450MHz, return_loss: 15}]}
network: {template: single_shunt_stub}
search: {loads: share, objective: yield}
"""


def test_bad_loads_one_line_each_exit_2_and_the_api_says_the_same(tmp_path, capsys):
    # low.s1p covers 380–440 MHz: not the whole mask (420–450 MHz)
    touchstone(tmp_path / "low.s1p", np.linspace(380e6, 440e6, 61), np.full(61, 40.0 + 5j))
    path = write(tmp_path, BAD)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    expected = {
        "loads[0].weight": "must be > 0",
        "loads[0].touchstone": "grid 420 MHz to 450 MHz reaches outside the measured range 380 MHz to 440 MHz",
        "loads[1].name": "'low' is the name of loads[0] too",
        "loads[2].files": "'none/unit_*.s1p' matches no file",
        "search": "loads: share ranks by the share of loads that meet the mask",
    }
    for key, what in expected.items():
        lines = [e for e in err if re.match(rf"{re.escape(str(path))}:\d+: {re.escape(key)}: ", e)]
        assert len(lines) == 1 and what in lines[0], (key, err)
    assert len(err) == len(expected)
    assert not any("Traceback" in e for e in err)

    # the Python API raises the project's error type with the same problems (no line numbers)
    import yaml

    import optmatch

    with pytest.raises(optmatch.OptmatchError) as api_err:
        optmatch.study(yaml.safe_load(BAD), base_dir=tmp_path)
    assert isinstance(api_err.value, StudyFileError)
    cli = sorted(re.sub(rf"^{re.escape(str(path))}:\d+: ", "", e) for e in err)
    api = sorted(p.removeprefix("study: ") for p in api_err.value.problems)
    assert api == cli


def test_load_and_loads_exactly_one(tmp_path):
    both = write(tmp_path, f"load: {{impedance: 50}}\nloads: [{{name: a, impedance: 40}}]\nmask: {MASK}\n"
                           f"network: {LINE}\n", "both.yaml")
    assert any(re.search(r"both.yaml:2: loads: give either load .* or loads", p) for p in _problems(both))
    neither = write(tmp_path, f"mask: {MASK}\nnetwork: {LINE}\n", "neither.yaml")
    assert [p for p in _problems(neither) if ": load: required key is missing" in p]


def test_single_load_study_is_unchanged(tmp_path):
    # one load: no load names, a 1-D load, and no per-load fields in the document
    study = load_study(ROOT / "configs" / "demo_whip.yaml")
    assert not study.problem.several and study.problem.zload.ndim == 1 and study.problem.names == ("load",)


# ------------------------------------------------------------------ the demo, as the README shows it


def test_three_condition_demo_runs_and_its_table_is_in_the_readme(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(ROOT)
    out = tmp_path / "results"
    assert main(["run", "configs/demo_whip_conditions.yaml", "--out", str(out), "--quiet"]) == 0
    folder = out / "demo-whip-conditions"
    doc = json.loads((folder / "summary.json").read_text())
    assert [c["name"] for c in doc["loads"]] == ["parked", "moving", "building"]
    assert doc["invented"] is True
    summary = (folder / "summary.md").read_text()
    table = summary[summary.index("| rank | verdict | parked (dB)"):].split("\n\n")[0]
    readme = (ROOT / "README.md").read_text()
    assert table in readme, "the README's per-load table of the demo is out of date"

    # trim needs to know which load the build was measured with
    measured = folder / "matched_input_parked.s1p"  # a perfect build of design 1 on the parked load
    assert main(["trim", str(folder), "--measured", str(measured)]) == 2
    assert main(["trim", str(folder), "--measured", str(measured), "--load-name", "parkd"]) == 2
    err = capsys.readouterr().err
    assert "the study has 3 loads (parked, moving, building); say which one" in err
    assert "no such load" in err and "did you mean 'parked'?" in err
    assert main(["trim", str(folder), "--measured", str(measured), "--load-name", "parked", "--json"]) == 0
    trim = json.loads(capsys.readouterr().out)
    assert trim["fit"]["verdict"] == "explained" and trim["steps"] == []
    parked = doc["designs"][0]["load_margins"][0]
    assert parked["load"] == "parked"
    assert trim["margin_db"]["measured"] == pytest.approx(parked["margin_db"], abs=0.01)
