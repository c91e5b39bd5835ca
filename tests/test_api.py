"""The Python API (optmatch.api): the README's example runs as written, designs come back as
scikit-rf Networks that agree with the engine, and a study from a dict is the study from its file.

Outside references: scikit-rf (its cascade of our 2-port onto the load, checked against our
engine's walk), and the identities of a lossless reciprocal 2-port (S12 = S21 and
|S11|² + |S21|² = 1, common practice, no source).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest
import skrf
import yaml

import optmatch
from optmatch.studyfile.loader import StudyFileError, load_study

ROOT = Path(__file__).resolve().parents[1]


def readme_python_blocks() -> list[str]:
    """The ```python blocks of the README's "From Python" section, in order."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    start = text.index("### From Python")
    end = text.index("\n### ", start + 1)
    return re.findall(r"```python\n(.*?)```", text[start:end], flags=re.DOTALL)


def test_readme_python_example_runs_and_matches_the_engine(monkeypatch, capsys):
    blocks = readme_python_blocks()
    assert blocks, "the README lost its Python example"
    monkeypatch.chdir(ROOT)  # the example reads configs/data/... as a reader in a fresh clone would
    ns: dict = {}
    for block in blocks:
        exec(compile(block, "README.md", "exec"), ns)  # noqa: S102 - our own README
    out = capsys.readouterr().out
    matched, two_port, best, study = ns["matched"], ns["two_port"], ns["best"], ns["study"]
    assert isinstance(matched, skrf.Network) and matched.nports == 1
    assert isinstance(two_port, skrf.Network) and two_port.nports == 2
    # the engine's own response of the same design on the same load
    design = best.design
    engine = study.problem.response(design.vector(), design.choice, "moving").gamma[0]
    np.testing.assert_allclose(matched.f, study.problem.grid.freq)
    assert np.max(np.abs(matched.s[:, 0, 0] - engine)) <= 1e-9
    # a lossless reciprocal 2-port (common practice, no source)
    s = two_port.s
    np.testing.assert_allclose(s[:, 0, 1], s[:, 1, 0], atol=1e-12)
    np.testing.assert_allclose(np.abs(s[:, 0, 0]) ** 2 + np.abs(s[:, 1, 0]) ** 2, 1.0, atol=1e-12)
    assert result_line(out) and set(best.load_margins) == {"parked", "moving"}
    assert best.margin_db == pytest.approx(min(best.load_margins.values()), abs=1e-9)
    ns["result"].cleanup()
    assert not ns["result"].folder.exists()


def result_line(out: str) -> bool:
    return any(line.startswith(("PASS", "FAIL")) for line in out.splitlines())


def test_study_from_dict_is_the_study_from_its_file():
    path = ROOT / "configs" / "demo_whip_conditions.yaml"
    from_file = load_study(path)
    raw = yaml.safe_load(path.read_text(encoding="utf-8"))
    from_dict = optmatch.study(raw, base_dir=path.parent)
    assert from_dict.digest == from_file.digest
    np.testing.assert_array_equal(from_dict.problem.zload, from_file.problem.zload)
    assert from_dict.problem.names == from_file.problem.names == ("parked", "moving", "building")
    # and a file's path alone gives the loader's study
    assert optmatch.study(path).digest == from_file.digest


def test_loads_in_python_every_form_gives_the_same_load():
    freq = np.linspace(405e6, 465e6, 81)  # 0.75 MHz steps: every point of the mask's grid is a data point
    z = 30.0 - 20j + freq * 1e-8  # our own values
    gamma75 = (z - 75) / (z + 75)
    ntw = skrf.Network(frequency=skrf.Frequency.from_f(freq, unit="Hz"), s=gamma75.reshape(-1, 1, 1), z0=75)
    sections = dict(mask=[optmatch.Segment(420e6, 450e6, return_loss_db=15)],
                    network=[optmatch.Line((0, 180)), optmatch.ShuntStub((5, 180))])
    st = optmatch.study(loads={"net": ntw, "z": optmatch.Load.impedance(freq, z),
                               "g": optmatch.Load.reflection(freq, gamma75, z_ref_ohm=75),
                               "d": {"freq_hz": freq, "z_ohm": z}}, **sections)
    rows = st.problem.zloads
    assert st.problem.names == ("net", "z", "g", "d")
    for row in rows[1:]:
        np.testing.assert_allclose(row, rows[0], rtol=1e-12)
    on_grid = np.searchsorted(freq, st.problem.grid.freq)
    np.testing.assert_allclose(freq[on_grid], st.problem.grid.freq, rtol=1e-12)
    np.testing.assert_allclose(rows[1], z[on_grid], rtol=1e-12)

    with pytest.raises(StudyFileError) as err:
        optmatch.study(loads={"bare": (freq, z)}, **sections)
    assert err.value.problems[0].startswith("study: loads.bare: give a 1-port scikit-rf Network")
    two = skrf.Network(frequency=skrf.Frequency.from_f(freq, unit="Hz"), s=np.zeros((freq.size, 2, 2)), z0=50)
    with pytest.raises(optmatch.OptmatchError, match="loads.two: a load is a 1-port Network"):
        optmatch.study(loads={"two": two}, **sections)
    short = optmatch.Load.impedance(freq[:20], z[:20])  # 405–419 MHz: not the mask
    with pytest.raises(StudyFileError) as err:
        optmatch.study(loads={"short": short}, **sections)
    assert any("loads[0].touchstone: short (impedances (Ω) given in Python): grid 420 MHz to 450 MHz reaches "
               "outside the measured range" in p for p in err.value.problems)


def test_single_load_result_designs_and_their_networks(tmp_path):
    st = optmatch.study({"name": "spot-60-j80", "load": {"impedance": "60-j80"},
                         "mask": {"segments": [{"from": "1.9GHz", "to": "2.1GHz", "return_loss": 12}], "points": 11},
                         "network": {"template": "single_shunt_stub"},
                         "search": {"trials": 3, "seed": 1, "population": 16, "generations": 10, "keep": 2},
                         "tolerance": {"samples": 20}})
    result = optmatch.run(st, out=tmp_path)
    assert result.folder == tmp_path / "spot-60-j80" and (result.folder / "summary.json").exists()
    assert len(result.designs) == 2 and result.designs[0].rank == 1
    second = result.designs[1]
    assert second.cut_list.design_rank == 2 and len(second.cut_list.pieces) == len(second.lengths) == 2
    matched = second.matched()  # one load: no name needed
    engine = st.problem.response(second.design.vector(), second.design.choice).gamma[0]
    assert np.max(np.abs(matched.s[:, 0, 0] - engine)) <= 1e-9
    assert second.load_margins == {"load": second.margin_db}
    # the margin against the 12 dB mask, recomputed from scikit-rf's cascade (independent library)
    rl = -20 * np.log10(np.abs(matched.s[:, 0, 0]))
    assert float(np.min(rl - 12.0)) == pytest.approx(second.margin_db, abs=0.01)


def test_trimming_a_study_built_in_python_says_why_it_cannot(tmp_path):
    import subprocess
    import sys

    st = optmatch.study({"name": "no-file", "load": {"impedance": "60-j80"},
                         "mask": {"segments": [{"from": "1.9GHz", "to": "2.1GHz", "return_loss": 12}], "points": 11},
                         "network": {"template": "single_shunt_stub"},
                         "search": {"trials": 2, "seed": 1, "population": 8, "generations": 4}})
    result = optmatch.run(st, out=tmp_path)
    measured = ROOT / "configs" / "data" / "whip_uhf_invented.s1p"
    run = subprocess.run([sys.executable, "-m", "optmatch", "trim", str(result.folder), "--measured", str(measured)],
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 2 and "Traceback" not in run.stderr
    assert run.stderr.count("\n") == 1 and "built in Python (optmatch.study)" in run.stderr
