"""One study from file to results folder: storage, search, checks, outputs."""

from __future__ import annotations

from pathlib import Path

from optmatch.outputs.document import SummaryDoc
from optmatch.running.alternatives import search_study
from optmatch.running.results import results_dir, write_results
from optmatch.running.search import ProgressFn
from optmatch.running.storage import open_storage
from optmatch.studyfile.loader import Study


def run_study(study: Study, out_root: Path, storage_url: str | None = None,
              progress_fn: ProgressFn | None = None) -> tuple[Path, SummaryDoc]:
    """Run or resume ``study``; write ``<out_root>/<name>/``; return the folder and summary."""
    folder = results_dir(study, out_root)
    storage = open_storage(storage_url, folder)
    outcome = search_study(study, storage, progress=progress_fn)
    warnings: list[str] = []
    return write_results(study, outcome, out_root, warnings)
