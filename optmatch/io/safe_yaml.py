"""Reading YAML that may be hostile: bounded size, nesting depth and alias expansion, no duplicate
keys, and the line of every key kept for messages.

PyYAML's safe loader builds no objects of its own choosing, but it shares one node for every use of
an anchor: a small file of nested aliases (the "billion laughs" shape) expands to billions of
nodes as soon as anything walks it.  Here the node graph is measured *before* any Python object
is built: the expanded node count (each alias counted as the whole subtree it stands for,
memoised per node, so the count costs the size of the file) and the nesting depth are bounded, and
recursive aliases are refused.  Every problem is one line naming the file and the line.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import yaml

from optmatch.errors import OptmatchError, one_line

MAX_BYTES = 1 << 20  # a study file or catalog is a few kB; 1 MiB is plenty
MAX_DEPTH = 48  # nesting levels of mappings and lists
MAX_NODES = 200_000  # nodes after expanding every alias


class YamlError(OptmatchError):
    """A YAML file that cannot be read safely; ``problems`` holds one line each (file first)."""

    def __init__(self, problems: list[str]) -> None:
        self.problems = [one_line(p) for p in problems]
        super().__init__("\n".join(self.problems))

    def __str__(self) -> str:
        return "\n".join(self.problems or [])


class _TooDeep(Exception):
    def __init__(self, mark: yaml.Mark | None) -> None:
        self.mark = mark


class _Loader(yaml.SafeLoader):
    """Safe loader that bounds nesting while composing and refuses a key given twice."""

    max_depth = MAX_DEPTH

    def __init__(self, stream: str) -> None:
        super().__init__(stream)
        self._depth = 0

    def compose_node(self, parent: yaml.Node | None, index: Any) -> yaml.Node | None:
        self._depth += 1
        try:
            if self._depth > self.max_depth:
                raise _TooDeep(self.peek_event().start_mark)
            return super().compose_node(parent, index)
        finally:
            self._depth -= 1


def _construct_mapping(loader: _Loader, node: yaml.MappingNode, deep: bool = False) -> dict:
    seen: set[Any] = set()
    for key_node, _ in node.value:
        if not isinstance(key_node, yaml.ScalarNode):
            continue  # a list or mapping as a key: the base constructor reports it
        key = loader.construct_object(key_node, deep=deep)
        try:
            duplicate = key in seen
        except TypeError:
            continue
        if duplicate:
            raise yaml.constructor.ConstructorError(None, None, f"key {key!r} is given twice", key_node.start_mark)
        seen.add(key)
    return yaml.SafeLoader.construct_mapping(loader, node, deep=deep)


_Loader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _construct_mapping)


@dataclass
class Document:
    """Parsed YAML ``data`` and the 1-based line of each key path (``mask.segments[0].from``)."""

    data: Any
    lines: dict[str, int] = field(default_factory=dict)

    def line_of(self, where: str) -> int | None:
        """Line of the key path ``where``, or of the nearest enclosing key that has one."""
        path = where
        while path:
            if path in self.lines:
                return self.lines[path]
            cut = max(path.rfind("."), path.rfind("["))
            path = path[:cut] if cut > 0 else ""
        return None


def _expanded_size(root: yaml.Node, shown: str) -> int:
    """Nodes in the tree once every alias is expanded (memoised per node; recursion refused)."""
    size: dict[int, int] = {}
    busy: set[int] = set()
    stack: list[tuple[yaml.Node, bool]] = [(root, False)]
    while stack:
        node, done = stack.pop()
        key = id(node)
        if done:
            busy.discard(key)
            children = _children(node)
            total = 1 + sum(size[id(c)] for c in children)
            size[key] = min(total, MAX_NODES + 1)
            continue
        if key in size:
            continue
        if key in busy:
            line = node.start_mark.line + 1
            raise YamlError([f"{shown}:{line}: an alias refers to the mapping or list that holds it (a loop)"])
        busy.add(key)
        stack.append((node, True))
        stack.extend((c, False) for c in _children(node) if id(c) not in size)
    return size[id(root)]


def _children(node: yaml.Node) -> list[yaml.Node]:
    if isinstance(node, yaml.MappingNode):
        return [n for pair in node.value for n in pair]
    if isinstance(node, yaml.SequenceNode):
        return list(node.value)
    return []


def _key_lines(root: yaml.Node) -> dict[str, int]:
    """Line of every key path in the composed tree (aliases are walked once per use)."""
    out: dict[str, int] = {}
    stack: list[tuple[yaml.Node, str]] = [(root, "")]
    while stack:
        node, path = stack.pop()
        if isinstance(node, yaml.MappingNode):
            for k, v in node.value:
                if not isinstance(k, yaml.ScalarNode):
                    continue
                sub = f"{path}.{k.value}" if path else str(k.value)
                out.setdefault(sub, k.start_mark.line + 1)
                stack.append((v, sub))
        elif isinstance(node, yaml.SequenceNode):
            for i, v in enumerate(node.value):
                sub = f"{path}[{i}]"
                out.setdefault(sub, v.start_mark.line + 1)
                stack.append((v, sub))
    return out


def parse_yaml(text: str, shown: str) -> Document:
    """Parse one YAML document safely; raises :class:`YamlError` (one line, naming ``shown``)."""
    if len(text.encode("utf-8", errors="replace")) > MAX_BYTES:
        raise YamlError([f"{shown}: larger than {MAX_BYTES // 1024} KiB; a study file or catalog is far smaller"])
    loader: _Loader | None = None
    try:
        loader = _Loader(text)
        root = loader.get_single_node()
        if root is None:
            return Document(None)
        if _expanded_size(root, shown) > MAX_NODES:
            raise YamlError([f"{shown}: aliases expand to more than {MAX_NODES:,} values; refused "
                             "(nested aliases multiply)"])
        data = loader.construct_document(root)
        return Document(data, _key_lines(root))
    except _TooDeep as exc:
        line = f":{exc.mark.line + 1}" if exc.mark is not None else ""
        raise YamlError([f"{shown}{line}: nested deeper than {MAX_DEPTH} levels; refused"]) from None
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = f":{mark.line + 1}" if mark is not None else ""
        what = " ".join(str(exc.problem or exc.context or "unreadable YAML").split())
        kind = "" if what.endswith("is given twice") else "YAML syntax error: "
        raise YamlError([f"{shown}{line}: {kind}{what}"]) from None
    except yaml.YAMLError as exc:
        what = str(getattr(exc, "problem", None) or exc).splitlines()[0]
        raise YamlError([f"{shown}: YAML syntax error: {what}"]) from None
    except RecursionError:  # a guard of last resort; the depth bound above comes first
        raise YamlError([f"{shown}: nested too deeply; refused"]) from None
    finally:
        if loader is not None:
            loader.dispose()


def read_yaml(path: str | os.PathLike, shown: str | None = None) -> Document:
    """Read and parse a YAML file; every problem (missing, too large, not text, syntax) is a
    :class:`YamlError` line naming the file."""
    p = Path(path)
    shown = str(path) if shown is None else shown
    if not p.exists():
        raise YamlError([f"{shown}: file not found"])
    if not p.is_file():
        raise YamlError([f"{shown}: not a file"])
    try:
        with p.open("rb") as fh:
            raw = fh.read(MAX_BYTES + 1)
    except OSError as exc:
        raise YamlError([f"{shown}: cannot read ({exc.strerror or exc})"]) from None
    if len(raw) > MAX_BYTES:
        raise YamlError([f"{shown}: larger than {MAX_BYTES // 1024} KiB; a study file or catalog is far smaller"])
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise YamlError([f"{shown}: not a text file (expected UTF-8 YAML)"]) from None
    return parse_yaml(text, shown)
