"""The explorer without a browser: tuning against the engine and scikit-rf, keeping variants, the routes
that must 404, and the loopback-only listening socket.

The browser tests are in test_explorer_browser.py.  The studies are invented (tests/explorer_data.py).
"""

from __future__ import annotations

import hashlib
import http.client
import json
import re
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from explorer_data import results_copy, skrf_margin

from optmatch.cli.main import main
from optmatch.domain.tolerance import perturbed_params
from optmatch.explorer import tuning
from optmatch.explorer.app import create_app
from optmatch.explorer.keep import keep_variant
from optmatch.explorer.server import bind, exposure_warning, is_loopback
from optmatch.outputs.document import read_summary
from optmatch.outputs.variants import VARIANTS_JSON, read_variants
from optmatch.running.pipeline import run_study
from optmatch.running.reload import design_of, reload_study
from optmatch.studyfile.loader import load_study
from optmatch.units import C0


@pytest.fixture()
def root(tmp_path: Path) -> Path:
    return results_copy(tmp_path)


def _design(folder: Path, rank: int = 1):
    doc = read_summary(folder / "summary.json")
    study = reload_study(folder, doc)
    sub, design = design_of(study, doc.designs[rank - 1], "test")
    return doc, sub, design


def _parts(problem, design, lengths_mm: dict[int, float]) -> list[tuple]:
    """scikit-rf parts of a line-and-shunt-stub design with the given cable lengths (mm) per element."""
    out = []
    for i, el in enumerate(problem.network.elements):
        med = el.media[design.choice.medium[i]]
        end = ("short" if design.choice.short[i] else "open") if el.kind == "shunt_stub" else None
        out.append((el.kind, end, lengths_mm[i] * 1e-3, med.z0, med.vf))
    return out


def test_controls_are_the_build_sheet_mm_and_tuning_matches_the_engine_and_scikit_rf(root: Path) -> None:
    doc, sub, design = _design(root / "whip-small")
    problem = sub.problem
    controls = tuning.controls(problem, design)
    sheet_mm = {e.index: e.physical_m * 1e3 for e in doc.designs[0].elements}
    assert {c.element: c.value for c in controls} == pytest.approx(sheet_mm, abs=1e-9)
    assert [c.free for c in controls] == [True, True, False, True]  # the demo's fixed eighth-wave spacing line
    unchanged = tuning.tuned(problem, design, {c.key: c.value for c in controls})
    assert unchanged.u == pytest.approx(design.u, abs=1e-12)

    stub = next(c for c in controls if c.free and c.element == 1)
    new_mm = stub.value + 3.0
    got = tuning.tuned(problem, design, {stub.key: new_mm})
    # the engine, through the tolerance model's own mapping of a cut error onto a piece
    cut = np.zeros((1, len(problem.network.elements)))
    cut[0, 1] = 3e-3
    zero = np.zeros_like(cut)
    engine = float(problem.margins_of(perturbed_params(problem, design, cut, zero, zero, zero))[0])
    assert got.margin_db == pytest.approx(engine, abs=1e-9)
    # scikit-rf as the independent reference library: the same lengths cascaded as DefinedGammaZ0 lines/stubs
    lengths = dict(sheet_mm)
    lengths[1] = new_mm
    reference = skrf_margin(problem.grid.freq, problem.zload, problem.z_sys, problem.grid.min_rl_db,
                            _parts(problem, design, lengths))
    assert got.margin_db == pytest.approx(reference, abs=1e-6)
    assert got.margin_db != pytest.approx(design.margin_db, abs=1e-3)  # the move did change the response
    # outside the study's own range: clipped to it
    far = tuning.tuned(problem, design, {stub.key: stub.hi + 500.0})
    assert tuning.controls(problem, far)[1].value == pytest.approx(stub.hi, abs=1e-9)


