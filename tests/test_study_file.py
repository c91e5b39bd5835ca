"""Study files: validation into typed models and resolution into a Problem.

Numbers are checked against physical identities (quarter- and half-wave lines, resonance),
facts of the trade, and scikit-rf as an independent reader of Touchstone files.
"""

from __future__ import annotations

import math
import re
import shutil
import textwrap
from pathlib import Path

import numpy as np
import pytest
import skrf

from optmatch.domain.templates import build_template
from optmatch.studyfile.loader import StudyFileError, check_study, load_study
from optmatch.units import C0

DATA = Path(__file__).parent / "data"
WHIP = DATA / "whip_invented.s1p"  # invented test data, 400-460 MHz in 1 MHz steps
EXAMPLES = Path(__file__).parent.parent / "configs" / "examples"

MASK = """
mask:
  segments:
    - {from: 410MHz, to: 450MHz, return_loss: 15}
"""


def write(tmp_path: Path, text: str, name: str = "study.yaml") -> Path:
    p = tmp_path / name
    p.write_text(textwrap.dedent(text), encoding="utf-8")
    return p


def problems_of(path: Path) -> list[str]:
    """Every problem of a bad file, each checked to be one ``file[:line]: ...`` line."""
    with pytest.raises(StudyFileError) as info:
        load_study(path)
    probs = info.value.problems
    assert probs, "a StudyFileError carries at least one problem"
    for line in probs:
        assert re.match(rf"^{re.escape(str(path))}(:\d+)?: ", line), line
        assert "\n" not in line
    assert str(info.value) == "\n".join(probs)
    assert check_study(path) == probs
    return probs


def bare(line: str, path: Path) -> str:
    """A problem line without its ``file:line: `` lead."""
    return re.sub(rf"^{re.escape(str(path))}(:\d+)?: ", "", line)


def single_point_zin(study_text: str, tmp_path: Path) -> complex:
    """Input impedance (Ω) of a study's fixed network at its single mask frequency."""
    study = load_study(write(tmp_path, study_text))
    net = study.problem.network
    assert net.dim == 0
    r = study.problem.response(np.zeros((1, 0)), net.default_choice())
    return complex(r.zin[0, 0])


# ------------------------------------------------------------------ loads


def test_impedance_load_is_constant_on_the_grid(tmp_path):
    study = load_study(write(tmp_path, textwrap.dedent("""
        load: {impedance: 60-j80}
        network: {template: single_shunt_stub}
        """) + MASK))
    # Physical identity: a frequency-independent impedance is the same at every grid point.
    assert np.allclose(study.problem.zload, 60 - 80j, rtol=0, atol=1e-12)
    assert study.problem.grid.freq.size == 41  # default points per segment (mask.DEFAULT_POINTS)


def test_series_rl_load_by_identity(tmp_path):
    # Our own values (no source): 33 Ω in series with 47 nH, at 275 MHz.
    study = load_study(write(tmp_path, """
        load: {series_rlc: {r: 33, l: 47nH}}
        mask: {segments: [{from: 275MHz, to: 275MHz, return_loss: 10}]}
        network: {template: single_series_stub}
        """))
    z = study.problem.zload[0]
    assert z.real == pytest.approx(33.0)  # identity: R unchanged
    assert z.imag == pytest.approx(2 * math.pi * 275e6 * 47e-9, rel=1e-12)  # identity: X = 2πfL


def test_parallel_rlc_load_is_pure_r_at_resonance(tmp_path):
    l_h, c_f = 10e-9, 2e-12
    f0 = 1.0 / (2 * math.pi * math.sqrt(l_h * c_f))
    study = load_study(write(tmp_path, f"""
        load: {{parallel_rlc: {{r: 200, l: 10nH, c: 2pF}}}}
        mask: {{segments: [{{from: {f0!r}Hz, to: {f0!r}Hz, return_loss: 10}}]}}
        network: {{template: single_shunt_stub}}
        """))
    # Physical identity: at f0 = 1/(2π√(LC)) the L and C susceptances cancel, Z = R.
    assert study.problem.zload[0] == pytest.approx(200.0 + 0j, abs=1e-6)


def test_touchstone_load_agrees_with_scikit_rf(tmp_path):
    shutil.copy(WHIP, tmp_path / "whip.s1p")
    study = load_study(write(tmp_path, textwrap.dedent("""
        load: {touchstone: whip.s1p}
        network: {template: double_stub}
        """) + MASK))
    ref = skrf.Network(str(WHIP))
    on_grid = np.isin(ref.f, study.problem.grid.freq)
    # scikit-rf as an independent reader: grid points fall on measured points (1 MHz steps).
    assert on_grid.sum() == 41
    assert np.allclose(study.problem.zload, ref.z[on_grid, 0, 0], rtol=1e-9)


