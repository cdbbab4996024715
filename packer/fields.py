"""Small typed readers for YAML mappings that collect problems instead of raising.

A reader takes a mapping, its key path and the :class:`~packer.source.Located`
document, checks one key, appends a :class:`~packer.source.Problem` when the
value is missing or of the wrong kind, and returns a usable value (or None).
"""

from __future__ import annotations

import math
from datetime import datetime
from typing import Any

from packer.source import Located, Problem, key_path

__all__ = ["Reader"]

_MISSING = object()


class Reader:
    """Collects problems while reading one YAML document."""

    def __init__(self, doc: Located) -> None:
        self.doc = doc
        self.problems: list[Problem] = []

    def report(self, where: str, message: str) -> None:
        self.problems.append(self.doc.problem(where, message))

    def mapping(self, value: Any, where: str, *, allowed: set[str], required: set[str] = frozenset()) -> dict | None:
        """Check that ``value`` is a mapping with only ``allowed`` keys and all ``required`` ones."""
        if not isinstance(value, dict):
            self.report(where or "(top level)", f"must be a mapping of keys, got {_kind(value)}")
            return None
        for key in value:
            if key not in allowed:
                self.report(key_path(where, str(key)),
                            f"unknown key; expected one of: {', '.join(sorted(allowed))}")
        for key in sorted(required - set(value)):
            self.report(where or "(top level)", f"missing required key '{key}'")
        return value

    def text(self, m: dict, key: str, where: str, default: Any = _MISSING) -> str | None:
        if key not in m:
            # absent: the default, or None for a required key (mapping() reported it)
            return None if default is _MISSING else default
        value = m[key]
        if not isinstance(value, (str, int)) or isinstance(value, bool) or str(value).strip() == "":
            self.report(key_path(where, key), f"must be a non-empty text, got {_kind(value)}")
            return None
        return str(value)

    def number(self, m: dict, key: str, where: str, default: Any = _MISSING, *,
               minimum: float | None = None, above: float | None = None,
               maximum: float | None = None, integer: bool = False) -> float | int | None:
        if key not in m:
            # absent: the default, or None for a required key (mapping() reported it)
            return None if default is _MISSING else default
        value = m[key]
        at = key_path(where, key)
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            self.report(at, f"must be a {'whole ' if integer else ''}number, got {_kind(value)}")
            return None
        if integer and value != int(value):
            self.report(at, f"must be a whole number, got {value}")
            return None
        if minimum is not None and value < minimum:
            self.report(at, f"must be at least {minimum:g}, got {value:g}")
            return None
        if above is not None and value <= above:
            self.report(at, f"must be greater than {above:g}, got {value:g}")
            return None
        if maximum is not None and value > maximum:
            self.report(at, f"must be at most {maximum:g}, got {value:g}")
            return None
        return int(value) if integer else float(value)

    def numbers(self, m: dict, key: str, where: str, *, count: int | None = None,
                above: float | None = None, default: Any = _MISSING) -> tuple[float, ...] | None:
        if key not in m:
            # absent: the default, or None for a required key (mapping() reported it)
            return None if default is _MISSING else default
        value = m[key]
        at = key_path(where, key)
        if not isinstance(value, list) or (count is not None and len(value) != count):
            want = f"a list of {count} numbers" if count else "a list of numbers"
            self.report(at, f"must be {want}, got {_kind(value)}")
            return None
        out = []
        for i, v in enumerate(value):
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                self.report(key_path(at, i), f"must be a number, got {_kind(v)}")
                return None
            if above is not None and v <= above:
                self.report(key_path(at, i), f"must be greater than {above:g}, got {v:g}")
                return None
            out.append(float(v))
        return tuple(out)

    def choice(self, m: dict, key: str, where: str, options: tuple[str, ...],
               default: Any = _MISSING) -> str | None:
        if key not in m:
            # absent: the default, or None for a required key (mapping() reported it)
            return None if default is _MISSING else default
        value = m[key]
        if value not in options:
            self.report(key_path(where, key), f"must be one of: {', '.join(options)}; got {value!r}")
            return None
        return value

    def moment(self, m: dict, key: str, where: str, default: Any = _MISSING) -> datetime | None:
        """A date and time such as ``2026-12-02T07:00`` (local time of the workshop, no zone)."""
        if key not in m:
            # absent: the default, or None for a required key (mapping() reported it)
            return None if default is _MISSING else default
        value = m[key]
        if isinstance(value, datetime):
            return value.replace(tzinfo=None)
        try:
            return datetime.fromisoformat(str(value)).replace(tzinfo=None)
        except ValueError:
            self.report(key_path(where, key),
                        f"must be a date and time like 2026-12-02T07:00, got {value!r}")
            return None


def _kind(value: Any) -> str:
    if value is None:
        return "nothing"
    if isinstance(value, bool):
        return f"yes/no ({value})"
    if isinstance(value, (dict, list)):
        return type(value).__name__.replace("dict", "a mapping").replace("list", "a list")
    return repr(value)
