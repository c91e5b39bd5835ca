"""One study from file to results folder: files, hashes, resume, Pareto mode, exit codes."""

from __future__ import annotations

import csv
import hashlib
import json
from pathlib import Path

import numpy as np
import optuna
import skrf

from optmatch.cli.main import main
from optmatch.domain.design import Design
from optmatch.domain.network import Choice
from optmatch.running.pipeline import run_study
from optmatch.studyfile.loader import load_study

STUDY = """
name: tiny
load: {impedance: 25-30j}
mask: {segments: [{from: 950MHz, to: 1050MHz, return_loss: 14}]}
network: {template: single_shunt_stub}
search: {trials: 3, seed: 1, population: 12, generations: 5}
"""


def _write(tmp_path: Path, text: str = STUDY) -> Path:
    path = tmp_path / "tiny.yaml"
    path.write_text(text)
    return path


def test_results_folder_is_complete_and_consistent(tmp_path):
    study = load_study(_write(tmp_path))
    folder, doc = run_study(study, tmp_path / "results")
    on_disk = json.loads((folder / "summary.json").read_text())
    for name in ("summary.md", "designs.csv", "return_loss.png", "smith.png", "best_network.s2p", "matched_input.s1p"):
        assert (folder / name).stat().st_size > 0
        # summary.json, written last, carries the hash of every other file
        assert on_disk["files"][name] == hashlib.sha256((folder / name).read_bytes()).hexdigest()
    assert on_disk["inputs_digest"] == study.digest
    # every reported margin is the margin of the reported design (identity)
    pb = study.problem
    for d in on_disk["designs"]:
        choice = Choice(tuple(d["choice"]["medium"]), tuple(d["choice"]["short"]))
        assert np.isclose(pb.margins(np.array(d["u"]), choice)[0], d["margin_db"], atol=1e-9)
        assert np.isclose(d["worst_return_loss_db"] - 14.0, d["margin_db"], atol=1e-9)
    rows = list(csv.DictReader((folder / "designs.csv").open()))
    assert len(rows) == len(on_disk["designs"])
    # the matched input written as Touchstone equals the design's response (scikit-rf reads it)
    best = on_disk["designs"][0]
    design = Design(Choice(tuple(best["choice"]["medium"]), tuple(best["choice"]["short"])),
                    tuple(best["u"]), best["margin_db"], best["total_length_wl"])
    s1p = skrf.Network(str(folder / "matched_input.s1p"))
    gamma = pb.response(design.vector(), design.choice).gamma[0]
    assert np.allclose(s1p.s[:, 0, 0], gamma, atol=1e-8)
    assert doc.verdict in ("PASS", "FAIL")


def test_rerun_resumes_from_the_journal(tmp_path):
    path = _write(tmp_path)
    run_study(load_study(path), tmp_path / "results")
    folder, doc = run_study(load_study(path), tmp_path / "results")
    assert doc.search.trials_complete == 3  # budget already met: nothing redone
    storage = optuna.storages.JournalStorage(optuna.storages.journal.JournalFileBackend(str(folder / "search.journal")))
    (summary,) = optuna.get_all_study_summaries(storage)
    assert summary.n_trials == 3


def test_pareto_front_is_non_dominated(tmp_path):
    text = STUDY.replace("search: {", "search: {objective: pareto, ").replace("trials: 3", "trials: 8")
    folder, doc = run_study(load_study(_write(tmp_path, text)), tmp_path / "results")
    front = [(p.margin_db, p.total_length_wl) for p in doc.pareto]
    assert len(front) >= 1 and (folder / "pareto.png").exists()
    for m, length in front:  # definition of a Pareto front: nobody is better on both counts
        assert not any(m2 >= m and l2 <= length and (m2, l2) != (m, length) for m2, l2 in front)


def test_run_exit_codes(tmp_path, capsys):
    path = _write(tmp_path)
    code = main(["run", str(path), "--out", str(tmp_path / "r"), "--quiet"])
    doc = json.loads((tmp_path / "r" / "tiny" / "summary.json").read_text())
    assert code == (0 if doc["verdict"] == "PASS" else 1)
    impossible = STUDY.replace("return_loss: 14", "return_loss: 80").replace("name: tiny", "name: hard")
    assert main(["run", str(_write(tmp_path, impossible)), "--out", str(tmp_path / "r"), "--quiet"]) == 1
