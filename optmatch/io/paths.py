"""Result paths that stay inside their root by construction.

A study's name becomes a folder under the results root; a hostile or careless name (``..``, an
absolute path, a separator, a control character) must never lead a write outside that root.
:func:`child_path` checks the name and then resolves the path (following any symbolic links that
already exist) and refuses it unless it lies strictly inside the resolved root.
"""

from __future__ import annotations

import os
import unicodedata
from pathlib import Path

from optmatch.errors import OptmatchError

MAX_NAME_CHARS = 100


class PathError(OptmatchError):
    """A name that would put a result outside its root folder (one-line message)."""


def name_problem(name: str) -> str | None:
    """Why ``name`` cannot be one folder name under a root, or None when it can."""
    if not isinstance(name, str) or not name:
        return "is empty"
    if len(name) > MAX_NAME_CHARS:
        return f"is {len(name)} characters long; at most {MAX_NAME_CHARS}"
    if set(name) == {"."}:
        return f"{name!r} would name the results folder itself or one above it"
    if "/" in name or "\\" in name or (os.sep in name) or (os.altsep and os.altsep in name):
        return f"{name!r} holds a path separator"
    if any(unicodedata.category(ch)[0] == "C" for ch in name):
        return f"{name!r} holds a control character"
    return None


def child_path(root: str | os.PathLike, name: str) -> Path:
    """``root / name``, refused with :class:`PathError` unless it resolves to a folder strictly inside
    ``root`` (after following existing symbolic links of both)."""
    wrong = name_problem(name)
    if wrong:
        raise PathError(f"{root}: the folder name {wrong}")
    base = Path(root)
    child = base / name
    real_base = base.resolve()
    real_child = child.resolve()
    if real_child == real_base or real_base not in real_child.parents:
        raise PathError(f"{child}: resolves to {real_child}, outside the results folder {real_base}")
    return child