def test_keep_variant_is_listed_and_never_touches_the_search_results(root: Path) -> None:
    folder = root / "whip-small"
    before = json.loads((folder / "summary.json").read_text(encoding="utf-8"))
    own = {name: (folder / name).read_bytes() for name in before["files"]}
    doc, sub, design = _design(folder, 2)
    stub = next(c for c in tuning.controls(sub.problem, design) if c.free and "stub" in c.label)
    variant = keep_variant(folder, sub, tuning.tuned(sub.problem, design, {stub.key: stub.value - 2.0}), 2)
    after = read_summary(folder / "summary.json")
    assert [v.name for v in after.variants] == ["variant-1"] and variant.based_on == 2
    kept = after.variants[0].design
    assert kept.elements[stub.element].physical_m * 1e3 == pytest.approx(stub.value - 2.0, abs=1e-6)
    assert kept.robustness is not None and 0.0 <= kept.robustness.yield_frac <= 1.0
    # the search's ranked designs and files are exactly as they were
    assert json.loads((folder / "summary.json").read_text(encoding="utf-8"))["designs"] == before["designs"]
    assert all((folder / name).read_bytes() == data for name, data in own.items())
    # the variant's files exist, are listed with their SHA-256, and are Touchstone files naming the variant
    for f in (*variant.files, VARIANTS_JSON):
        assert after.files[f] == hashlib.sha256((folder / f).read_bytes()).hexdigest()
    s1p = (folder / variant.files[1]).read_text(encoding="utf-8")
    assert "variant-1, tuned from design rank 2" in s1p and "INVENTED" in s1p
    keep_variant(folder, sub, design, 2)
    assert [v.name for v in read_summary(folder / "summary.json").variants] == ["variant-1", "variant-2"]
    assert len(read_variants(folder).variants) == 2
    # a later run of the unchanged study keeps listing them
    study_file = Path(after.file)
    _, again = run_study(load_study(study_file), root)
    assert [v.name for v in again.variants] == ["variant-1", "variant-2"]
    assert VARIANTS_JSON in again.files


def test_keep_variant_of_an_alternative_records_which_network_it_is(root: Path) -> None:
    folder = root / "compare-small"
    doc, sub, design = _design(folder, 1)
    name = doc.designs[0].alternative
    assert name  # a study with alternatives names the network of each design
    variant = keep_variant(folder, sub, design, 1, name)
    assert variant.design.alternative == name
    kept = read_summary(folder / "summary.json").variants[0].design
    assert kept.alternative == name and kept.margin_db == pytest.approx(doc.designs[0].margin_db, abs=1e-9)


TRAVERSALS = [
    "/files/whip-small/..%2f..%2fsecret.txt",
    "/files/whip-small/%2e%2e/%2e%2e/secret.txt",
    "/files/whip-small/..%252f..%252fsecret.txt",
    "/files/whip-small/%2e%2e%5c%2e%2e%5csecret.txt",
    "/files/..%2f/secret.txt",
    "/files/%2e%2e/secret.txt",
    "/files/whip-small/../../secret.txt",
    "/assets/..%2f..%2f..%2f..%2fsecret.txt",
    "/_dash-component-suites/dash/..%2f..%2f..%2f..%2f..%2fsecret.txt",
    "/study/..%2f..%2fsecret.txt",
    "/../../secret.txt",
    "/secret.txt",
    "/files/whip-small/search.journal",  # inside the folder, but not a file the summary lists
]


def _get(url: str, path: str, host: str | None = None) -> tuple[int, bytes]:
    m = re.match(r"http://([^:/]+):(\d+)/", url)
    assert m
    conn = http.client.HTTPConnection(m.group(1), int(m.group(2)), timeout=30)
    conn.putrequest("GET", path, skip_host=host is not None)  # the path goes out exactly as written
    if host is not None:
        conn.putheader("Host", host)
    conn.endheaders()
    resp = conn.getresponse()
    body = resp.read()
    conn.close()
    return resp.status, body


