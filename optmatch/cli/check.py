"""``optmatch check FILE``: validate a study file, report every problem at once, run nothing."""

from __future__ import annotations

import argparse
import sys

from optmatch.studyfile.loader import StudyFileError, load_study

EXIT_BAD_INPUT = 2


def run_check(args: argparse.Namespace) -> int:
    """Print every problem as ``file:line: key.path: problem`` (stderr, exit 2), or the notes and ``ok``."""
    try:
        study = load_study(args.file)
    except StudyFileError as exc:
        for line in exc.problems:
            print(line, file=sys.stderr)
        return EXIT_BAD_INPUT
    for note in study.notes:  # e.g. which catalog class a bare trade designation stands for
        print(f"note: {note}")
    problem = study.problem
    if problem.several:  # say what the loads are, e.g. which files a pattern matched
        names = ", ".join(problem.names[:8]) + (f" and {problem.n_loads - 8} more" if problem.n_loads > 8 else "")
        print(f"loads: {problem.n_loads} ({names})")
    print(f"{args.file}: ok")
    return 0
