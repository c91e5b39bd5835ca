"""``optmatch explore [RESULTS_DIR] [--port N] [--no-browser] [--host ADDR]``: the local interactive explorer."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from optmatch.errors import OptmatchError

DEFAULT_PORT = 8050


class ExploreInputError(OptmatchError):
    """A results folder the explorer cannot serve (one line)."""


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("explore", help="local interactive explorer over results: overlay, scatter, live tuning",
                       description="Serve an interactive explorer over one study's results folder or a batch's "
                                   "results root, on this machine only unless --host says otherwise.")
    p.add_argument("results", type=Path, nargs="?", default=Path("results"),
                   help="a study's results folder or a results root (default results/)")
    p.add_argument("--port", type=int, default=DEFAULT_PORT, help=f"port (default {DEFAULT_PORT}; 0 picks a free one)")
    p.add_argument("--host", default=None, metavar="ADDR",
                   help="address to listen on (default 127.0.0.1, this machine only; another address prints a "
                        "warning: there is no login)")
    p.add_argument("--no-browser", action="store_true", help="do not open a browser; print the address only")
    p.set_defaults(handler=run_explore)


def run_explore(args: argparse.Namespace) -> int:
    from optmatch.explorer.server import LOOPBACK, bind, exposure_warning, open_browser

    root: Path = args.results
    if not root.is_dir():
        raise ExploreInputError(f"{root}: not a folder (give a study's results folder or a results root)")
    if not (root / "summary.json").is_file() and not any(root.glob("*/summary.json")) \
            and not (root / "batch.json").is_file():
        raise ExploreInputError(f"{root}: no study results here (no summary.json in it or in its folders)")
    if not 0 <= args.port <= 65535:
        raise ExploreInputError(f"--port {args.port}: not a port (0 to 65535)")
    host = args.host or LOOPBACK
    try:
        served = bind(root, host, args.port)
    except OSError as exc:
        raise ExploreInputError(f"--host {host} --port {args.port}: cannot listen there ({exc.strerror or exc})") \
            from None
    warning = exposure_warning(host, served.server.socket.getsockname()[1])
    if warning:
        print(warning, file=sys.stderr, flush=True)
    print(f"optmatch explorer: {served.url}  (results: {root}; Ctrl-C stops it)", flush=True)
    if not args.no_browser:
        open_browser(served.url)
    try:
        served.serve()
    except KeyboardInterrupt:
        pass
    finally:
        served.server.server_close()
    return 0


__all__ = ["register"]