def test_digest_covers_touchstone_bytes_not_key_order(tmp_path):
    shutil.copy(WHIP, tmp_path / "whip.s1p")
    body = "load: {touchstone: whip.s1p}\nnetwork: {template: double_stub}\n" + MASK
    reordered = MASK + "\nnetwork: {template: double_stub}\nload: {touchstone: whip.s1p}\n"
    a = load_study(write(tmp_path, body, "a.yaml")).digest
    b = load_study(write(tmp_path, reordered, "b.yaml")).digest
    assert a == b  # identity: the digest hashes canonical JSON, so key order does not matter
    text = (tmp_path / "whip.s1p").read_text().replace("! not a measurement", "! not a measurement either")
    (tmp_path / "whip.s1p").write_text(text)
    assert load_study(write(tmp_path, body, "a.yaml")).digest != a  # the file bytes are part of it


# ------------------------------------------------------------------ templates

F_REF = 433e6


@pytest.mark.parametrize(
    ("template", "kinds"),
    [
        ("single_shunt_stub", ["line", "shunt_stub"]),
        ("single_series_stub", ["line", "series_stub"]),
        ("double_stub", ["line", "shunt_stub", "line", "shunt_stub"]),
        ("triple_stub", ["line", "shunt_stub", "line", "shunt_stub", "line", "shunt_stub"]),
    ],
)
def test_stub_templates(tmp_path, template, kinds):
    study = load_study(write(tmp_path, textwrap.dedent(f"""
        reference: 433MHz
        load: {{impedance: 60-j80}}
        network: {{template: {template}}}
        """) + MASK))
    els = study.problem.network.elements
    assert [e.kind for e in els] == kinds
    half_wave = 1.0 / (2 * F_REF)  # identity: 180° at f is a delay of 1/(2f)
    eighth_wave = 1.0 / (8 * F_REF)  # identity: 0.125 λ at f is a delay of 1/(8f)
    for i, e in enumerate(els):
        assert e.media[0].z0 == 50.0 and e.length_basis == "delay"
        if i > 0 and e.kind == "line":  # stub spacing, fixed
            assert e.length.lo == pytest.approx(eighth_wave) and e.length.fixed
        else:
            assert e.length.lo == 0.0 and e.length.hi == pytest.approx(half_wave)
        if e.kind != "line":
            assert e.end == "either"
    assert study.problem.network.dim == len(kinds) - (len(kinds) // 2 - 1)


def test_stepped_line_quarter_waves_with_free_z0(tmp_path):
    study = load_study(write(tmp_path, textwrap.dedent("""
        reference: 433MHz
        load: {impedance: 100}
        network: {template: stepped_line, sections: 3}
        """) + MASK))
    els = study.problem.network.elements
    assert len(els) == 3
    for e in els:
        # Identity: 90° at 433 MHz is a delay of 1/(4·433e6) s.
        assert e.length.fixed and e.length.lo == pytest.approx(1.0 / (4 * F_REF))
        assert (e.z0_free.lo, e.z0_free.hi) == (10.0, 250.0)  # default range of the study format
        assert e.media[0].z0 == pytest.approx(130.0)  # identity: midpoint of 10..250 Ω
    assert study.problem.network.dim == 3


def test_reference_defaults_to_mask_centre(tmp_path):
    study = load_study(write(tmp_path, """
        load: {impedance: 60-j80}
        network: {template: double_stub, spacing: 45deg, max_length: 0.25wl, end: short, z0: [50, 75]}
        mask:
          segments:
            - {from: 400MHz, to: 420MHz, return_loss: 10}
            - {from: 440MHz, to: 460MHz, return_loss: 12}
        """))
    p = study.problem
    assert p.f_ref == pytest.approx(430e6)  # identity: centre of 400..460 MHz
    spacing = p.network.elements[2]
    assert spacing.length.lo == pytest.approx(1.0 / (8 * 430e6))  # identity: 45° = λ/8
    assert p.network.elements[1].length.hi == pytest.approx(1.0 / (4 * 430e6))  # 0.25 λ
    assert p.network.elements[1].end == "short"
    assert [m.z0 for m in spacing.media] == [50.0, 75.0]


def test_template_with_physical_max_length(tmp_path):
    study = load_study(write(tmp_path, textwrap.dedent("""
        load: {impedance: 60-j80}
        network: {template: single_shunt_stub, max_length: 300mm, vf: 0.66}
        """) + MASK))
    for e in study.problem.network.elements:
        assert e.length_basis == "physical" and e.length.hi == pytest.approx(0.3)  # 300 mm in metres
        assert e.media[0].vf == 0.66


def test_templates_are_pure_and_reject_unknown_names():
    from optmatch.domain.network import Medium

    els = build_template("triple_stub", F_REF, (Medium(50.0),))
    assert len(els) == 6
    with pytest.raises(ValueError, match="unknown template"):
        build_template("quad_stub", F_REF, (Medium(50.0),))


def test_template_recipe_of_the_contributor_guide(tmp_path, monkeypatch):
    # The guide's recipe, followed as written: a builder taking TemplateArgs, registered in TEMPLATES
    # with the options it takes; the study file then names it, and options it does not take are refused.
    from optmatch.domain import templates

    def series_then_shunt(a: templates.TemplateArgs):
        return (a.line(a.free, "line"), a.stub("series_stub", "series stub"), a.stub("shunt_stub", "shunt stub"))

    monkeypatch.setitem(templates.TEMPLATES, "series_then_shunt",
                        templates.Template(series_then_shunt, frozenset({"end", "max_length"})))
    study = load_study(write(tmp_path, textwrap.dedent("""
        load: {impedance: 60-j80}
        network: {template: series_then_shunt, end: open, max_length: 0.4wl}
        """) + MASK))
    kinds = [e.kind for e in study.problem.network.elements]
    assert kinds == ["line", "series_stub", "shunt_stub"]
    assert all(e.end == "open" for e in study.problem.network.elements[1:])
    problems = check_study(write(tmp_path, textwrap.dedent("""
        load: {impedance: 60-j80}
        network: {template: series_then_shunt, spacing: 45deg}
        """) + MASK, name="s2.yaml"))
    assert any("spacing: not an option of template series_then_shunt" in p for p in problems)


# ------------------------------------------------------------------ explicit elements


def test_elements_resolve_lengths_media_and_lumped(tmp_path):
    study = load_study(write(tmp_path, """
        name: whip-uhf
        description: free text
        system: 50 ohm
        reference: 433MHz
        load: {impedance: 60-j80}
        mask:
          points: 41
          segments:
            - {from: 410MHz, to: 450MHz, return_loss: 15, max_loss: 0.5 dB, points: 61}
        network:
          elements:
            - line: {length: 90deg, z0: 50, vf: 0.66}
            - shunt_stub: {length: {min: 0deg, max: 180deg}, end: either, z0: [35, 50, 75]}
            - series_stub: {length: {min: 10mm, max: 300mm}, end: open, vf: 0.66}
            - lumped: {connection: shunt, part: c, value: {min: 0.5pF, max: 10pF}}
            - line: {length: 2.5ns, z0: {min: 20, max: 120}}
        search: {trials: 10, time: 5min, seed: 1, target_margin: 3, objective: pareto}
        """))
    p = study.problem
    assert p.name == "whip-uhf" and study.description == "free text"
    assert p.grid.freq.size == 61  # segment points override the mask default
    line, stub, sstub, cap, tline = p.network.elements
    # Identity: 90° at 433 MHz is a quarter period, delay 1/(4·433e6) s.
    assert line.length.fixed and line.length.lo == pytest.approx(1.0 / (4 * F_REF))
    assert line.media[0].vf == 0.66 and line.length_basis == "delay"
    assert stub.length.hi == pytest.approx(1.0 / (2 * F_REF))  # identity: 180° is 1/(2f)
    assert [m.z0 for m in stub.media] == [35.0, 50.0, 75.0] and stub.end == "either"
    assert sstub.length_basis == "physical" and (sstub.length.lo, sstub.length.hi) == pytest.approx((0.01, 0.3))
    assert cap.value.log and cap.value.lo == pytest.approx(0.5e-12) and cap.value.hi == pytest.approx(10e-12)
    assert tline.length.lo == pytest.approx(2.5e-9) and tline.z0_free.hi == 120.0
    assert tline.media[0].z0 == pytest.approx(70.0)  # midpoint of 20..120 Ω
    assert study.search.time_s == pytest.approx(300.0)  # 5 min in seconds
    assert study.search.objective == "pareto" and study.search.target_margin_db == 3.0


def test_quarter_wave_line_inverts_load(tmp_path):
    zin = single_point_zin("""
        reference: 433MHz
        load: {impedance: 100}
        mask: {segments: [{from: 433MHz, to: 433MHz, return_loss: 10}]}
        network: {elements: [line: {length: 90deg, z0: 50}]}
        """, tmp_path)
    # Identity (Pozar, Microwave Engineering, 4th ed., sec. 2.5, recalled from memory):
    # a λ/4 line inverts the load, Zin = Z0²/ZL = 2500/100 = 25 Ω.
    assert zin == pytest.approx(25.0 + 0j, abs=1e-6)


def test_physical_length_uses_velocity_factor(tmp_path):
    vf, length_m = 0.66, 0.1
    f_q = vf * C0 / (4 * length_m)  # frequency at which 100 mm of vf 0.66 line is λ/4
    zin = single_point_zin(f"""
        load: {{impedance: 100}}
        mask: {{segments: [{{from: {f_q!r}Hz, to: {f_q!r}Hz, return_loss: 10}}]}}
        network: {{elements: [line: {{length: 100mm, z0: 50, vf: 0.66}}]}}
        """, tmp_path)
    # Identity: λ/4 inversion Zin = Z0²/ZL = 25 Ω once the guided wavelength uses the velocity factor.
    assert zin == pytest.approx(25.0 + 0j, abs=1e-6)


def test_default_name_is_file_stem_and_example_configs_load():
    for path in sorted(EXAMPLES.glob("*.yaml")):
        assert check_study(path) == [], path
    study = load_study(EXAMPLES / "rlc_single_stub.yaml")
    # Identity: series R-L-C, Re Z = R at every frequency.
    assert np.allclose(study.problem.zload.real, 25.0)


def test_name_defaults_to_file_stem(tmp_path):
    study = load_study(write(tmp_path, "load: {impedance: 50}\nnetwork: {template: single_shunt_stub}\n" + MASK,
                             "my-study.v2.yaml"))
    assert study.problem.name == "my-study.v2"
    assert study.search.trials == 24 and study.search.time_s is None  # format defaults


# ------------------------------------------------------------------ bad files

GOOD_NET = "network: {template: single_shunt_stub}\n"
GOOD_LOAD = "load: {impedance: 60-j80}\n"


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        (GOOD_LOAD + GOOD_NET + "mask: {segments: [{from: -3GHz, to: 450MHz, return_loss: 15}]}\n",
         "mask.segments[0].from: must be more than 0 Hz"),
        (GOOD_LOAD + GOOD_NET + "mask: {segments: [{from: 500MHz, to: 450MHz, return_loss: 15}]}\n",
         "mask.segments[0]: from (500 MHz) must not exceed to (450 MHz)"),
        (GOOD_LOAD + GOOD_NET + "mask: {segments: []}\n", "mask.segments: needs at least one entry"),
        (GOOD_LOAD + GOOD_NET + MASK + "search: {trials: many}\n", "search.trials: expected a whole number"),
        (GOOD_LOAD + GOOD_NET + MASK + "search: {time: soon}\n", "search.time: 'soon' is not a duration"),
        (GOOD_LOAD + GOOD_NET + MASK + "colour: red\n", "colour: unknown key (allowed: name,"),
        (GOOD_LOAD + GOOD_NET + MASK + "system: -50\n", "system: must be more than 0 Ω"),
        (GOOD_LOAD + GOOD_NET + MASK + "name: 'a b'\n", "name: 'a b' may hold only"),
        (GOOD_LOAD + MASK + "network: {template: quad_stub}\n", "network.template: unknown template 'quad_stub'"),
        (GOOD_LOAD + MASK + "network: {template: double_stub, elements: [line: {length: 1deg}]}\n",
         "network: give either template or elements, not both"),
        (GOOD_LOAD + MASK + "network: {z0: 50}\n", "network: give a template or a list of elements"),
        (GOOD_LOAD + MASK + "network: {template: stepped_line, spacing: 45deg}\n",
         "network: spacing: not an option of template stepped_line"),
        (GOOD_LOAD + MASK + "network: {elements: [line: {length: 1deg, vf: 1.5}]}\n",
         "network.elements[0].line.vf: must lie in (0, 1]"),
        (GOOD_LOAD + MASK + "network: {elements: [line: {length: 1deg, z0: -50}]}\n",
         "network.elements[0].line.z0: must be more than 0 Ω"),
        (GOOD_LOAD + MASK + "network: {elements: [line: {length: 1deg, z0: {min: 80, max: 20}}]}\n",
         "network.elements[0].line.z0: min (80 Ω) must not exceed max (20 Ω)"),
        (GOOD_LOAD + MASK + "network: {elements: [shunt_stub: {length: {min: 90deg, max: 10deg}}]}\n",
         "network.elements[0].shunt_stub.length: min must not exceed max"),
        (GOOD_LOAD + MASK + "network: {elements: [shunt_stub: {length: {min: 1ns, max: 90deg}}]}\n",
         "network.elements[0].shunt_stub.length: min (1 ns) must not exceed max"),
        (GOOD_LOAD + MASK + "network: {elements: [line: {length: {min: 1mm, max: 90deg}}]}\n",
         "network.elements[0].line.length: min and max must both be"),
        (GOOD_LOAD + MASK + "network: {elements: [line: {length: 30}]}\n",
         "network.elements[0].line.length: 30 what? write e.g. 30deg or 30mm"),
        (GOOD_LOAD + MASK + "network: {elements: [series_stub: {length: 1deg, end: maybe}]}\n",
         "network.elements[0].series_stub.end: 'maybe' is not allowed"),
        (GOOD_LOAD + MASK + "network: {elements: [lumped: {connection: shunt, part: l, value: 5pF}]}\n",
         "network.elements[0].lumped.value: '5pF' is a capacitance, not an inductance"),
        (GOOD_LOAD + MASK + "network: {elements: [wire: {length: 1deg}]}\n",
         "network.elements[0].wire: unknown key (allowed: line, shunt_stub, series_stub, lumped)"),
        (GOOD_LOAD + MASK + "network: {elements: [{line: {length: 1deg}, shunt_stub: {length: 1deg}}]}\n",
         "network.elements[0]: give one element kind per entry"),
        (GOOD_NET + MASK + "load: {}\n", "load: give one of impedance, series_rlc, parallel_rlc, touchstone"),
        (GOOD_NET + MASK + "load: {impedance: 50, series_rlc: {r: 20}}\n", "load: give exactly one of"),
        (GOOD_NET + MASK + "load: {impedance: 50x}\n", "load.impedance: '50x' is not a complex number"),
        (GOOD_NET + MASK + "load: {series_rlc: {}}\n", "load.series_rlc: give at least one of r, l, c"),
        (GOOD_NET + MASK + "load: {series_rlc: {l: 15pF}}\n",
         "load.series_rlc.l: '15pF' is a capacitance, not an inductance"),
        (GOOD_NET + MASK + "load: {touchstone: nothere.s1p}\n", "load.touchstone: "),
        (GOOD_NET + MASK, "load: required key is missing"),
    ],
)
def test_bad_file_names_key_path(tmp_path, text, expected):
    path = write(tmp_path, text)
    probs = problems_of(path)
    assert any(bare(line, path).startswith(expected) for line in probs), probs


