"""The batch report: one row per study, figures from summary.json, self-contained, opened in Chromium.

The good studies match the load of Pozar's Example 5.2 (ZL = 60 − j80 Ω on 50 Ω) with a single
shorted shunt stub; D. M. Pozar, Microwave Engineering, 4th ed., Example 5.2 (recalled from memory)
matches it exactly at the design frequency, so each must be reported as meeting its mask.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import struct
import subprocess
from html.parser import HTMLParser
from pathlib import Path

import pytest
from test_storage import write_study

from optmatch.cli.main import main
from optmatch.outputs.report import write_report
from optmatch.running.batch import run_batch

CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync"]


class Rows(HTMLParser):
    """Collects the text of each ``<tr class="study">`` and every ``src``/``href`` in a page."""

    def __init__(self) -> None:
        super().__init__()
        self.rows: list[list[str]] = []
        self.links: list[str] = []
        self._in_row = False
        self._cell: list[str] | None = None

    def handle_starttag(self, tag: str, attrs: list) -> None:
        a = dict(attrs)
        self.links += [v for k, v in attrs if k in ("src", "href") and v]
        if tag == "tr" and a.get("class") == "study":
            self._in_row = True
            self.rows.append([])
        elif tag == "td" and self._in_row:
            self._cell = []

    def handle_endtag(self, tag: str) -> None:
        if tag == "td" and self._cell is not None:
            self.rows[-1].append(" ".join(" ".join(self._cell).split()))
            self._cell = None
        elif tag == "tr":
            self._in_row = False

    def handle_data(self, data: str) -> None:
        if self._cell is not None:
            self._cell.append(data)


def parse(text: str) -> Rows:
    p = Rows()
    p.feed(text)
    return p


@pytest.fixture(scope="module")
def results(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A results root from a real batch: two good studies and one broken file."""
    root = tmp_path_factory.mktemp("report")
    folder, out = root / "studies", root / "out"
    folder.mkdir()
    write_study(folder, "alpha", trials=2)
    write_study(folder, "beta", trials=2)
    (folder / "gamma.yaml").write_text("name: gamma\nload: {impedance: 50}\n", encoding="utf-8")
    run_batch(folder, out)
    write_report(out)
    return out


def test_one_row_per_study_with_figures_from_the_summaries(results: Path) -> None:
    page = parse((results / "report.html").read_text(encoding="utf-8"))
    assert len(page.rows) == 3  # three study files in the folder, one row each
    by_name = {r[0].split()[0]: r for r in page.rows}
    for name in ("alpha", "beta"):
        summary = json.loads((results / name / "summary.json").read_text())
        row = by_name[name]
        assert row[1] == "done"
        # Pozar 4th ed. Example 5.2 (recalled from memory): an exact match exists, so the mask is met.
        assert row[2] == "PASS" and summary["verdict"] == "PASS"
        assert float(row[3]) == pytest.approx(summary["best_margin_db"], abs=0.005)
        assert row[4] == "–"  # one load: no per-load column
        assert row[5].startswith(f"{summary['designs'][0]['total_length_wl']:.3f} λ")
        # the cut-list size is the number of pieces in the summary's build sheet
        assert row[6] == str(len(summary["build"]["pieces"]))
    assert by_name["gamma"][1] == "error" and "network" in by_name["gamma"][0]
    md_rows = [line for line in (results / "report.md").read_text().splitlines()
               if line.startswith("| ") and not line.startswith("| Study") and "---" not in line]
    assert len(md_rows) == 3


def test_pages_are_self_contained(results: Path) -> None:
    for page_path in [results / "report.html", *results.glob("*/study.html")]:
        text = page_path.read_text(encoding="utf-8")
        assert not re.search(r"(?:src|href)=\"(?:https?:)?//", text)  # nothing fetched from a network
        assert "<script" not in text
        for link in parse(text).links:
            assert (page_path.parent / link).exists(), f"{page_path}: broken link {link}"
    study_page = (results / "alpha" / "study.html").read_text(encoding="utf-8")
    assert 'src="return_loss.png"' in study_page and 'src="smith.png"' in study_page


