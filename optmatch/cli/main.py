"""Entry point of the ``optmatch`` command: argument parsing, dispatch and exit codes.

Exit codes: 0 success; 1 a study ran but its best design fails its mask (``run`` only);
2 bad input (one line on stderr, no traceback); 130 interrupted (results so far are kept).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from optmatch import __version__
from optmatch.errors import OptmatchError

EXIT_BAD_INPUT = 2
EXIT_INTERRUPTED = 130


def _parser() -> argparse.ArgumentParser:
    from optmatch.cli import batch, cables, run, spot, trim

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
    return parser


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
    except (OptmatchError, ValueError, OSError) as exc:
        lines = getattr(exc, "problems", None) or [str(exc)]
        for line in lines:  # one line per problem, never a traceback
            print(f"optmatch: error: {' '.join(str(line).split()) or type(exc).__name__}", file=sys.stderr)
        return EXIT_BAD_INPUT


if __name__ == "__main__":
    raise SystemExit(main())
