"""Variants: designs kept from the explorer's tuning, beside the search's own results.

``variants.json`` in a study's results folder lists them (format 1): the study, the ``inputs_digest`` they
were made against, and each :class:`~optmatch.outputs.document.VariantDoc`.  Each variant's Touchstone
exports go to ``variants/<name>/``.  ``summary.json`` lists the variants too (its ``variants`` field and the
hashes in ``files``); the search's ranked designs and its files are never touched.  A later run of the same
study keeps listing the variants while its inputs are unchanged.
"""

from __future__ import annotations

import json
import re
from dataclasses import asdict, dataclass
from pathlib import Path

from pydantic import TypeAdapter, ValidationError

from optmatch.outputs.document import ResultsFileError, VariantDoc

VARIANTS_JSON = "variants.json"
VARIANTS_DIR = "variants"
VARIANTS_FORMAT = 1
MAX_VARIANTS = 1000
MAX_VARIANTS_BYTES = 64 * 2**20
VARIANT_NAME = re.compile(r"^variant-[1-9][0-9]{0,5}$")


@dataclass(frozen=True)
class VariantsFile:
    """``variants.json``."""

    study: str
    inputs_digest: str
    variants: tuple[VariantDoc, ...] = ()
    format: int = VARIANTS_FORMAT


_FILE = TypeAdapter(VariantsFile)


def read_variants(folder: Path) -> VariantsFile | None:
    """The folder's ``variants.json`` (None when there is none); a file of the wrong shape is refused."""
    path = folder / VARIANTS_JSON
    if not path.is_file():
        return None
    if path.stat().st_size > MAX_VARIANTS_BYTES:
        raise ResultsFileError(f"{path}: larger than {MAX_VARIANTS_BYTES // 2**20} MiB; not a variants file")
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
        if not isinstance(data, dict) or data.get("format") != VARIANTS_FORMAT:
            raise ResultsFileError(f"{path}: format: not the layout this optmatch reads ({VARIANTS_FORMAT})")
        got = _FILE.validate_python(data)
    except (ValueError, UnicodeDecodeError, RecursionError) as exc:
        if isinstance(exc, ResultsFileError):
            raise
        what = exc.errors(include_url=False)[0]["loc"] if isinstance(exc, ValidationError) else "not JSON"
        raise ResultsFileError(f"{path}: {what}: not a variants file") from None
    for k, v in enumerate(got.variants):
        if not VARIANT_NAME.match(v.name) or any(not _own_file(v.name, f) for f in v.files):
            raise ResultsFileError(f"{path}: variants[{k}]: a name or file that is not a variant's own")
    return got


def _own_file(name: str, file: str) -> bool:
    """Whether ``file`` is a plain file name inside ``variants/<name>/``."""
    parts = file.split("/")
    return len(parts) == 3 and parts[0] == VARIANTS_DIR and parts[1] == name and re.match(r"^[A-Za-z0-9_.-]+$",
                                                                                          parts[2]) is not None \
        and parts[2] not in (".", "..")


def variants_json(data: VariantsFile) -> dict:
    return asdict(data)


def carried_variants(folder: Path, study: str, digest: str) -> tuple[VariantDoc, ...]:
    """The variants a new run of a study keeps listing: those of ``variants.json`` made against the same
    inputs (none when the file is missing, unreadable or for other inputs)."""
    try:
        got = read_variants(folder)
    except ResultsFileError:
        return ()
    if got is None or got.study != study or got.inputs_digest != digest:
        return ()
    return got.variants


__all__ = ["MAX_VARIANTS", "VARIANTS_DIR", "VARIANTS_JSON", "VariantsFile", "carried_variants", "read_variants",
           "variants_json"]