def test_path_traversal_gets_404_and_listed_files_are_served(root: Path) -> None:
    (root.parent / "secret.txt").write_text("SECRET-NOT-FOR-THE-BROWSER", encoding="utf-8")
    served = bind(root)
    served.start()
    try:
        for path in TRAVERSALS:
            status, body = _get(served.url, path)
            assert status == 404, path
            assert b"SECRET" not in body, path
        status, body = _get(served.url, "/files/whip-small/summary.md")
        assert status == 200 and body.startswith(b"# Matching study: whip-small")
        assert _get(served.url, "/")[0] == 200
        assert _get(served.url, "/", host="attacker.example:80")[0] == 404  # another name for this address
    finally:
        served.stop()


def test_flask_client_refuses_the_same_paths(root: Path) -> None:
    client = create_app(root).server.test_client()
    for path in TRAVERSALS:
        assert client.get(path).status_code == 404, path
    assert client.get("/files/whip-small/designs.csv").status_code == 200


def _listeners(port: int) -> list[str]:
    """Local addresses (hex, as the kernel lists them) of every TCP socket listening on ``port``."""
    found = []
    for table in ("/proc/net/tcp", "/proc/net/tcp6"):
        try:
            lines = Path(table).read_text().splitlines()[1:]
        except OSError:
            continue
        for line in lines:
            fields = line.split()
            addr, hexport = fields[1].split(":")
            if int(hexport, 16) == port and fields[3] == "0A":  # 0A: LISTEN
                found.append(addr)
    return found


@pytest.mark.skipif(not Path("/proc/net/tcp").exists(), reason="needs Linux /proc/net/tcp")
def test_cli_listens_on_loopback_only_by_default(root: Path) -> None:
    cmd = [sys.executable, "-c", "import sys; from optmatch.cli.main import main; sys.exit(main(sys.argv[1:]))",
           "explore", str(root), "--no-browser", "--port", "0"]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        line = proc.stdout.readline()
        m = re.search(r"http://127\.0\.0\.1:(\d+)/", line)
        assert m, line
        port = int(m.group(1))
        listening = _listeners(port)
        assert listening == ["0100007F"]  # 127.0.0.1, little-endian hex; no 0.0.0.0 and no IPv6 listener
        assert _get(m.group(0), "/")[0] == 200
    finally:
        proc.send_signal(signal.SIGINT)
        try:
            proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()
    assert proc.returncode == 0
    assert "warning" not in proc.stderr.read()


def test_exposure_warning_beyond_loopback() -> None:
    for host in ("127.0.0.1", "127.0.0.2", "::1", "localhost"):
        assert is_loopback(host) and exposure_warning(host, 8050) is None
    for host in ("0.0.0.0", "192.168.1.20", "::", "example.org"):
        text = exposure_warning(host, 8050)
        assert text is not None and text.startswith("warning:") and "no login" in text


