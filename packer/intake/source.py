"""Reading YAML with line numbers, and the problems found in input files.

Every loader in packer reports what is wrong as a :class:`Problem` naming the
file, the line and the key path (``orders[3].lines[0].quantity``), and collects
all problems of a file before it gives up, so a planner fixes a job in one pass.

Job files may be written by scripts from customers' orders, so reading is
guarded: the file size, the nesting depth and the number of values (aliases
expanded, so an alias bomb is refused) are limited (:mod:`packer.limits`);
YAML tags other than the plain core ones are not constructed (the value is
kept as a :class:`Tagged` marker that every reader refuses with its line and
key); a scalar that looks like a date but is none (30 February) stays text.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import yaml

from packer.errors import InputError
from packer.limits import LimitError, env_name, limits

__all__ = ["Problem", "Located", "Tagged", "load_yaml", "key_path", "shown"]

#: Tags a document may carry on a value; any other tag is refused.
PLAIN_TAGS = frozenset(f"tag:yaml.org,2002:{t}" for t in ("str", "int", "float", "bool", "null", "map", "seq"))


@dataclass(frozen=True)
class Problem:
    """One thing wrong in an input file."""

    file: str
    line: int | None
    where: str
    message: str

    def __str__(self) -> str:
        at = f"{self.file}:{self.line}" if self.line else self.file
        return f"{at}: {self.where}: {self.message}" if self.where else f"{at}: {self.message}"


@dataclass(frozen=True)
class Tagged:
    """A value written with a YAML tag packer does not accept (``!!python/object``, ``!thing``)."""

    tag: str

    def __str__(self) -> str:
        return f"a value with the YAML tag {shown(self.tag)} (tags are not accepted)"


@dataclass(frozen=True)
class Located:
    """A parsed YAML document with the line of every key path in it."""

    data: Any
    file: str
    lines: dict[str, int]
    duplicates: frozenset = field(default_factory=frozenset)   # key paths written twice

    def line_of(self, where: str) -> int | None:
        """Line of ``where``, or of its nearest enclosing key path that has one."""
        while where:
            if where in self.lines:
                return self.lines[where]
            cut = max(where.rfind("."), where.rfind("["))
            where = where[:cut] if cut > 0 else ""
        return self.lines.get("", 1)

    def problem(self, where: str, message: str) -> Problem:
        return Problem(self.file, self.line_of(where), where, message)


def shown(text: Any, *, limit: int = 80) -> str:
    """``text`` quoted for a message: control characters escaped, long text cut."""
    s = str(text)
    cut = len(s) > limit
    s = repr(s[:limit])
    return s + f"... ({len(str(text))} characters)" if cut else s


#: Characters a key is never shown with: control characters, surrogates, line separators,
#: bidirectional overrides and isolates, byte-order mark, non-characters.
_UNSHOWABLE = re.compile("[\x00-\x1f\x7f-\x9f\ud800-\udfff\u2028\u2029\u061c\u200e\u200f"
                         "\u202a-\u202e\u2066-\u2069\ufeff\ufffe\uffff]")


def key_path(parent: str, key: str | int) -> str:
    """Join a key path: ``key_path("orders", 3) == "orders[3]"``.

    A key with characters that cannot be shown safely (control characters, a
    terminal escape, a lone surrogate) or longer than 80 characters appears
    escaped and cut, so messages and reports never carry it raw.
    """
    if isinstance(key, int):
        return f"{parent}[{key}]"
    key = str(key)
    if _UNSHOWABLE.search(key) or len(key) > 80:
        key = repr(key[:80])[1:-1] + ("..." if len(key) > 80 else "")
    return f"{parent}.{key}" if parent else key


class _Builder:
    """Turns a composed node graph into plain data, counting values as aliases expand."""

    def __init__(self, path: Path, tagged: set, budget: int, max_depth: int) -> None:
        self.path, self.tagged, self.left, self.max_depth = path, tagged, budget, max_depth
        self.lines: dict[str, int] = {}
        self.duplicates: set[str] = set()
        self.budget = budget

    def convert(self, node: yaml.Node, where: str, depth: int = 0) -> Any:
        self.left -= 1
        if self.left < 0:
            raise LimitError(f"{self.path}:{node.start_mark.line + 1}: more than {self.budget} values "
                             f"(aliases expanded); limit {env_name('yaml_nodes')}")
        if depth > self.max_depth:   # an alias inside its own anchor nests without end
            raise LimitError(f"{self.path}:{node.start_mark.line + 1}: nested more than {self.max_depth} levels "
                             f"deep (aliases expanded); limit {env_name('yaml_depth')}")
        self.lines.setdefault(where, node.start_mark.line + 1)
        mark = (node.start_mark.line, node.start_mark.column)
        if mark in self.tagged and node.tag not in PLAIN_TAGS:
            return Tagged(node.tag)
        if isinstance(node, yaml.MappingNode):
            out: dict[Any, Any] = {}
            for key_node, value_node in node.value:
                key = self.key(key_node)
                sub = key_path(where, str(key))
                if key in out:
                    self.duplicates.add(sub)
                self.lines[sub] = key_node.start_mark.line + 1
                out[key] = self.convert(value_node, sub, depth + 1)
            return out
        if isinstance(node, yaml.SequenceNode):
            return [self.convert(item, key_path(where, i), depth + 1) for i, item in enumerate(node.value)]
        try:
            return _LOADER.construct_object(node, deep=True)
        except Exception:  # noqa: BLE001 - a timestamp-like text that is no date (2026-02-30) stays text
            return Tagged(node.tag) if mark in self.tagged else str(node.value)

    @staticmethod
    def key(node: yaml.Node) -> Any:
        if not isinstance(node, yaml.ScalarNode):
            return "(a mapping or list used as a key)"
        try:
            value = _LOADER.construct_object(node, deep=True) if node.tag in PLAIN_TAGS else node.value
        except Exception:  # noqa: BLE001 - as above: keep the text
            value = node.value
        return value if isinstance(value, (str, int, float, bool)) or value is None else str(node.value)


_LOADER = yaml.SafeLoader("")


def _expanded_size(root: yaml.Node, cap: int) -> int:
    """Values in the document once aliases are expanded (shared nodes counted per use),
    without expanding anything; a node inside itself counts as more than ``cap``."""
    sizes: dict[int, int] = {}
    stack = [(root, False)]
    open_nodes: set[int] = set()
    while stack:
        node, done = stack.pop()
        key = id(node)
        children = [] if isinstance(node, yaml.ScalarNode) else (
            [n for pair in node.value for n in pair] if isinstance(node, yaml.MappingNode) else list(node.value))
        if done:
            open_nodes.discard(key)
            sizes[key] = min(cap + 1, 1 + sum(sizes[id(c)] for c in children))
            continue
        if key in sizes:
            continue
        if key in open_nodes:
            return cap + 1
        open_nodes.add(key)
        stack.append((node, True))
        stack.extend((c, False) for c in children if id(c) not in sizes)
    return sizes[id(root)]


def _scan(text: str, path: Path, max_depth: int) -> set[tuple[int, int]]:
    """Check the nesting depth without building anything; return where explicit tags are."""
    depth, tagged = 0, set()
    for event in yaml.parse(text, Loader=yaml.SafeLoader):
        if isinstance(event, (yaml.MappingStartEvent, yaml.SequenceStartEvent)):
            depth += 1
            if depth > max_depth:
                raise LimitError(f"{path}:{event.start_mark.line + 1}: nested more than {max_depth} levels deep; "
                                 f"limit {env_name('yaml_depth')}")
        elif isinstance(event, (yaml.MappingEndEvent, yaml.SequenceEndEvent)):
            depth -= 1
        tag = getattr(event, "tag", None)
        if tag is not None and tag != "!":
            tagged.add((event.start_mark.line, event.start_mark.column))
    return tagged


def load_yaml(path: str | Path) -> Located:
    """Parse a YAML file, keeping the line of every key.

    Raises
    ------
    InputError
        When the file is missing or is not valid YAML; the message names the
        file and the line.
    LimitError
        When the file is larger, deeper or holds more values than the limits allow.
    """
    path = Path(path)
    lim = limits()
    try:
        with open(path, "rb") as fh:      # read at most the limit (a device or pipe has no size)
            raw = fh.read(lim.job_file_bytes + 1)
        if len(raw) > lim.job_file_bytes:
            size = max(path.stat().st_size, len(raw))
            raise LimitError(f"{path}: {size} bytes, more than the limit of {lim.job_file_bytes} "
                             f"({env_name('job_file_bytes')})")
        text = raw.decode("utf-8")
    except FileNotFoundError:
        raise InputError(f"{path}: file not found") from None
    except (OSError, UnicodeDecodeError, ValueError) as exc:
        raise InputError(f"{path}: cannot read ({exc})") from None
    try:
        tagged = _scan(text, path, lim.yaml_depth)
        node = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        at = f"{path}:{mark.line + 1}" if mark else str(path)
        reason = getattr(exc, "problem", None) or str(exc)
        raise InputError(f"{at}: not valid YAML ({reason})") from None
    if node is not None and _expanded_size(node, lim.yaml_nodes) > lim.yaml_nodes:
        raise LimitError(f"{path}: more than {lim.yaml_nodes} values once aliases are expanded; "
                         f"limit {env_name('yaml_nodes')}")
    builder = _Builder(path, tagged, lim.yaml_nodes, lim.yaml_depth)
    data = builder.convert(node, "") if node is not None else None
    return Located(data, str(path), builder.lines, frozenset(builder.duplicates))