def test_touchstone_missing_malformed_and_out_of_range(tmp_path):
    missing = problems_of(write(tmp_path, GOOD_NET + MASK + "load: {touchstone: gone.s1p}\n"))
    assert missing[0].endswith("gone.s1p: file not found")

    (tmp_path / "junk.s1p").write_text("# Hz S RI R 50\n400e6 0.1\nnot numbers at all\n")
    junk = problems_of(write(tmp_path, GOOD_NET + MASK + "load: {touchstone: junk.s1p}\n"))
    assert "load.touchstone:" in junk[0] and "junk.s1p" in junk[0]

    shutil.copy(WHIP, tmp_path / "whip.s1p")
    wide = "mask: {segments: [{from: 300MHz, to: 500MHz, return_loss: 15}]}\n"
    out = problems_of(write(tmp_path, GOOD_NET + wide + "load: {touchstone: whip.s1p}\n"))
    # The invented file spans 400-460 MHz; a 300-500 MHz grid must not be extrapolated.
    assert "load.touchstone:" in out[0] and "outside the measured range" in out[0]


def test_file_level_problems(tmp_path):
    assert problems_of(tmp_path / "absent.yaml") == [f"{tmp_path / 'absent.yaml'}: file not found"]
    assert problems_of(write(tmp_path, "\n# nothing\n", "empty.yaml"))[0].endswith(": file is empty")
    assert "at the top level" in problems_of(write(tmp_path, "- 1\n- 2\n", "list.yaml"))[0]
    syntax = problems_of(write(tmp_path, "load: {impedance: 50}\nmask: [unclosed\nnetwork: x\n", "syn.yaml"))
    assert len(syntax) == 1 and syntax[0].startswith(f"{tmp_path / 'syn.yaml'}:3: YAML syntax error")
    dup = problems_of(write(tmp_path, GOOD_LOAD + GOOD_NET + MASK + "load: {impedance: 75}\n", "dup.yaml"))
    assert "key 'load' is given twice" in dup[0] and dup[0] == f"{tmp_path / 'dup.yaml'}:7: key 'load' is given twice"


