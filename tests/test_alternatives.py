"""Topology comparison: a study with ``alternatives:`` searches each named network and ranks across them.

The reference for the comparison table is outside the comparison code: each alternative run on its own,
from a study file that gives that network under ``network:`` (the ordinary, separately tested path).
Pieces and junctions are checked against that separate run's build sheet (its pieces and its assembly,
one step per junction), which the build layer writes by its own walk of the network.
"""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import pytest
import yaml

from optmatch.cli.main import main
from optmatch.outputs.document import read_summary
from optmatch.outputs.report import write_report
from optmatch.running.pipeline import run_study
from optmatch.studyfile.loader import StudyFileError, load_study

ROOT = Path(__file__).resolve().parents[1]
SHIPPED = ROOT / "configs" / "topology_compare.yaml"


def _alone(raw: dict, name: str, folder: Path) -> Path:
    """The shipped study file with alternative ``name`` as its one network (same name, keys, order)."""
    one = {("network" if k == "alternatives" else k): (v[name] if k == "alternatives" else v) for k, v in raw.items()}
    path = folder / f"alone_{name}.yaml"
    path.write_text(yaml.safe_dump(one, sort_keys=False), encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def compared(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, dict]:
    """The shipped comparison run once, and each of its alternatives run on its own in another root."""
    base = tmp_path_factory.mktemp("alternatives")
    folder, doc = run_study(load_study(SHIPPED), base / "together")
    raw = yaml.safe_load(SHIPPED.read_text(encoding="utf-8"))
    alone = {}
    for name in raw["alternatives"]:
        _, alone[name] = run_study(load_study(_alone(raw, name, base)), base / f"alone-{name}")
    return folder, {"doc": doc, "alone": alone, "base": base}


def test_shipped_comparison_matches_separate_runs(compared) -> None:
    folder, got = compared
    doc = read_summary(folder / "summary.json")
    assert [a.name for a in doc.alternatives] == ["single", "double", "stepped"]
    assert doc.invented  # the scenario says it is invented
    for row in doc.alternatives:
        sep = got["alone"][row.name]
        best = sep.designs[0]
        # the same search, seeded alike, in its own optuna study: the same best design
        assert row.best_margin_db == pytest.approx(best.margin_db, abs=1e-9)
        assert row.best_yield == pytest.approx(best.robustness.yield_frac, abs=1e-12)
        assert row.total_length_wl == pytest.approx(best.total_length_wl, abs=1e-12)
        assert row.trials == sep.search.trials_complete
        # pieces and junctions as the separate run's build sheet lists them
        assert sep.build is not None
        assert row.pieces == len(sep.build.pieces)
        assert row.junctions == sum(1 for step in sep.build.assembly if not step.startswith("Then "))
        # the build sheet gives each cut to 0.1 mm
        assert row.total_mm == pytest.approx(sum(p.cut_mm for p in sep.build.pieces), abs=0.05 * len(sep.build.pieces))
        assert row.verdict == sep.designs[0].verdict
        # its best design is listed among the ranked designs, tagged with the alternative
        assert doc.designs[row.best_rank - 1].alternative == row.name
    # ranked across alternatives: best margin first, and the study's verdict is the best one's
    margins = [round(d.margin_db, 2) for d in doc.designs]
    assert margins == sorted(margins, reverse=True)
    assert doc.best_margin_db == max(a.best_margin_db for a in doc.alternatives)
    assert doc.search.trials_complete == sum(a.trials for a in doc.alternatives)


def test_comparison_in_summary_md_and_batch_report(compared) -> None:
    folder, got = compared
    doc = read_summary(folder / "summary.json")
    text = (folder / "summary.md").read_text(encoding="utf-8")
    section = text.split("## Alternatives compared", 1)[1].split("\n## ", 1)[0]
    rows = [line for line in section.splitlines() if line.startswith("| ") and "---" not in line][1:]
    assert len(rows) == 3
    for line, alt in zip(rows, doc.alternatives, strict=True):
        cells = [c.strip() for c in line.strip("|").split("|")]
        assert cells[0] == alt.name
        assert float(cells[4]) == pytest.approx(alt.best_margin_db, abs=0.005)
        assert cells[8:] == [str(alt.pieces), str(alt.junctions)]
    written = write_report(folder.parent)
    report = written.markdown.read_text(encoding="utf-8")
    block = report.split("## Alternatives compared", 1)[1].split("\n## ", 1)[0]
    assert sum(1 for line in block.splitlines() if line.startswith("| topology-compare |")) == 3
    html = written.html.read_text(encoding="utf-8")
    assert 'id="alternatives"' in html and html.count("<td") > 30


def test_designs_csv_names_the_alternative(compared) -> None:
    folder, _ = compared
    head, *rows = (folder / "designs.csv").read_text(encoding="utf-8").splitlines()
    assert head.split(",")[:3] == ["rank", "alternative", "verdict"]
    assert {r.split(",")[1] for r in rows} <= {"single", "double", "stepped"}


def _write(tmp_path: Path, head: str, body: str = "") -> Path:
    path = tmp_path / "study.yaml"
    path.write_text(head.replace("    name:", "name:", 1) + textwrap.dedent(body), encoding="utf-8")
    return path


HEAD = """\
    name: alt
    load: {impedance: 60-80j}
    mask:
      points: 5
      segments:
        - {from: 1.99GHz, to: 2.01GHz, return_loss: 20}
""".replace("\n    ", "\n")


def test_network_or_alternatives_exactly_one(tmp_path: Path) -> None:
    both = _write(tmp_path, HEAD, """\
    network: {template: single_shunt_stub}
    alternatives:
      a: {template: single_shunt_stub}
    """)
    with pytest.raises(StudyFileError) as exc:
        load_study(both)
    assert exc.value.problems == [f"{both}:8: alternatives: give either network (one) or alternatives (several), "
                                  "not both"]
    neither = _write(tmp_path, HEAD)
    with pytest.raises(StudyFileError, match=r"network: required key is missing \(or give alternatives"):
        load_study(neither)
    empty = _write(tmp_path, HEAD, "network:\n")  # found by the fuzz suite: a key with no value
    with pytest.raises(StudyFileError, match=r":7: network: is empty"):
        load_study(empty)


def test_problem_inside_an_alternative_names_its_key_and_line(tmp_path: Path, capsys) -> None:
    path = _write(tmp_path, HEAD, """\
    alternatives:
      one: {template: single_shunt_stub}
      two:
        elements:
          - line: {length: 90deg, cable: RG213-ish}
      "bad name!": {template: single_shunt_stub}
    """)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert f"{path}:11: alternatives.two.elements[0].line.cable: " in err  # the cable name is unknown
    assert "alternatives.bad name!" in err


def test_alternative_study_is_the_file_with_that_network(tmp_path: Path) -> None:
    path = _write(tmp_path, HEAD, """\
    alternatives:
      single: {template: single_shunt_stub, z0: 50, vf: 1.0, end: short}
      double: {template: double_stub, z0: 50, vf: 1.0, spacing: 45deg}
    """)
    study = load_study(path)
    assert [a.name for a in study.alternatives] == ["single", "double"]
    single, double = (a.study for a in study.alternatives)
    assert len(single.problem.network.elements) == 2 and len(double.problem.network.elements) == 4
    assert single.raw["network"]["template"] == "single_shunt_stub" and "alternatives" not in single.raw
    assert study.alternative("double") is double and single.digest == study.digest
    # the load and mask are the study's: Pozar's 60 − j80 Ω at 2 GHz (4th ed., Example 5.2, recalled from memory)
    assert complex(double.problem.zload[2]) == complex(60, -80)
    assert math.isclose(double.problem.grid.freq[2], 2e9)


def test_batch_counts_every_alternatives_trials_against_their_budget(tmp_path: Path) -> None:
    # Identity: a study with N alternatives runs N searches of `trials` each, so its batch budget is N × trials
    # and a finished batch shows exactly that many complete trials.
    from optmatch.running.batch import read_entries, run_batch

    folder = tmp_path / "studies"
    folder.mkdir()
    (folder / "two.yaml").write_text("""
name: two-alternatives
load: {impedance: 30-j20}
mask: {segments: [{from: 420MHz, to: 450MHz, return_loss: 12, points: 7}]}
alternatives:
  single: {template: single_shunt_stub}
  series: {template: single_series_stub}
search: {trials: 2, population: 10, generations: 3, keep: 1}
tolerance: {samples: 10}
""")
    (entry,) = read_entries([folder / "two.yaml"])
    assert entry.trials_budget == 4
    (done,) = run_batch(folder, tmp_path / "results")
    assert done.status == "done" and done.trials_complete == done.trials_budget == 4
