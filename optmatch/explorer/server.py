"""Serving the explorer: bind (loopback by default), say where, open the browser, serve until stopped.

The server is werkzeug's threaded WSGI server, bound once to ``host:port`` (port 0: a free port the system
picks).  It answers only requests that name the address it is bound to (or ``localhost`` on loopback).
"""

from __future__ import annotations

import ipaddress
import logging
import threading
import webbrowser
from dataclasses import dataclass
from pathlib import Path

from werkzeug.serving import BaseWSGIServer, make_server

from optmatch.explorer.app import create_app

LOOPBACK = "127.0.0.1"


def is_loopback(host: str) -> bool:
    """Whether ``host`` is a loopback address (127.0.0.0/8, ::1) or ``localhost``."""
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False


def exposure_warning(host: str, port: int) -> str | None:
    """The warning printed when the explorer listens beyond this machine (None on loopback)."""
    if is_loopback(host):
        return None
    return (f"warning: listening on {host}:{port}, not only on this machine: anyone who can reach it on that port "
            "can read these results and write variants into them (there is no login). Use the default "
            f"{LOOPBACK} unless you trust every machine on that network.")


def host_names(host: str, port: int) -> set[str]:
    """The ``Host`` header values the server answers."""
    names = {f"{host}:{port}", f"[{host}]:{port}"}
    if is_loopback(host):
        names |= {f"localhost:{port}", f"{LOOPBACK}:{port}", f"[::1]:{port}"}
    return names


@dataclass
class Served:
    """A bound explorer: its WSGI server and URL."""

    server: BaseWSGIServer
    url: str

    def serve(self) -> None:
        self.server.serve_forever()

    def start(self) -> threading.Thread:
        """Serve from a background thread (tests); :meth:`stop` ends it."""
        t = threading.Thread(target=self.server.serve_forever, name="optmatch-explorer", daemon=True)
        t.start()
        return t

    def stop(self) -> None:
        self.server.shutdown()
        self.server.server_close()


def bind(root: Path, host: str = LOOPBACK, port: int = 0) -> Served:
    """The explorer over ``root``, bound to ``host:port`` (not yet serving)."""
    logging.getLogger("werkzeug").setLevel(logging.ERROR)  # no line per request
    app = create_app(root)
    server = make_server(host, port, app.server, threaded=True)
    bound = server.socket.getsockname()[1]
    app.server.config["explorer_hosts"] = host_names(host, bound)
    shown = f"[{host}]" if ":" in host else host
    return Served(server, f"http://{shown}:{bound}/")


def open_browser(url: str) -> None:
    """Open ``url`` in the user's browser, from a thread (it may take a moment)."""
    threading.Thread(target=webbrowser.open, args=(url,), daemon=True).start()


__all__ = ["LOOPBACK", "Served", "bind", "exposure_warning", "host_names", "is_loopback", "open_browser"]