def test_all_problems_reported_together(tmp_path):
    path = write(tmp_path, """
        name: "bad name!"
        system: -50
        load: {touchstone: gone.s1p}
        mask:
          points: 1
          segments:
            - {from: -3GHz, to: 450MHz, return_loss: 15, colour: red}
        network:
          elements:
            - line: {length: 90deg, vf: 1.5}
            - shunt_stub: {length: {min: 2ns, max: 10deg}, end: maybe}
        search: {trials: 0, objective: best}
        """)
    probs = problems_of(path)
    expected = [
        "name:", "system:", "mask.points:", "mask.segments[0].from:", "mask.segments[0].colour:",
        "network.elements[0].line.vf:", "network.elements[1].shunt_stub.end:", "search.trials:",
        "search.objective:",
        "load.touchstone:",  # resolution stage, still reported alongside the schema problems
    ]
    for key in expected:
        assert any(bare(line, path).startswith(key) for line in probs), (key, probs)
    assert len(probs) == len(expected)


def test_tolerance_section(tmp_path):
    good = write(tmp_path, "load: {impedance: 60-j80}\n" + MASK +
                 "network: {template: single_shunt_stub}\ntolerance: {cut: 2mm, z0: 3%, vf: 1.5%, samples: 200}\n")
    spread = load_study(good).spread
    assert (spread.cut_m, spread.z0_rel, spread.vf_rel, spread.samples) == (0.002, 0.03, 0.015, 200)
    bad = write(tmp_path, "load: {impedance: 60-j80}\n" + MASK +
                "network: {template: single_shunt_stub}\ntolerance: {cut: 2deg, z0: 150%, vf: 2}\n", "bad.yaml")
    probs = problems_of(bad)
    assert any("tolerance.cut" in p for p in probs)
    assert any("tolerance.z0" in p and "100" in p for p in probs)
    # a bare 2 could be 2 % or a fraction of 2 (200 %): the unit is never guessed
    assert any(bare(p, bad) == "tolerance.vf: 2 what? write 2% (percentage units: %)" for p in probs)


