"""Results for the explorer tests, made once per test run: a small batch root with two studies.

- ``whip-small``: the invented demo whip (configs/data/whip_uhf_invented.s1p) with the demo's network, a
  smaller search (our own values, to keep the tests quick).
- ``compare-small``: the shipped topology comparison (invented), with a smaller search.

Also a scikit-rf cascade of a line-and-shunt-stub network, the independent reference for margins.
"""

from __future__ import annotations

import atexit
import functools
import shutil
import tempfile
from pathlib import Path

import numpy as np
import yaml
from skrf_reference import skrf_input_gamma

from optmatch.running.pipeline import run_study
from optmatch.studyfile.loader import load_study

ROOT = Path(__file__).resolve().parents[1]
CONFIGS = ROOT / "configs"
SMALL_SEARCH = {"trials": 4, "seed": 7, "keep": 4, "population": 24, "generations": 20}  # our own values


def _small(source: Path, name: str, folder: Path) -> Path:
    raw = yaml.safe_load(source.read_text(encoding="utf-8"))
    raw["name"] = name
    raw["search"] = dict(SMALL_SEARCH)
    load = raw.get("load", {})
    if "touchstone" in load:
        load["touchstone"] = str((source.parent / load["touchstone"]).resolve())
    path = folder / f"{name}.yaml"
    path.write_text(yaml.safe_dump(raw, sort_keys=False), encoding="utf-8")
    return path


@functools.lru_cache(maxsize=1)
def _made() -> Path:
    work = Path(tempfile.mkdtemp(prefix="optmatch-explorer-"))
    atexit.register(shutil.rmtree, work, True)
    studies = work / "studies"
    studies.mkdir()
    for source, name in ((CONFIGS / "demo_whip.yaml", "whip-small"),
                         (CONFIGS / "topology_compare.yaml", "compare-small")):
        run_study(load_study(_small(source, name, studies)), work / "results")
    return work


def results_copy(dest: Path) -> Path:
    """A fresh copy of the results root (tests that keep variants write into their own copy)."""
    out = dest / "results"
    shutil.copytree(_made() / "results", out)
    return out


def skrf_margin(freq_hz: np.ndarray, zload: np.ndarray, z_sys: float, min_rl_db: np.ndarray,
                parts: list[tuple[str, str | None, float, float, float]]) -> float:
    """Margin (dB) of a lossless network of lines and shunt stubs cascaded by scikit-rf from the load outwards.

    ``parts``: per element (kind ``line`` or ``shunt_stub``, end ``open``/``short``/None, length m, Z0 Ω, VF).
    Margin = min over the grid of (return loss − requirement), as the mask defines it.
    """
    gamma = skrf_input_gamma(freq_hz, zload, z_sys, parts)
    return float(np.min(-20.0 * np.log10(np.abs(gamma)) - min_rl_db))
