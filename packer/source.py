"""Reading YAML with line numbers, and the problems found in input files.

Every loader in packer reports what is wrong as a :class:`Problem` naming the
file, the line and the key path (``orders[3].lines[0].quantity``), and collects
all problems of a file before it gives up, so a planner fixes a job in one pass.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import yaml

from packer.errors import InputError

__all__ = ["Problem", "Located", "load_yaml", "key_path"]


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
class Located:
    """A parsed YAML document with the line of every key path in it."""

    data: Any
    file: str
    lines: dict[str, int]

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


def key_path(parent: str, key: str | int) -> str:
    """Join a key path: ``key_path("orders", 3) == "orders[3]"``."""
    if isinstance(key, int):
        return f"{parent}[{key}]"
    return f"{parent}.{key}" if parent else str(key)


def _convert(node: yaml.Node, where: str, lines: dict[str, int]) -> Any:
    lines.setdefault(where, node.start_mark.line + 1)
    if isinstance(node, yaml.MappingNode):
        out: dict[Any, Any] = {}
        for key_node, value_node in node.value:
            key = yaml.SafeLoader.construct_scalar(_LOADER, key_node) if isinstance(
                key_node, yaml.ScalarNode) else str(key_node.value)
            sub = key_path(where, str(key))
            lines[sub] = key_node.start_mark.line + 1
            out[key] = _convert(value_node, sub, lines)
        return out
    if isinstance(node, yaml.SequenceNode):
        return [_convert(item, key_path(where, i), lines) for i, item in enumerate(node.value)]
    return _LOADER.construct_object(node, deep=True)


_LOADER = yaml.SafeLoader("")


def load_yaml(path: str | Path) -> Located:
    """Parse a YAML file, keeping the line of every key.

    Raises
    ------
    InputError
        When the file is missing or is not valid YAML; the message names the
        file and the line.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(f"{path}: file not found") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read ({exc})") from None
    try:
        node = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        at = f"{path}:{mark.line + 1}" if mark else str(path)
        reason = getattr(exc, "problem", None) or str(exc)
        raise InputError(f"{at}: not valid YAML ({reason})") from None
    lines: dict[str, int] = {}
    data = _convert(node, "", lines) if node is not None else None
    return Located(data, str(path), lines)
