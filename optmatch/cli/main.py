"""Entry point of the ``optmatch`` command: argument parsing, dispatch and exit codes.

Exit codes: 0 success; 1 a study ran but its best design fails its mask (``run``); 2 bad input:
one line per problem on stderr, naming the file, the key and what is wrong, no traceback; 3 a bug
in optmatch (the traceback and a line asking to report it); 130 interrupted (results so far are
kept).

The one error boundary: only :class:`~optmatch.errors.OptmatchError` (and its subclasses) means bad
input.  A file or folder the operating system refuses (``OSError``: missing, no permission, disk
full) is also the user's to fix and exits 2 with one line.  Anything else reaching this function
(a ``ValueError`` from numpy, an ``AssertionError``, ...) is a bug of ours, never the user's fault.
"""

from __future__ import annotations

import argparse
import sys
import traceback
from collections.abc import Sequence

from optmatch import __version__
from optmatch.errors import OptmatchError, one_line

EXIT_BAD_INPUT = 2
EXIT_BUG = 3
EXIT_INTERRUPTED = 130
REPORT_LINE = ("optmatch: internal error: this is a bug in optmatch, not a problem with your input; please "
               "report it with the command you ran, the traceback above and, if you can, the study file")


def _parser() -> argparse.ArgumentParser:
    from optmatch.cli import batch, cables, explore, run, schema, spot, trim

    parser = argparse.ArgumentParser(
        prog="optmatch",
        description="Broadband transmission-line stub matching against a return-loss mask.",
    )
    parser.add_argument("--version", action="version", version=f"optmatch {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True
    spot.register(sub)
    run.register(sub)
    batch.register(sub)
    cables.register(sub)
    trim.register(sub)
    schema.register(sub)
    explore.register(sub)
    return parser


def _one_line(text: object) -> str:
    return one_line(text)


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the process exit code."""
    parser = _parser()
    args = parser.parse_args(argv)
    try:
        return int(args.handler(args) or 0)
    except BrokenPipeError:  # output piped into e.g. head: not an error of ours
        return 0
    except KeyboardInterrupt:
        print("optmatch: interrupted; finished trials are kept and a rerun resumes", file=sys.stderr)
        return EXIT_INTERRUPTED
    except OptmatchError as exc:
        lines = exc.problems or [str(exc)]
        for line in lines:  # one line per problem, never a traceback
            print(f"optmatch: error: {_one_line(line) or type(exc).__name__}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except OSError as exc:
        where = f"{exc.filename}: " if getattr(exc, "filename", None) else ""
        print(f"optmatch: error: {where}{_one_line(exc.strerror or exc)}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except Exception:  # noqa: BLE001 - the boundary: everything else is a bug
        traceback.print_exc(file=sys.stderr)
        print(REPORT_LINE, file=sys.stderr)
        return EXIT_BUG


if __name__ == "__main__":
    raise SystemExit(main())
