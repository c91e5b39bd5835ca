"""One study from file to results folder: claim, storage, search, checks, outputs.

A study is run by one process at a time: a second ``run`` of a study that is running is refused,
naming the process that runs it (``optmatch worker FILE`` adds trials to it instead).
"""

from __future__ import annotations

from pathlib import Path

from optmatch.outputs.document import SummaryDoc
from optmatch.running.alternatives import search_study
from optmatch.running.claims import claim_study_or_refuse
from optmatch.running.results import results_dir, write_results
from optmatch.running.search import ProgressFn
from optmatch.running.storage import open_storage
from optmatch.running.storage_url import from_environment
from optmatch.studyfile.loader import Study


def run_study(study: Study, out_root: Path, storage_url: str | None = None,
              progress_fn: ProgressFn | None = None) -> tuple[Path, SummaryDoc]:
    """Run or resume ``study``; write ``<out_root>/<name>/``; return the folder and summary.

    ``storage_url``: a database URL or journal path (default: ``$OPTMATCH_STORAGE``, else the
    study's own journal).  Raises :class:`~optmatch.running.claims.Busy` when another process runs
    the study.
    """
    folder = results_dir(study, out_root)
    with claim_study_or_refuse(folder, study.problem.name, study.path):
        storage = open_storage(from_environment(storage_url), folder)
        outcome = search_study(study, storage, progress=progress_fn)
        warnings: list[str] = []
        return write_results(study, outcome, out_root, warnings)