def test_report_command_rewrites_both_files(results: Path, capsys: pytest.CaptureFixture) -> None:
    (results / "report.md").unlink()
    assert main(["report", str(results)]) == 0
    assert (results / "report.md").exists() and (results / "report.html").exists()
    assert main(["report", str(results / "alpha" / "nothing")]) == 2
    assert capsys.readouterr().err.count("\n") == 1


def _chromium() -> str | None:
    found = shutil.which("chromium") or shutil.which("chromium-browser")
    if found is None:
        if os.environ.get("CI"):
            pytest.fail("chromium is missing in CI (.ci/run installs the Debian package)")
        pytest.skip("chromium not installed")
    return found


def test_report_loads_in_headless_chromium(results: Path, tmp_path: Path) -> None:
    chromium = _chromium()
    base = [chromium, *CHROMIUM_FLAGS, f"--user-data-dir={tmp_path / 'profile'}"]
    url = (results / "report.html").resolve().as_uri()
    dom = subprocess.run([*base, "--dump-dom", url], capture_output=True, text=True, timeout=120)
    assert dom.returncode == 0, dom.stderr[-2000:]
    page = parse(dom.stdout)
    assert len(page.rows) == 3  # three study files, one row each, as the browser built the page
    assert "Batch report" in dom.stdout

    shot = tmp_path / "report.png"
    run = subprocess.run([*base, f"--screenshot={shot}", "--window-size=1280,900", "--hide-scrollbars", url],
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0 and shot.exists(), run.stderr[-2000:]
    head = shot.read_bytes()[:24]
    assert head[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG specification, ISO/IEC 15948)
    assert struct.unpack(">II", head[16:24]) == (1280, 900)


def _copy(results: Path, tmp_path: Path) -> Path:
    root = tmp_path / "copy"
    shutil.copytree(results, root)
    return root


def test_report_over_files_of_the_wrong_shape(results: Path, tmp_path: Path, capsys: pytest.CaptureFixture) -> None:
    root = _copy(results, tmp_path)
    doc = json.loads((root / "alpha" / "summary.json").read_text())
    doc["designs"][0]["margin_db"] = "high"
    (root / "alpha" / "summary.json").write_text(json.dumps(doc))
    (root / "batch.json").write_text(json.dumps({"studies": {"name": "alpha"}}))
    assert main(["report", str(root)]) == 2
    err = capsys.readouterr().err.splitlines()
    # one line per unreadable file, naming the file and the key; no traceback
    assert sorted(err) == sorted([
        f"optmatch: error: {root / 'batch.json'}: studies: expected a list, got {{'name': 'alpha'}}",
        f"optmatch: error: {root / 'alpha' / 'summary.json'}: designs[0].margin_db: expected a number, got 'high'",
    ])
    page = parse((root / "report.html").read_text(encoding="utf-8"))
    by_name = {r[0].split()[0]: r for r in page.rows}
    assert by_name["alpha"][1] == "error" and "designs[0].margin_db" in by_name["alpha"][0]
    assert by_name["beta"][1] == "done" and by_name["beta"][2] == "PASS"  # the rest of the report stands


def test_report_counts_a_journal_without_results_as_not_finished(results: Path, tmp_path: Path) -> None:
    root = _copy(results, tmp_path)
    (root / "batch.json").unlink()
    (root / "delta").mkdir()
    (root / "delta" / "search.journal").write_text("")
    assert main(["report", str(root)]) == 0
    page = parse((root / "report.html").read_text(encoding="utf-8"))
    by_name = {r[0].split()[0]: r for r in page.rows}
    assert by_name["delta"][1] == "not finished"
    tiles = {text: int(n) for n, text in
             re.findall(r'<div class="tile"><b>(\d+)</b><span>([^<]+)</span>', (root / "report.html").read_text())}
    assert tiles["not finished"] == 1 and tiles["studies"] == 3  # alpha, beta and delta
    assert "1 not finished" in (root / "report.md").read_text()
