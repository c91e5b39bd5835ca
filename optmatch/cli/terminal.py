"""Terminal presentation shared by the commands: one console, table style and progress bar."""

from __future__ import annotations

import sys

from rich.console import Console
from rich.progress import (
    BarColumn,
    MofNCompleteColumn,
    Progress,
    TextColumn,
    TimeElapsedColumn,
    TimeRemainingColumn,
)
from rich.table import Table


def console(stderr: bool = False) -> Console:
    """A console writing to stdout (or stderr); plain text when not a terminal."""
    stream = sys.stderr if stderr else sys.stdout
    width = None if stream.isatty() else 160  # files and pipes get full rows, not 80 columns
    return Console(file=stream, highlight=False, soft_wrap=False, width=width)


def table(*columns: str, title: str | None = None) -> Table:
    """A compact table with right-aligned numeric columns (those after the first three)."""
    tab = Table(title=title, show_lines=False, header_style="bold")
    for i, col in enumerate(columns):
        tab.add_column(col, justify="right" if i >= 3 else "left", no_wrap=i >= 3)
    return tab


def progress() -> Progress:
    """A progress display with count, elapsed and remaining time, on stderr."""
    return Progress(
        TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TextColumn("{task.fields[status]}"),
        TimeElapsedColumn(), TimeRemainingColumn(), console=console(stderr=True), transient=False,
    )
