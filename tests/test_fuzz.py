"""Fuzzing the input half with hypothesis: generated study files and Touchstone files go through
``optmatch check`` (in-process, output captured) and the loader.

Every case must end with exit 0, 1 or 2; on exit 2 every line of stderr is one problem naming the
file; never a traceback (exit 3 would mean a bug).  Together the tests below draw 2,200 cases;
they are derandomised so that CI runs the same cases every time (set ``OPTMATCH_FUZZ_SEEDED=0`` to
explore new ones locally).
"""

from __future__ import annotations

import atexit
import contextlib
import io
import math
import os
import shutil
import tempfile
from pathlib import Path
from typing import Any

import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from optmatch.cli.main import main
from optmatch.studyfile.loader import StudyFileError, load_study

DERANDOMIZE = os.environ.get("OPTMATCH_FUZZ_SEEDED", "1") != "0"


def fuzz_settings(n: int) -> settings:
    return settings(max_examples=n, deadline=None, derandomize=DERANDOMIZE, database=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                           HealthCheck.filter_too_much])


WORK = Path(tempfile.mkdtemp(prefix="optmatch-fuzz-"))
atexit.register(shutil.rmtree, WORK, True)
WHIP = (Path(__file__).parent / "data" / "whip_invented.s1p").read_bytes()
(WORK / "whip.s1p").write_bytes(WHIP)


def run_check(path: Path) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        rc = main(["check", str(path)])
    return rc, out.getvalue(), err.getvalue()


def assert_clean(path: Path) -> int:
    """Run ``check`` and the loader on ``path``; every outcome is a clean verdict."""
    rc, out, err = run_check(path)
    assert rc in (0, 1, 2), (rc, err)
    assert "Traceback" not in err and "Traceback" not in out, err
    if rc == 0:
        assert out.rstrip().endswith(f"{path}: ok"), out
    else:
        lines = err.splitlines()
        assert lines, "a refusal says why"
        for line in lines:  # one problem per line, each naming the file
            assert line.startswith(str(path)), line
    try:
        load_study(path)
        assert rc == 0
    except StudyFileError as exc:
        assert rc == 2 and exc.problems == err.splitlines()
    return rc


# ---------------------------------------------------------------- study files

UNITS = ["", "Hz", "kHz", "MHz", "GHz", "THz", "mhz", "mHz", "MHZ", "ghz", "deg", "wl", "rad", "mm", "m", "km",
         "in", "ns", "ps", "dB", "db", "nH", "pF", "pf", "uH", "H", "F", "W", "kW", "dBm", "s", "min", "h", "%",
         "ohm", "Ω", "k", "j", "x", "°", "λ", " MHz", "MHz MHz", ":1"]
NUMBERS = st.one_of(
    st.integers(-10**12, 10**12),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0, 1, -1, 0.5, 1.5, 2, 64, 1e-300, 1e300, 2**32, 2**63, 10**20, 144, 146, 420, 450]),
)
QUANTITY = st.builds(lambda n, u: f"{n}{u}", NUMBERS, st.sampled_from(UNITS))
ODD_TEXT = st.one_of(
    st.text(max_size=12),
    st.sampled_from(["..", ".", "a/b", "a\nb", "../../etc", "RG213", "RG-213", "RG-58-class", "foam-10mm",
                     "open", "opne", "short", "either", "double_stub", "dubble_stub", "whip.s1p", "missing.s1p",
                     "/etc/passwd", "60-j80", "60-80j", "1e18", "-j80", "true", "null", "n_pair", "tee",
                     "*.s1p", "../*.s1p", "**/*.s1p", "[a-", "share", "worst", "files", "weight"]),
)
SCALAR = st.one_of(NUMBERS, QUANTITY, ODD_TEXT, st.booleans(), st.none())
VALUE = st.recursive(SCALAR, lambda inner: st.one_of(st.lists(inner, max_size=3),
                                                     st.dictionaries(ODD_TEXT, inner, max_size=3)), max_leaves=8)

