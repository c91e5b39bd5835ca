"""`optmatch spot` end to end: JSON document, textbook values, bad input."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from optmatch.cli.main import main


def _spot_json(capsys, *args: str) -> dict:
    assert main(["spot", *args, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def _topology(doc: dict, name: str) -> dict:
    return next(t for t in doc["topologies"] if t["topology"] == name)


def test_shunt_stub_solutions_match_textbook(capsys):
    doc = _spot_json(capsys, "--load", "60-j80", "--freq", "2GHz")
    shunt = _topology(doc, "shunt_stub")
    short = [s for s in shunt["solutions"] if s["elements"][1]["end"] == "short"]
    got = sorted((s["elements"][0]["length_wavelengths"], s["elements"][1]["length_wavelengths"]) for s in short)
    # Pozar, Microwave Engineering, 4th ed., Example 5.2 (recalled from memory):
    # d = 0.110λ with a short stub of 0.095λ, or d = 0.259λ with 0.405λ.
    assert got[0] == pytest.approx((0.110, 0.095), abs=0.0015)
    assert got[1] == pytest.approx((0.259, 0.405), abs=0.0015)
    # every other topology is listed too
    assert {t["topology"] for t in doc["topologies"]} == {"shunt_stub", "series_stub", "double_stub", "quarter_wave"}


def test_every_length_in_four_views(capsys):
    doc = _spot_json(capsys, "--load", "60 - j80", "--freq", "2 GHz", "--vf", "0.66")
    el = _topology(doc, "shunt_stub")["solutions"][0]["elements"][0]
    wl = el["length_wavelengths"]
    # identities: 360° per wavelength; delay = λ-fraction / f; metres = fraction · vf · c / f
    assert el["length_deg"] == pytest.approx(360.0 * wl)
    assert el["length_ns"] == pytest.approx(wl / 2e9 * 1e9)
    assert el["length_m"] == pytest.approx(wl * 0.66 * 299_792_458.0 / 2e9)


def test_load_forms_agree(capsys):
    docs = [_spot_json(capsys, "--load", form, "--freq", "2GHz") for form in ("60-80j", "60-j80", "60 - j80")]
    assert docs[0] == docs[1] == docs[2]


def test_unmatchable_double_stub_reports_load_line(capsys):
    doc = _spot_json(capsys, "--load", "10+5j", "--freq", "1GHz", "--spacing", "45deg")
    dbl = _topology(doc, "double_stub")
    assert dbl["matchable"] is False
    assert dbl["min_load_line_wavelengths"] > 0
    # with that load-side line the double stub becomes matchable
    wl = dbl["min_load_line_wavelengths"] + 1e-4
    doc2 = _spot_json(capsys, "--load", "10+5j", "--freq", "1GHz", "--spacing", "45deg", "--load-line", f"{wl}wl")
    assert _topology(doc2, "double_stub")["matchable"] is True


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["--load", "60-j80", "--freq", "0Hz"], "--freq"),
        (["--load", "60-j80", "--freq=-2GHz"], "--freq"),
        (["--load", "60-j80", "--freq", "2GHzz"], "--freq"),
        (["--load", "60-j80", "--freq", "2GHz", "--vf", "1.3"], "--vf"),
        (["--load", "60-j80", "--freq", "2GHz", "--vf", "0"], "--vf"),
        (["--load", "60-j80", "--freq", "2GHz", "--system", "-50"], "--system"),
        (["--load", "60-80", "--freq", "2GHz"], "--load"),
        (["--load", "sixty", "--freq", "2GHz"], "--load"),
        (["--load", "60-j80", "--freq", "2GHz", "--spacing", "45"], "--spacing"),
        (["--load", "60-j80", "--freq", "146mhz"], "--freq: '146mhz': did you mean 146 MHz?"),
        (["--load", "60-j80", "--freq", "146"], "--freq: 146 what? write 146MHz"),
        (["--load", "60-j80", "--freq", "146mHz"], "millihertz"),
        (["--load", "1e18", "--freq", "146MHz"], "--load: '1e18' is outside the plausible range"),
        (["--load", "60-j80", "--freq", "146MHz", "--cable", "RG213"], "did you mean 'RG-213-class'?"),
        (["--load", "60-j80", "--freq", "146MHz", "--cable", "RG-59"], "--cable: RG-59-class is a 75 Ω cable"),
        (["--load", "60-j80", "--freq", "146MHz", "--cable", "RG-58", "--vf", "0.66"], "give one of them"),
    ],
)
def test_bad_input_one_line_exit_2(capsys, args, fragment):
    assert main(["spot", *args]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and fragment in err[0] and "Traceback" not in err[0]


def test_missing_study_file_one_line(capsys, tmp_path):
    assert main(["check", str(tmp_path / "nope.yaml")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "nope.yaml" in err[0]


def test_python_dash_m_entry_point():
    out = subprocess.run([sys.executable, "-m", "optmatch", "spot", "--load", "100", "--freq", "1GHz", "--json"],
                         capture_output=True, text=True, check=True)
    qw = _topology(json.loads(out.stdout), "quarter_wave")
    # Quarter-wave transformer for a real load: Z1 = √(Z0·RL) (Pozar, 4th ed., sec. 2.5)
    z1 = max(el["z0_ohm"] for el in qw["solutions"][0]["elements"])
    assert z1 == pytest.approx((50 * 100) ** 0.5)


def test_velocity_factor_from_cable_or_free_space_warning(capsys):
    free = _spot_json(capsys, "--load", "60-j80", "--freq", "146MHz")
    assert free["velocity_factor"] == 1.0 and free["velocity_factor_source"] == "free space"
    assert "FREE-SPACE" in free["warnings"][0]
    coax = _spot_json(capsys, "--load", "60-j80", "--freq", "146MHz", "--cable", "RG-58")
    # solid-polyethylene coax: VF about 0.66 (common practice, no source); the catalog's RG-58 class says so
    assert coax["velocity_factor"] == pytest.approx(0.66) and coax["velocity_factor_source"] == "cable RG-58-class"
    assert coax["warnings"] == []
    el_free = _topology(free, "shunt_stub")["solutions"][0]["elements"][0]
    el_coax = _topology(coax, "shunt_stub")["solutions"][0]["elements"][0]
    assert el_coax["length_m"] == pytest.approx(0.66 * el_free["length_m"])  # identity: ℓ = VF · λ0 · fraction
    # The table shows the warning above everything else when neither is given.
    assert main(["spot", "--load", "60-j80", "--freq", "146MHz"]) == 0
    out = capsys.readouterr().out
    assert out.lstrip().startswith("warning: no --vf or --cable given: the mm column is a FREE-SPACE length")
    assert main(["spot", "--load", "60-j80", "--freq", "146MHz", "--vf", "0.66"]) == 0
    assert "FREE-SPACE" not in capsys.readouterr().out


def test_a_bug_is_exit_3_with_traceback_and_a_report_line(capsys, monkeypatch):
    import optmatch.cli.spot as spot

    def broken(*args, **kwargs):
        raise ValueError("operands could not be broadcast together")  # what numpy would raise

    monkeypatch.setattr(spot, "spot_document", broken)
    assert main(["spot", "--load", "60-j80", "--freq", "146MHz"]) == 3
    err = capsys.readouterr().err
    assert "Traceback" in err and "ValueError: operands could not be broadcast together" in err
    assert err.strip().splitlines()[-1].startswith("optmatch: internal error: this is a bug in optmatch")


def test_file_problem_is_exit_2_one_line(capsys, tmp_path):
    assert main(["cables", "--catalog", str(tmp_path / "none.yaml")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err == [f"optmatch: error: {tmp_path / 'none.yaml'}: catalog file not found"]
