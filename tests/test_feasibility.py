"""The ceiling: Bode–Fano limits of the four simple loads, worked by hand, and the search below them."""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import optuna
import pytest
import yaml

from optmatch.running.search import run_search
from optmatch.studyfile.loader import load_study

REPO = Path(__file__).resolve().parent.parent
NP_TO_DB = 20 / math.log(10)


def _study(tmp_path: Path, text: str, name: str = "study.yaml"):
    path = tmp_path / name
    path.write_text(text)
    return load_study(path)


def _feas(tmp_path: Path, load: str, lo: str, hi: str, rl: float = 10.0):
    st = _study(tmp_path, f"""
load: {{{load}}}
mask: {{segments: [{{from: {lo}, to: {hi}, return_loss: {rl}}}]}}
network: {{template: single_shunt_stub}}
""")
    return st.problem.feasibility()


# Each case: D. M. Pozar, Microwave Engineering, 4th ed., sec. 5.9 (recalled from memory), the
# Bode–Fano integral with |Γ| flat at Γm over f1..f2 and 1 elsewhere; the numbers are worked by hand.

def test_parallel_rc_ceiling_worked_by_hand(tmp_path):
    # ∫ ln(1/|Γ|) dω ≤ π/(RC) ⇒ ln(1/Γm) = π/(RC·2πΔf) = 1/(2RCΔf) = 1/(2·100·3e-12·200e6) = 8.3333 Np
    # ⇒ 8.3333 × 8.6859 dB/Np = 72.38 dB.
    fz = _feas(tmp_path, "parallel_rlc: {r: 100, c: 3pF}", "900MHz", "1100MHz")
    assert fz.model == "parallel RC" and fz.basis == "exact"
    assert fz.ceiling_return_loss_db == pytest.approx(72.38, abs=0.005)
    assert fz.values["r_ohm"] == pytest.approx(100) and fz.values["c_f"] == pytest.approx(3e-12)


def test_series_rc_ceiling_worked_by_hand(tmp_path):
    # ∫ ω⁻² ln(1/|Γ|) dω ≤ πRC ⇒ ln(1/Γm)·(1/ω1 − 1/ω2) = πRC ⇒ ln(1/Γm) = 2π²·R·C·f1·f2/Δf
    # = 19.7392 · 30 · 4e-12 · 410e6 · 510e6 / 100e6 = 4.9530 Np ⇒ 43.02 dB.
    fz = _feas(tmp_path, "series_rlc: {r: 30, c: 4pF}", "410MHz", "510MHz")
    assert fz.model == "series RC" and fz.basis == "exact"
    assert fz.ceiling_return_loss_db == pytest.approx(43.02, abs=0.005)


def test_series_rl_ceiling_worked_by_hand(tmp_path):
    # ∫ ln(1/|Γ|) dω ≤ πR/L ⇒ ln(1/Γm) = R/(2LΔf) = 12/(2·6e-9·400e6) = 2.5 Np ⇒ 21.71 dB.
    fz = _feas(tmp_path, "series_rlc: {r: 12, l: 6nH}", "1.6GHz", "2.0GHz")
    assert fz.model == "series RL" and fz.basis == "exact"
    assert fz.ceiling_return_loss_db == pytest.approx(21.71, abs=0.005)


def test_parallel_rl_ceiling_worked_by_hand(tmp_path):
    # ∫ ω⁻² ln(1/|Γ|) dω ≤ πL/R ⇒ ln(1/Γm) = 2π²·(L/R)·f1·f2/Δf
    # = 19.7392 · (5e-9/200) · 0.9e9 · 1.1e9 / 0.2e9 = 2.4427 Np ⇒ 21.22 dB.
    fz = _feas(tmp_path, "parallel_rlc: {r: 200, l: 5nH}", "900MHz", "1100MHz")
    assert fz.model == "parallel RL" and fz.basis == "exact"
    assert fz.ceiling_return_loss_db == pytest.approx(21.22, abs=0.005)