# ------------------------------------------------------------------ issue: nothing wrong gets through

BASE = GOOD_LOAD + GOOD_NET


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        (BASE + "mask: {segments: [{from: 144mhz, to: 148mhz, return_loss: 15}]}\n",
         "mask.segments[0].from: '144mhz': did you mean 144 MHz?"),
        (BASE + "mask: {segments: [{from: 144, to: 148MHz, return_loss: 15}]}\n",
         "mask.segments[0].from: 144 what? write 144MHz"),
        (GOOD_NET + MASK + "load: {series_rlc: {r: 25, l: 90}}\n", "load.series_rlc.l: 90 what? write 90nH"),
        (GOOD_NET + MASK + "load: {series_rlc: {r: 25, c: 12.5}}\n", "load.series_rlc.c: 12.5 what? write 12.5pF"),
        (GOOD_LOAD + MASK + "network: {elements: [lumped: {connection: shunt, part: c, value: 12.5}]}\n",
         "network.elements[0].lumped.value: 12.5 what? write 12.5pF"),
        (BASE + MASK + "name: '..'\n", "name: '..' names a folder above or at the results folder"),
        (BASE + MASK + "name: '.'\n", "name: '.' names a folder"),
        (BASE + MASK + "name: \"a\\nb\"\n", "name: 'a\\nb' may hold only"),
        (BASE + MASK + "name: a/b\n", "name: 'a/b' may hold only"),
        (BASE + MASK + f"name: {'x' * 101}\n", "name: is 101 characters long; at most 100"),
        (BASE + MASK + "search: {seed: 4294967296}\n", "search.seed: must be <= 4,294,967,295"),
        (BASE + MASK + "search: {population: 100000000000}\n", "search.population: 100,000,000,000 candidates"),
        (BASE + "mask: {segments: [{from: 420MHz, to: 450MHz, return_loss: 101}]}\n",
         "mask.segments[0].return_loss: 101 is outside the plausible range of a return loss (above 0 dB to 100 dB)"),
        (BASE + "mask: {segments: [{from: 500Hz, to: 450MHz, return_loss: 15}]}\n",
         "mask.segments[0].from: '500Hz' is outside the plausible range of a frequency (1 kHz to 1 THz)"),
        (GOOD_LOAD + MASK + "network: {elements: [line: {length: 2km}]}\n",
         "network.elements[0].line.length: '2km' is longer than the plausible limit (1 km)"),
        (GOOD_LOAD + MASK + "network: {elements: [line: {length: 5000wl}]}\n",
         "network.elements[0].line.length: 5000 wavelengths at the reference frequency 430 MHz is longer than"),
        (BASE + MASK + "search: {time: 90}\n", "search.time: 90 what? write 90s"),
        (BASE + MASK + "drive: {power: 100}\n", "drive.power: 100 what? write 100W"),
    ],
)
def test_refused_by_check(tmp_path, text, expected):
    """Each of these passed check on the main branch before this work, or ran into nonsense."""
    path = write(tmp_path, text)
    probs = problems_of(path)
    assert any(bare(line, path).startswith(expected) for line in probs), probs


