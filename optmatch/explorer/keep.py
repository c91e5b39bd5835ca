""""Keep this variant": write a tuned design beside the search's results, never over them.

The variant's Touchstone exports go to ``variants/<name>/`` and its record to ``variants.json``; then
``summary.json`` is written again with the variant listed (``variants``) and the new files' hashes added to
``files``.  Every file is written atomically, each path is checked to lie inside the results folder, and
the search's own designs and files are left exactly as they were.
"""

from __future__ import annotations

import hashlib
import threading
from dataclasses import replace
from pathlib import Path

from optmatch.domain.design import Design, worst_and_each
from optmatch.errors import OptmatchError
from optmatch.io.atomic import write_json_atomic
from optmatch.io.paths import child_path
from optmatch.outputs.document import SummaryDoc, VariantDoc, read_summary, to_json
from optmatch.outputs.network_export import export_touchstone
from optmatch.outputs.variants import (
    MAX_VARIANTS,
    VARIANTS_DIR,
    VARIANTS_JSON,
    VariantsFile,
    read_variants,
    variants_json,
)
from optmatch.running.build import power_check
from optmatch.running.results import design_doc
from optmatch.studyfile.loader import Study

_LOCK = threading.Lock()  # one keep at a time in this process


class KeepError(OptmatchError):
    """A variant that cannot be kept (one line)."""


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def keep_variant(folder: Path, study: Study, design: Design, based_on: int, alternative: str = "") -> VariantDoc:
    """Keep ``design`` (of ``study``, the network's own study; tuned from design rank ``based_on``) as the
    next variant of the results in ``folder``; returns its record.  ``summary.json`` then lists it."""
    with _LOCK:
        doc = read_summary(folder / "summary.json")
        if doc.inputs_digest != study.digest:
            raise KeepError(f"{folder / 'summary.json'}: written for other inputs than the study loaded; reload")
        have = read_variants(folder)
        if have is not None and (have.study != doc.study or have.inputs_digest != doc.inputs_digest):
            have = None  # variants of an earlier run with other inputs: start a new list
        kept = have.variants if have is not None else ()
        if len(kept) >= MAX_VARIANTS:
            raise KeepError(f"{folder / VARIANTS_JSON}: already holds {MAX_VARIANTS} variants")
        number = 1 + max((int(v.name.split("-")[1]) for v in kept), default=0)
        name = f"variant-{number}"
        where = child_path(child_path(folder, VARIANTS_DIR), name)
        per_load = {n: f"matched_input_{n}.s1p" for n in study.problem.names} if study.problem.several else None
        exported = export_touchstone(study.problem, design, where, invented=doc.invented,
                                     which=f"{name}, tuned from design rank {based_on}", per_load=per_load)
        files = tuple(f"{VARIANTS_DIR}/{name}/{p.name}" for p in exported)
        worst, each = worst_and_each(study.problem, design)
        record = design_doc(study, design, worst, based_on, power_check(study, design), each=each,
                            alternative=alternative)
        variant = VariantDoc(name=name, based_on=based_on, design=record, files=files)
        every = (*kept, variant)
        written = write_json_atomic(folder / VARIANTS_JSON,
                                    variants_json(VariantsFile(doc.study, doc.inputs_digest, every)))
        hashes = dict(doc.files)
        hashes[VARIANTS_JSON] = _sha256(written)
        for f in files:
            hashes[f] = _sha256(folder / f)
        write_json_atomic(folder / "summary.json", to_json(replace(doc, variants=every, files=hashes)))
        return variant


def listed(doc: SummaryDoc) -> list[str]:
    """The names of the variants a summary lists."""
    return [v.name for v in doc.variants]


__all__ = ["KeepError", "keep_variant", "listed"]