def test_mask_above_the_ceiling_is_called_infeasible(tmp_path):
    # Series R–L, 20 Ω and 15 nH over 880-1120 MHz: ln(1/Γm) = 20/(2·15e-9·240e6) = 2.7778 Np = 24.13 dB.
    ok = _feas(tmp_path, "series_rlc: {r: 20, l: 15nH}", "880MHz", "1120MHz", rl=20)
    too_much = _feas(tmp_path, "series_rlc: {r: 20, l: 15nH}", "880MHz", "1120MHz", rl=30)
    assert ok.ceiling_return_loss_db == pytest.approx(24.13, abs=0.005)
    assert ok.feasible and ok.demand_share == pytest.approx(20 / 24.127, rel=1e-3)
    assert not too_much.feasible
    assert "No lossless network can meet this mask" in too_much.statement()


def test_two_level_mask_demand_adds_its_pieces(tmp_path):
    # Identity: the demand is the sum over the mask's pieces of ln(1/Γreq)·Δω (series R–L weight 1):
    # 12 dB over 900-1000 MHz and 18 dB over 1000-1100 MHz against the bound πR/L.
    st = _study(tmp_path, """
load: {series_rlc: {r: 20, l: 15nH}}
mask:
  segments:
    - {from: 900MHz, to: 1000MHz, return_loss: 12}
    - {from: 1000MHz, to: 1100MHz, return_loss: 18}
network: {template: single_shunt_stub}
""")
    fz = st.problem.feasibility()
    dw = 2 * math.pi * 100e6
    expected = (12 / NP_TO_DB * dw + 18 / NP_TO_DB * dw) / (math.pi * 20 / 15e-9)
    assert fz.demand_share == pytest.approx(expected, rel=1e-9)


def test_rlc_load_takes_the_tighter_of_its_two_limits(tmp_path):
    # A series R–L–C load obeys both the series R–L and the series R–C limit (Pozar, 4th ed.,
    # sec. 5.9; the other reactance can be taken into the lossless network).  By hand, 25 Ω, 20 nH,
    # 8 pF over 380-420 MHz: R–L: ln(1/Γm) = R/(2LΔf) = 25/(2·20e-9·40e6) = 15.625 Np = 135.72 dB;
    # R–C: 2π²·R·C·f1·f2/Δf = 19.7392·25·8e-12·380e6·420e6/40e6 = 15.752 Np = 136.82 dB.
    fz = _feas(tmp_path, "series_rlc: {r: 25, l: 20nH, c: 8pF}", "380MHz", "420MHz")
    assert fz.model == "series RLC" and fz.limit == "series RL"
    assert fz.ceiling_return_loss_db == pytest.approx(135.72, abs=0.005)
    assert fz.values["l_h"] == pytest.approx(20e-9) and fz.values["c_f"] == pytest.approx(8e-12)
    assert fz.basis == "estimated" and "estimated" in fz.statement()  # not one of the four simple loads


def test_other_loads_get_an_estimate_with_its_fit_error(tmp_path):
    resistive = _feas(tmp_path, "impedance: 100", "380MHz", "420MHz")
    assert resistive.ceiling_return_loss_db is None
    spot = _feas(tmp_path, "impedance: 60-80j", "380MHz", "420MHz")  # constant X: no R–L–C is exact
    assert spot.basis == "estimated" and spot.fit_error > 1e-6
    demo = load_study(REPO / "configs" / "demo_whip.yaml").problem.feasibility()
    assert demo.basis == "estimated" and 0 < demo.fit_error < 0.1


def test_a_nearly_resistive_load_is_said_to_set_no_practical_limit(tmp_path):
    # Pozar, 4th ed., sec. 5.9 (recalled from memory), series R–L: ln(1/Γm) = R/(2LΔf) = 50/(2·0.05e-9·200e6)
    # = 2500 Np = 21715 dB: true, and useless.  No build holds more than about 60 dB (common practice).
    fz = _feas(tmp_path, "series_rlc: {r: 50, l: 0.05nH}", "1.9GHz", "2.1GHz")
    assert fz.model == "series RL" and fz.ceiling_return_loss_db == pytest.approx(2500 * NP_TO_DB, rel=1e-6)
    assert fz.statement().startswith("ceiling: no practical limit (Bode–Fano allows 21715 dB")
    kept = _feas(tmp_path, "parallel_rlc: {r: 100, c: 3pF}", "900MHz", "1100MHz")  # 72.38 dB, worked above
    assert "no practical limit" in kept.statement()
    plain = _feas(tmp_path, "series_rlc: {r: 12, l: 6nH}", "1.6GHz", "2.0GHz")  # 21.71 dB, worked above
    assert plain.statement().startswith("ceiling: 21.71 dB flat return loss")


