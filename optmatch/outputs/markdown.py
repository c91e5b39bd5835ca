"""Markdown for the written outputs (summary.md, cut_list.md, report.md, study.md): one escaping rule
for any text that came from a user (names, descriptions, cable names, messages) and one table writer.

Escaped text renders as exactly what was written and cannot open raw HTML, a heading, a list, a
link, emphasis, code or a new table column; line breaks become spaces so it cannot start a block.
"""

from __future__ import annotations

import re
from collections.abc import Sequence

# CommonMark lets a backslash escape any ASCII punctuation; these are the ones that can change the
# meaning of inline text (HTML, emphasis, code, links, images, table columns, headings).
_SPECIAL = re.compile(r"([\\`*_\[\]<>#|!~&])")
_LIST_START = re.compile(r"^(\d+)([.)])")


def md(value: object) -> str:
    """``value`` as markdown text inside a line (a table cell, or after other text): special characters
    escaped, on one line."""
    return _SPECIAL.sub(r"\\\1", " ".join(str(value).split()))


def md_block(value: object) -> str:
    """``value`` as markdown text that starts a paragraph or a list item: as :func:`md`, and it cannot
    open a list, a thematic break or a setext heading either."""
    text = md(value)
    if text[:1] in ("-", "+", "="):
        text = "\\" + text
    return _LIST_START.sub(r"\1\\\2", text)


def table(head: Sequence[str], rows: Sequence[Sequence[str]], align: str) -> list[str]:
    """A markdown table; ``align`` has one letter per column (``l``, ``r`` or ``c``).

    Cells are written as given: escape user text with :func:`md` first (numbers need nothing);
    a ``|`` left in a cell is escaped here so it can never split a column.
    """
    marks = {"l": ":---", "r": "---:", "c": ":---:"}

    def cell(c: object) -> str:
        return re.sub(r"(?<!\\)\|", r"\\|", " ".join(str(c).split()))

    out = ["| " + " | ".join(cell(h) for h in head) + " |", "|" + "|".join(marks[a] for a in align) + "|"]
    out += ["| " + " | ".join(cell(c) for c in row) + " |" for row in rows]
    return out


__all__ = ["md", "md_block", "table"]