def test_elements_and_population_bounded_before_any_search(tmp_path):
    # 10^5 elements as the issue wrote them: refused by the file-size bound, one line, no MemoryError.
    many = "network:\n  elements:\n" + "    - line: {length: 1deg}\n" * 100_000
    path = write(tmp_path, GOOD_LOAD + MASK + many)
    assert [bare(p, path) for p in problems_of(path)] == [
        "larger than 1024 KiB; a study file or catalog is far smaller"]
    # 10^5 elements through aliases: refused by the alias-expansion bound.
    aliased = write(tmp_path, GOOD_LOAD + MASK + "e: &e {line: {length: 1deg}}\nnetwork:\n  elements: ["
                    + ", ".join(["*e"] * 100_000) + "]\n", "aliased.yaml")
    assert "aliases expand to more than 200,000 values" in problems_of(aliased)[0]
    # Past the cap of elements, one line.
    cap = write(tmp_path, GOOD_LOAD + MASK + "network:\n  elements:\n" + "    - line: {length: 1deg}\n" * 65,
                "cap.yaml")
    assert [bare(p, cap) for p in problems_of(cap)] == ["network.elements: at most 64 entries (got 65)"]
    # The memory estimate refuses what the static caps let through: a large population on a fine grid.
    thirty = "network:\n  elements:\n" + "    - line: {length: {min: 0deg, max: 90deg}}\n" * 30
    big = write(tmp_path, GOOD_LOAD + thirty + "mask: {segments: [{from: 420MHz, to: 450MHz, return_loss: 15, "
                "points: 10001}]}\nsearch: {population: 1000000}\ntolerance: {samples: 1000000}\n", "big.yaml")
    probs = [bare(p, big) for p in problems_of(big)]
    assert any(p.startswith("search.population: 1,000,000 candidates on 10,001 grid points need about") and
               "GiB of memory in one generation (estimate:" in p and "2 GiB" in p for p in probs), probs
    assert any(p.startswith("tolerance.samples: 1,000,000 builds on 10,001 grid points need about") for p in probs)


def test_billion_laughs_refused(tmp_path):
    # Ten levels of ten aliases each: 10^10 values if expanded, a few hundred bytes as written.
    lines = ["a0: &a0 [x, x, x, x, x, x, x, x, x, x]"]
    lines += [f"a{i}: &a{i} [{', '.join([f'*a{i - 1}'] * 10)}]" for i in range(1, 10)]
    path = write(tmp_path, "\n".join(lines) + "\nload: {impedance: 50}\ndescription: *a9\n")
    probs = problems_of(path)
    assert len(probs) == 1 and "aliases expand to more than" in probs[0]


