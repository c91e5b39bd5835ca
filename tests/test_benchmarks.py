"""The benchmarks still run: CI does not time them, but it runs the batch benchmark at a toy size and
loads every study the benchmarks build, so a change of the study format or of an API they use fails here
and not on the night someone re-measures the README's figures."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent
BENCH = REPO / "benchmarks"


def test_the_batch_benchmark_runs_and_prints_its_figure_last() -> None:
    run = subprocess.run([sys.executable, str(BENCH / "batch.py"), "--studies", "2", "--trials", "2",
                          "--population", "8", "--generations", "4", "--repeat", "1"],
                         capture_output=True, text=True, timeout=300, cwd=REPO)
    assert run.returncode == 0, run.stderr
    last = run.stdout.strip().splitlines()[-1]
    assert re.fullmatch(r"batch throughput 2 workers vs 1: \d+\.\d\dx \(fastest of 1 runs each\)", last), last
    assert "storage bookkeeping, 1 worker:" in run.stdout


def test_every_study_the_yield_benchmark_builds_loads(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.syspath_prepend(str(BENCH))
    import yield_objective as bench

    for tag, raw in bench.STUDIES:
        by_yield = bench._load(bench.yield_variant(raw()), tmp_path, f"{tag}-yield")
        by_margin = bench._load(bench.margin_variant(raw(), 12.5), tmp_path, f"{tag}-margin")
        assert by_yield.search.objective == "yield" and by_margin.search.objective == "margin"
        assert by_margin.search.time_s == pytest.approx(12.5)