BASES: list[dict[str, Any]] = [
    {"name": "fuzz", "load": {"impedance": "60-j80"},
     "mask": {"segments": [{"from": "420MHz", "to": "450MHz", "return_loss": 15}]},
     "network": {"template": "double_stub"}},
    {"load": {"series_rlc": {"r": 25, "l": "120nH", "c": "12pF"}}, "reference": "146MHz",
     "mask": {"points": 11, "segments": [{"from": "144MHz", "to": "148MHz", "vswr": 1.5}]},
     "network": {"elements": [{"line": {"length": {"min": "0deg", "max": "180deg"}, "z0": 50, "vf": 0.66}},
                              {"shunt_stub": {"length": "30deg", "end": "either", "z0": [35, 50, 75]}},
                              {"lumped": {"connection": "shunt", "part": "c",
                                          "value": {"min": "1pF", "max": "10pF"}}}]},
     "search": {"trials": 3, "seed": 1, "population": 8, "generations": 2, "time": "5min"}},
    {"name": "shelf", "load": {"touchstone": "whip.s1p"},
     "mask": {"segments": [{"from": "410MHz", "to": "450MHz", "return_loss": 12, "max_loss": 1}]},
     "shelf": {"stock": {"RG-58-class": [{"length": "60mm", "count": 2}]},
               "allowances": {"tee": {"length": "20mm", "vf": 0.7}}},
     "drive": {"power": "100W"}, "tolerance": {"cut": "1mm", "z0": "2%", "samples": 50},
     "network": {"template": "single_shunt_stub", "cable": "RG-58", "cut": {"step": "2mm", "min": "10mm"},
                 "allowances": ["tee"], "stubs": {"stock": True, "cut": None}}},
    {"name": "choices", "load": {"impedance": "30+j20"},
     "mask": {"points": 7, "segments": [{"from": "1GHz", "to": "1.1GHz", "return_loss": 14}]},
     "shelf": {"allowances": {"tee": {"delay": "0.1ns"}}},
     "alternatives": {"one": {"template": "single_series_stub", "cable": "RG-58", "allowances": ["tee"]},
                      "two": {"elements": [{"line": {"length": {"min": "1mm", "max": "90mm"}, "z0": 50, "vf": 0.8}},
                                           {"shunt_stub": {"length": "40deg", "end": "open", "z0": 75}}]},
                      "three": {"template": "stepped_line", "sections": 2, "z0": {"min": 20, "max": 120}}}},
    {"name": "several", "loads": [{"name": "a", "touchstone": "whip.s1p"},
                                  {"name": "b", "impedance": "30-j20", "weight": 2},
                                  {"files": "whip*.s1p"}],
     "mask": {"segments": [{"from": "420MHz", "to": "450MHz", "return_loss": 15}]},
     "network": {"template": "single_shunt_stub"}, "search": {"loads": "share"}},
]


def _paths(doc: Any, prefix: tuple = ()) -> list[tuple]:
    out = [prefix]
    if isinstance(doc, dict):
        for k, v in doc.items():
            out += _paths(v, (*prefix, k))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            out += _paths(v, (*prefix, i))
    return out


def _set(doc: Any, path: tuple, value: Any, how: str) -> Any:
    if not path:
        return value if how == "set" else doc
    head, rest = path[0], path[1:]
    if isinstance(doc, dict) and head in doc:
        if not rest and how == "delete":
            return {k: v for k, v in doc.items() if k != head}
        return {**doc, head: _set(doc[head], rest, value, how)}
    if isinstance(doc, list) and isinstance(head, int) and head < len(doc):
        if not rest and how == "delete":
            return doc[:head] + doc[head + 1:]
        return doc[:head] + [_set(doc[head], rest, value, how)] + doc[head + 1:]
    return doc


