"""optmatch: broadband transmission-line stub matching against a return-loss mask.

The user-facing API: build a study (from a study file, or from a dict and typed objects with loads
as scikit-rf Networks or arrays), run it, and get the designs back as scikit-rf Networks
(:mod:`optmatch.api`: ``study``, ``run``, ``Load``, ``Segment``, ``Line``, ``ShuntStub``,
``SeriesStub``); the closed-form solutions; and the batched engine for custom studies.  Names are
imported on first use, so that ``import optmatch`` (and the quick ``optmatch spot``) does not pull
in optuna, matplotlib or scikit-rf.
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

_EXPORTS = {
    "Stage": "optmatch.engine",
    "evaluate": "optmatch.engine",
    "all_solutions": "optmatch.domain.closed_form",
    "double_stub": "optmatch.domain.closed_form",
    "quarter_wave": "optmatch.domain.closed_form",
    "series_stub": "optmatch.domain.closed_form",
    "shunt_stub": "optmatch.domain.closed_form",
    "Study": "optmatch.studyfile.loader",
    "StudyFileError": "optmatch.studyfile.loader",
    "check_study": "optmatch.studyfile.loader",
    "load_study": "optmatch.studyfile.loader",
    "run_study": "optmatch.running.pipeline",
    "study": "optmatch.api",
    "run": "optmatch.api",
    "Load": "optmatch.api",
    "Segment": "optmatch.api",
    "Line": "optmatch.api",
    "ShuntStub": "optmatch.api",
    "SeriesStub": "optmatch.api",
    "Result": "optmatch.api",
    "DesignResult": "optmatch.api",
    "OptmatchError": "optmatch.errors",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name: str):
    if name in _EXPORTS:
        return getattr(importlib.import_module(_EXPORTS[name]), name)
    raise AttributeError(f"module 'optmatch' has no attribute {name!r}")