def test_cli_refuses_a_folder_without_results(tmp_path: Path, capsys) -> None:
    assert main(["explore", str(tmp_path / "missing"), "--no-browser"]) == 2
    assert main(["explore", str(tmp_path), "--no-browser"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 2 and "no study results here" in err[1]


def test_overview_rows_come_from_the_summaries(root: Path) -> None:
    from optmatch.explorer.app import overview_rows
    from optmatch.explorer.data import Results

    rows = {r["cells"]["study"]: r for r in overview_rows(Results(root))}
    assert set(rows) == {"whip-small", "compare-small"}
    for name, row in rows.items():
        doc = read_summary(root / name / "summary.json")
        assert row["cells"]["verdict"] == doc.verdict and row["cells"]["margin"] == f"{doc.best.margin_db:+.2f}"
        assert row["order"]["margin"] == doc.best.margin_db and row["order"]["yield"] == doc.best.robustness.yield_frac
        assert row["href"] == f"/study/{name}"
    assert rows["compare-small"]["order"]["alternatives"] == 3 and rows["whip-small"]["order"]["alternatives"] is None


def test_tuned_mm_map_back_through_the_velocity_factor(root: Path) -> None:
    """An electrical-length bound (deg at the reference) holds a delay: mm = delay · VF · c (common practice,
    no source: a piece's physical length is its delay times the wave speed in the cable)."""
    _, sub, design = _design(root / "whip-small")
    problem = sub.problem
    c = tuning.controls(problem, design)[0]
    got = tuning.tuned(problem, design, {c.key: 100.0})
    delay = problem.network.delays(problem.network.values(got.vector()), got.choice)[0][0]
    assert delay * 0.66 * C0 * 1e3 == pytest.approx(100.0, abs=1e-9)


def test_sortable_rows_sort_numbers_and_text_with_blanks_last() -> None:
    from optmatch.explorer.sortable import _sorted, row

    rows = [row({"s": "b"}, {"m": 1.5}), row({"s": "A"}, {"m": None}), row({"s": "c"}, {"m": -2.0})]
    assert [r["cells"]["s"] for r in _sorted(rows, ["m", True])] == ["b", "c", "A"]
    assert [r["cells"]["s"] for r in _sorted(rows, ["m", False])] == ["c", "b", "A"]
    assert [r["cells"]["s"] for r in _sorted(rows, ["s", False])] == ["A", "b", "c"]
    assert _sorted(rows, None) == rows


def test_one_study_folder_as_the_root(root: Path) -> None:
    from optmatch.explorer.app import overview_rows
    from optmatch.explorer.data import Results

    folder = root / "compare-small"
    rows = overview_rows(Results(folder))
    assert [r["cells"]["study"] for r in rows] == ["compare-small"]
    client = create_app(folder).server.test_client()
    assert client.get("/files/compare-small/summary.md").status_code == 200
    assert client.get("/files/whip-small/summary.md").status_code == 404  # a sibling study is outside this root
    assert client.get("/files/compare-small/..%2fwhip-small%2fsummary.md").status_code == 404


def test_several_loads_and_alternatives_tune_and_keep(tmp_path: Path) -> None:
    # Our own values: two resistive-reactive loads and two alternative networks.  Identity: the tuned
    # design's margin shown is the worst of its per-load margins, each equal to a direct engine
    # evaluation on that load alone.
    study_file = tmp_path / "two_loads.yaml"
    study_file.write_text("""
name: two-loads
loads:
  - {name: a, impedance: 30-j20}
  - {name: b, impedance: 35-j15}
mask: {segments: [{from: 420MHz, to: 450MHz, return_loss: 12, points: 9}]}
alternatives:
  single: {template: single_shunt_stub, vf: 0.66}
  double: {template: double_stub, vf: 0.66}
search: {trials: 2, population: 12, generations: 4, keep: 2}
tolerance: {samples: 20}
""")
    folder, doc = run_study(load_study(study_file), tmp_path / "results")
    assert doc.several_loads and {d.alternative for d in doc.designs} == {"single", "double"}
    for rank in (1, len(doc.designs)):
        _, sub, design = _design(folder, rank)
        tuned = tuning.evaluate(sub.problem, design, doc.tolerance)
        assert len(tuned.each) == 2
        direct = [float(m) for m in sub.problem.load_margins(design.vector(), design.choice)[0]]
        assert tuned.performance.margin_db == pytest.approx(min(direct), abs=1e-9)
        assert [pf.margin_db for pf in tuned.each] == pytest.approx(direct, abs=1e-9)
        assert [lm.margin_db for lm in doc.designs[rank - 1].load_margins] == pytest.approx(direct, abs=1e-9)
        variant = keep_variant(folder, sub, design, rank, doc.designs[rank - 1].alternative)
        assert variant.design.alternative == doc.designs[rank - 1].alternative
        assert [lm.load for lm in variant.design.load_margins] == ["a", "b"]
    assert len(read_summary(folder / "summary.json").variants) == 2
    # the overview and the study page carry the per-load view
    from optmatch.explorer.app import overview_rows, study_page
    from optmatch.explorer.data import Results

    results = Results(tmp_path / "results")
    row = overview_rows(results)[0]
    assert row["cells"]["loads"] == f"{doc.designs[0].loads_met} of 2"
    page = str(study_page(results, "two-loads"))
    assert "Each load" in page and "a (dB)" in page and "b (dB)" in page