@st.composite
def studies(draw) -> str:
    doc: Any = draw(st.sampled_from(BASES))
    for _ in range(draw(st.integers(0, 4))):
        paths = _paths(doc)
        path = draw(st.sampled_from(paths))
        how = draw(st.sampled_from(["set", "set", "delete", "add"]))
        if how == "add":
            node = _get(doc, path)
            if isinstance(node, dict):
                key = draw(st.one_of(ODD_TEXT, st.sampled_from(["laod", "vswr", "cable", "points", "name", "stubs"])))
                doc = _set(doc, path, {**node, key: draw(VALUE)}, "set")
        else:
            doc = _set(doc, path, draw(VALUE), how)
    text = yaml.safe_dump(doc, allow_unicode=True, sort_keys=False)
    if draw(st.integers(0, 9)) == 0:  # damage the text itself now and then
        cut = draw(st.integers(0, len(text)))
        text = text[:cut] + draw(st.sampled_from(["", ":", "[", "{", "\t", "&a", "*a", "- ", "\x00", "'"])) + text[cut:]
    return text


def _get(doc: Any, path: tuple) -> Any:
    for part in path:
        try:
            doc = doc[part]
        except (KeyError, IndexError, TypeError):
            return None
    return doc


@fuzz_settings(1200)
@given(studies())
def test_generated_study_files(text):
    path = WORK / "study.yaml"
    path.write_text(text, encoding="utf-8")
    assert_clean(path)


@fuzz_settings(400)
@given(st.text(max_size=300))
def test_arbitrary_text(text):
    path = WORK / "text.yaml"
    path.write_bytes(text.encode("utf-8", errors="surrogatepass"))
    assert_clean(path)


# ---------------------------------------------------------------- Touchstone files

ROW_VALUE = st.one_of(st.floats(-3, 3), st.sampled_from([0.0, 1.0, -1.0, 1.5, 1e-9, 1e9, math.nan, math.inf]),
                      st.floats(allow_nan=True, allow_infinity=True))


@st.composite
def touchstones(draw) -> tuple[str, str]:
    param = draw(st.sampled_from(["S", "Z", "Y", "G", "H", "s", "X"]))
    fmt = draw(st.sampled_from(["RI", "MA", "DB", "ri", "XY"]))
    unit = draw(st.sampled_from(["MHz", "GHz", "Hz", "kHz", "THz"]))
    r = draw(st.one_of(st.sampled_from(["50", "0", "-50", "75", "1e-300", "nan", "x", ""]),
                       st.floats(-100, 1000).map(lambda x: f"{x:g}")))
    option = draw(st.sampled_from([f"# {unit} {param} {fmt} R {r}", f"# {unit} {param} {fmt}", "", "#"]))
    n = draw(st.integers(0, 8))
    start = draw(st.sampled_from([400.0, 0.4, 4e8, 0.0, -5.0, 405.0]))
    step = draw(st.sampled_from([5.0, 0.005, 5e6, 0.0, -5.0, 10.0]))
    rows = []
    for k in range(n):
        f = start + k * step
        rows.append(f"{f:g} {draw(ROW_VALUE):g} {draw(ROW_VALUE):g}")
    version2 = draw(st.integers(0, 4)) == 0
    head = ["! invented fuzz data"]
    if version2:
        head += ["[Version] 2.0", option, "[Number of Ports] 1", f"[Number of Frequencies] {n}", "[Network Data]"]
        body = "\n".join(head + rows + ["[End]"])
    else:
        body = "\n".join(head + [option] + rows)
    suffix = draw(st.sampled_from([".s1p", ".s1p", ".s1p", ".s2p", ".ts", ".txt"]))
    return body + "\n", suffix


@fuzz_settings(600)
@given(touchstones(), st.sampled_from(["410MHz", "420MHz", "0.41GHz"]), st.sampled_from(["430MHz", "450MHz"]))
def test_generated_touchstone_files(ts, lo, hi):
    body, suffix = ts
    data = WORK / f"load{suffix}"
    data.write_text(body, encoding="ascii")
    path = WORK / "ts_study.yaml"
    path.write_text(f"load: {{touchstone: load{suffix}}}\nmask: {{segments: [{{from: {lo}, to: {hi}, "
                    "return_loss: 15}]}\nnetwork: {template: single_shunt_stub}\n", encoding="utf-8")
    assert_clean(path)