def test_deep_nesting_is_one_line(tmp_path):
    path = write(tmp_path, "load: " + "[" * 50_000 + "]" * 50_000 + "\n")
    assert problems_of(path) == [f"{path}:1: nested deeper than 48 levels; refused"]
    block = "".join(f"{'  ' * k}k{k}:\n" for k in range(200))
    path = write(tmp_path, block, "block.yaml")
    probs = problems_of(path)
    assert len(probs) == 1 and "nested deeper than" in probs[0]


def test_alias_loop_and_oversized_file(tmp_path):
    loop = problems_of(write(tmp_path, "load: &x [1, *x]\n", "loop.yaml"))
    assert len(loop) == 1 and "a loop" in loop[0]
    big = write(tmp_path, "# " + "x" * (1 << 20) + "\n", "big.yaml")
    assert problems_of(big) == [f"{big}: larger than 1024 KiB; a study file or catalog is far smaller"]


def test_study_named_dot_dot_writes_nothing(tmp_path, capsys, monkeypatch):
    from optmatch.cli.main import main

    monkeypatch.chdir(tmp_path)
    study = write(tmp_path, BASE + MASK + "name: '..'\nsearch: {trials: 1, population: 8, generations: 1}\n")
    before = sorted(p.name for p in tmp_path.rglob("*"))
    assert main(["check", str(study)]) == 2
    assert main(["run", str(study), "--out", str(tmp_path / "results"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "name: '..' names a folder above or at the results folder" in err and "Traceback" not in err
    assert sorted(p.name for p in tmp_path.rglob("*")) == before  # nothing written, not even results/


def test_results_path_guard():
    from optmatch.io.paths import PathError, child_path

    root = Path("/tmp/results-root")
    assert child_path(root, "demo-whip") == root / "demo-whip"
    for name in ("..", ".", "", "a/b", "../x", "/etc", "a\nb", "a\x00b", "x" * 101):
        with pytest.raises(PathError):
            child_path(root, name)


def test_results_path_guard_follows_links(tmp_path):
    from optmatch.io.paths import PathError, child_path

    outside = tmp_path / "elsewhere"
    outside.mkdir()
    root = tmp_path / "results"
    root.mkdir()
    (root / "study").symlink_to(outside)
    with pytest.raises(PathError, match="outside the results folder"):
        child_path(root, "study")


# ------------------------------------------------------------------ issue: easy to write, every problem at once


def test_four_problems_in_one_check(tmp_path, capsys):
    from optmatch.cli.main import main

    path = write(tmp_path, """\
        name: four
        laod: {impedance: 50}
        load: {touchstone: missing.s1p}
        mask:
          segments:
            - {from: 144mhz, to: 148MHz, return_loss: 15}
        network:
          elements:
            - line: {length: 90deg, cable: RG213}
        """)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err == [
        f"{path}:2: laod: unknown key; did you mean 'load'? (allowed: name, description, system, reference, load, "
        "loads, mask, network, alternatives, search, shelf, drive, tolerance)",
        f"{path}:3: load.touchstone: {tmp_path / 'missing.s1p'}: file not found",
        f"{path}:6: mask.segments[0].from: '144mhz': did you mean 144 MHz? (m is milli, M is mega)",
        f"{path}:9: network.elements[0].line.cable: unknown cable 'RG213'; did you mean 'RG-213-class'? "
        "(known: RG-58-class, RG-213-class, RG-174-class, foam-10mm, RG-59-class, RG-6-class, semi-rigid-141; "
        "see optmatch cables)",
    ]


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        (BASE + MASK + "serch: {trials: 3}\n", "serch: unknown key; did you mean 'search'?"),
        (GOOD_LOAD + MASK + "network: {template: dubble_stub}\n",
         "network.template: unknown template 'dubble_stub'; did you mean 'double_stub'?"),
        (GOOD_LOAD + MASK + "network: {elements: [shunt_stub: {length: 10deg, end: opne}]}\n",
         "network.elements[0].shunt_stub.end: 'opne' is not allowed; expected 'open', 'short' or 'either'; "
         "did you mean 'open'?"),
        (GOOD_LOAD + MASK + "shelf: {allowances: {n_pair: {length: 20mm, vf: 0.7}}}\n"
         "network: {elements: [line: {length: 90deg, z0: 50, allowances: [npair]}]}\n",
         "network.elements[0].line.allowances[0]: unknown allowance 'npair'; did you mean 'n_pair'?"),
        (GOOD_LOAD + MASK + "shelf: {stock: {RG58: [{length: 60mm, count: 2}]}}\n" + GOOD_NET,
         "shelf.stock.RG58: unknown cable 'RG58'; did you mean 'RG-58-class'?"),
        (BASE + "mask: {segments: [{from: 420MHz, to: 450MHz, return_loss: 15, vswr: 1.5}]}\n",
         "mask.segments[0]: give return_loss (dB) or vswr, exactly one of the two"),
        (BASE + "mask: {segments: [{from: 420MHz, to: 450MHz}]}\n",
         "mask.segments[0]: give return_loss (dB) or vswr, exactly one of the two"),
    ],
)
def test_did_you_mean_and_exactly_one(tmp_path, text, expected):
    path = write(tmp_path, text)
    probs = problems_of(path)
    assert any(bare(line, path).startswith(expected) for line in probs), probs


def test_names_checked_even_when_the_network_is_broken(tmp_path):
    path = write(tmp_path, GOOD_LOAD + MASK + """
network:
  elements:
    - line: {length: 90, cable: RG-58-class}
    - shunt_stub: {length: 10deg, cable: RG-59-clas}
    - line: {length: 10deg, cable: [foam-10mm, RG-174], allowances: [tee]}
""")
    got = [bare(p, path) for p in problems_of(path)]
    assert got[0] == ("network.elements[0].line.length: 90 what? write e.g. 90deg or 90mm "
                      "(units: deg, wl, rad, mm, cm, m, in, ns, ps)")
    assert got[1].startswith("network.elements[1].shunt_stub.cable: unknown cable 'RG-59-clas'; "
                             "did you mean 'RG-59-class'?")
    assert got[2].startswith("network.elements[2].line.allowances[0]: unknown allowance 'tee' (known: none defined")
    assert len(got) == 3  # 'RG-174' is the bare designation of RG-174-class: accepted


def test_bare_trade_designation_finds_the_class(tmp_path, capsys):
    from optmatch.cli.main import main

    path = write(tmp_path, GOOD_LOAD + MASK + "network: {elements: [line: {length: 90deg, cable: RG-213}]}\n")
    study = load_study(path)
    assert study.problem.network.elements[0].media[0].name == "RG-213-class"
    assert study.notes == (f"{path}:6: network.elements[0].line.cable: cable 'RG-213' is the catalog class "
                           "'RG-213-class' (typical figures of that class)",)
    assert main(["check", str(path)]) == 0
    assert "is the catalog class 'RG-213-class'" in capsys.readouterr().out


def test_vswr_mask_carries_both_forms(tmp_path):
    study = load_study(write(tmp_path, BASE + """
mask:
  segments:
    - {from: 420MHz, to: 435MHz, vswr: 1.5}
    - {from: 435MHz, to: 450MHz, return_loss: 15}
"""))
    seg_vswr, seg_rl = study.problem.grid.segments
    # RL = −20·log10((s − 1)/(s + 1)) (Pozar, Microwave Engineering, 4th ed., sec. 2.3, recalled from memory)
    assert seg_vswr.vswr == 1.5 and seg_vswr.min_rl_db == pytest.approx(-20 * math.log10(0.5 / 2.5))
    assert seg_rl.vswr is None and seg_rl.min_rl_db == 15.0
    low = study.problem.grid.freq < 435e6
    assert np.allclose(study.problem.grid.min_rl_db[low], 13.979400086720377)


def test_template_takes_shelf_keys_with_role_overrides(tmp_path):
    study = load_study(write(tmp_path, GOOD_LOAD + MASK + """
shelf:
  stock: {RG-58-class: [{length: 60mm, count: 2}, {length: 90mm, count: 1}]}
  allowances: {tee: {length: 20mm, vf: 0.7}}
network:
  template: double_stub
  cable: RG-58-class
  cut: {step: 2mm, min: 10mm}
  allowances: [tee]
  stubs: {stock: true, cut: null}
"""))
    els = study.problem.network.elements
    assert [e.kind for e in els] == ["line", "shunt_stub", "line", "shunt_stub"]
    tee_s = 0.020 / (0.7 * C0)  # identity: delay = length / (vf · c)
    for e in els:
        assert e.media[0].name == "RG-58-class" and e.extra_delay == pytest.approx(tee_s)
    lines, stubs = els[0::2], els[1::2]
    for e in lines:  # cut from the reel in 2 mm steps
        assert e.cut_step_m == 0.002 and e.length_basis == "physical"
    for e in stubs:  # taken from stock
        assert e.piece_m == (0.06, 0.09)
    assert study.problem.network.stock == (("RG-58-class", 0.06, 2), ("RG-58-class", 0.09, 1))


def test_template_shelf_keys_are_checked(tmp_path):
    path = write(tmp_path, GOOD_LOAD + MASK
                 + "network: {template: stepped_line, cut: {step: 2mm}, stubs: {stock: true}}\n")
    got = [bare(p, path) for p in problems_of(path)]
    assert got == ["network: stubs: not an option of template stepped_line"]
    path = write(tmp_path, GOOD_LOAD + MASK + "network: {template: single_shunt_stub, cut: {step: 2mm}}\n", "b.yaml")
    got = [bare(p, path) for p in problems_of(path)]
    assert got == ["network: lines of template single_shunt_stub: cut and stock need a cable "
                   "(cable: NAME or a list of names)"]