SMALL_BUDGET = {"trials": 4, "seed": 3, "population": 24, "generations": 25}


def _bench_cases() -> list:
    sys.path.insert(0, str(REPO / "benchmarks"))
    try:
        import search as bench  # the search benchmark's cases
    finally:
        sys.path.pop(0)
    return [c for c in bench.CASES + bench.MULTIMODAL if c.study_text is not None]


@pytest.mark.parametrize("case", _bench_cases(), ids=lambda c: c.name)
def test_no_benchmark_design_exceeds_its_ceiling(tmp_path, case):
    # Bode–Fano (Pozar, 4th ed., sec. 5.9): no lossless network holds a flat return loss above the
    # ceiling; the best design of every benchmark case (small budget), checked on a 2001-point grid.
    raw = yaml.safe_load(case.study_text)
    raw["search"] = SMALL_BUDGET
    st = _study(tmp_path, yaml.safe_dump(raw), f"{case.name}.yaml")
    fz = st.problem.feasibility()
    best = run_search(st, optuna.storages.InMemoryStorage()).designs[0]
    raw["mask"]["segments"][0]["points"] = 2001  # the same study on a dense grid
    dense = _study(tmp_path, yaml.safe_dump(raw), f"{case.name}-dense.yaml").problem
    worst_rl = float(np.min(dense.response(best.vector(), best.choice).return_loss_db))
    if fz.ceiling_return_loss_db is None:
        assert fz.model == "resistive"
    else:
        assert fz.basis == "exact"
        assert worst_rl <= fz.ceiling_return_loss_db


def test_run_says_the_ceiling_before_the_search(tmp_path):
    # A mask above the ceiling: the run says so before its progress and table (and still searches).
    (tmp_path / "hard.yaml").write_text("""
name: hard
load: {series_rlc: {r: 20, l: 15nH}}
mask: {segments: [{from: 880MHz, to: 1120MHz, return_loss: 30}]}
network: {template: single_shunt_stub, end: short}
search: {trials: 1, population: 8, generations: 2}
""")
    out = subprocess.run([sys.executable, "-m", "optmatch", "run", str(tmp_path / "hard.yaml"), "--out",
                          str(tmp_path / "results")], capture_output=True, text=True, cwd=tmp_path)
    assert out.returncode == 1
    text = out.stdout
    assert "ceiling: 24.13 dB" in text
    assert text.index("No lossless network can meet this mask") < text.index("best designs")
    doc = (tmp_path / "results" / "hard" / "summary.json").read_text()
    assert '"ceiling_return_loss_db": 24.12' in doc or '"ceiling_return_loss_db": 24.13' in doc


def test_ceiling_reaches_summary_json_and_summary_md(tmp_path):
    # The series R–L case above (20 Ω, 15 nH, 880-1120 MHz): 24.13 dB worked by hand (Pozar, 4th ed.,
    # sec. 5.9, recalled from memory); the results folder carries that figure in both files.
    from optmatch.outputs.document import read_summary
    from optmatch.running.pipeline import run_study

    st = _study(tmp_path, """
name: ceiling-shown
load: {series_rlc: {r: 20, l: 15nH}}
mask: {segments: [{from: 880MHz, to: 1120MHz, return_loss: 30, points: 9}]}
network: {template: single_shunt_stub}
search: {trials: 2, population: 12, generations: 4}
tolerance: {samples: 20}
""")
    folder, _ = run_study(st, tmp_path / "results")
    doc = read_summary(folder / "summary.json")
    assert doc.feasibility is not None and doc.feasibility.basis == "exact"
    assert doc.feasibility.ceiling_return_loss_db == pytest.approx(24.13, abs=0.005)
    assert not doc.feasibility.feasible
    text = (folder / "summary.md").read_text()
    assert "24.13 dB flat return loss" in text and "No lossless network can meet this mask" in text
