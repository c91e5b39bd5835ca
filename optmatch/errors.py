"""Exception types and the "did you mean" helper shared by every layer (no dependencies)."""

from __future__ import annotations

import difflib
from collections.abc import Iterable


class OptmatchError(Exception):
    """Bad input: the command line reports it as one line per problem, without a traceback, exit 2.

    ``problems`` (when set) holds one line each.  Anything that is not an ``OptmatchError`` reaching
    the command line is a bug of optmatch (exit 3, with the traceback).
    """

    problems: list[str] | None = None


def one_line(text: object) -> str:
    """``text`` as one printable line: runs of whitespace become one space, and any other character
    that is not printable (NUL, line and paragraph separators, ...) is shown escaped."""
    joined = " ".join(str(text).split())
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in joined)


def closest(word: str, options: Iterable[str], cutoff: float = 0.6) -> str | None:
    """The option closest to ``word`` by edit similarity, only when close (None otherwise).

    A case-insensitive exact match wins; then difflib's ratio, which must reach ``cutoff``.
    """
    opts = [o for o in options if isinstance(o, str)]
    if not isinstance(word, str) or not word or not opts:
        return None
    same = [o for o in opts if o.lower() == word.lower() and o != word]
    if same:
        return same[0]
    lowered = {o.lower(): o for o in opts}
    got = difflib.get_close_matches(word.lower(), list(lowered), n=1, cutoff=cutoff)
    return lowered[got[0]] if got and lowered[got[0]] != word else None


def did_you_mean(word: str, options: Iterable[str], prefix: str = "", quote: bool = False) -> str:
    """``"; did you mean <prefix><option>?"`` for the closest option, or ``""`` when none is close."""
    best = closest(word, options)
    if best is None:
        return ""
    shown = f"'{best}'" if quote else best
    return f"; did you mean {prefix}{shown}?"
