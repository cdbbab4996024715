"""Small typed readers for YAML mappings that collect problems instead of raising.

A reader takes a mapping, its key path and the :class:`~packer.intake.source.Located`
document, checks one key, appends a :class:`~packer.intake.source.Problem` when the
value is missing or of the wrong kind, and returns a usable value (or None).
"""

from __future__ import annotations

import math
import re
import unicodedata
from datetime import date, datetime
from typing import Any

from packer.limits import env_name, limits
from packer.intake.source import Located, Problem, Tagged, key_path, shown

__all__ = ["Reader", "bad_characters"]

_MISSING = object()


class Reader:
    """Collects problems while reading one YAML document."""

    def __init__(self, doc: Located) -> None:
        self.doc = doc
        self.problems: list[Problem] = []
        self.warnings: set[int] = set()     # indices into problems that do not refuse anything
        self.limits = limits()

    def report(self, where: str, message: str) -> None:
        self.problems.append(self.doc.problem(where, message))

    def warn(self, where: str, message: str) -> None:
        """A problem worth saying that does not keep anything out of the plan."""
        self.warnings.add(len(self.problems))
        self.report(where, f"warning: {message}")

    def mark(self) -> int:
        """A point in the problem list, for :meth:`errors_since`."""
        return len(self.problems)

    def errors_since(self, mark: int) -> list[Problem]:
        """Problems (not warnings) reported since ``mark``."""
        return [p for i, p in enumerate(self.problems[mark:], start=mark) if i not in self.warnings]

    def mapping(self, value: Any, where: str, *, allowed: set[str], required: set[str] = frozenset()) -> dict | None:
        """Check that ``value`` is a mapping with only ``allowed`` keys and all ``required`` ones."""
        if not isinstance(value, dict):
            self.report(where or "(top level)", f"must be a mapping of keys, got {_kind(value)}")
            return None
        for key in value:
            if key not in allowed:
                self.report(key_path(where, str(key)),
                            f"unknown key {shown(key)}; expected one of: {', '.join(sorted(allowed))}")
            elif key_path(where, str(key)) in self.doc.duplicates:
                self.report(key_path(where, str(key)), "written twice; say it once")
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
        text = str(value)
        bad = bad_characters(text)
        if len(text) > self.limits.text_chars:
            self.report(key_path(where, key), f"is {len(text)} characters long, more than the limit of "
                        f"{self.limits.text_chars} ({env_name('text_chars')}): {shown(text)}")
            return None
        if bad:
            self.report(key_path(where, key), f"must not contain control characters ({bad}): {shown(text)}")
            return None
        return text

    def path_text(self, m: dict, key: str, where: str) -> str | None:
        """A file path as written: text without NUL or other control characters, of limited length."""
        if key not in m:
            return None
        value = m[key]
        at = key_path(where, key)
        if not isinstance(value, str) or not value.strip():
            self.report(at, f"must be a file path, got {_kind(value)}")
            return None
        if len(value) > self.limits.path_chars:
            self.report(at, f"is {len(value)} characters long, more than the limit of {self.limits.path_chars} "
                        f"({env_name('path_chars')})")
            return None
        bad = bad_characters(value)
        if bad:
            self.report(at, f"must not contain control characters ({bad}): {shown(value)}")
            return None
        return value

    def number(self, m: dict, key: str, where: str, default: Any = _MISSING, *,
               minimum: float | None = None, above: float | None = None,
               maximum: float | None = None, integer: bool = False) -> float | int | None:
        if key not in m:
            # absent: the default, or None for a required key (mapping() reported it)
            return None if default is _MISSING else default
        value = m[key]
        at = key_path(where, key)
        if isinstance(value, bool) or not _finite(value):
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
            if isinstance(v, bool) or not _finite(v):
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
        if not isinstance(value, str) or value not in options:
            self.report(key_path(where, key), f"must be one of: {', '.join(options)}; got {_kind(value)}")
            return None
        return value

    def flag(self, m: dict, key: str, where: str, default: Any = _MISSING) -> bool | None:
        """A yes/no value, written ``true`` or ``false``."""
        if key not in m:
            # absent: the default, or None for a required key (mapping() reported it)
            return None if default is _MISSING else default
        value = m[key]
        if not isinstance(value, bool):
            self.report(key_path(where, key), f"must be true or false, got {_kind(value)}")
            return None
        return value

    def moment(self, m: dict, key: str, where: str, default: Any = _MISSING) -> datetime | None:
        """A date and time such as ``2026-12-02T07:00`` (local time of the workshop, no zone)."""
        if key not in m:
            # absent: the default, or None for a required key (mapping() reported it)
            return None if default is _MISSING else default
        value = m[key]
        at = key_path(where, key)
        if isinstance(value, datetime):
            moment = value.replace(tzinfo=None)
        elif isinstance(value, date):
            moment = datetime.combine(value, datetime.min.time())
        elif not isinstance(value, str):
            self.report(at, f"must be a date and time like 2026-12-02T07:00, got {_kind(value)}")
            return None
        else:
            try:
                moment = datetime.fromisoformat(value).replace(tzinfo=None)
            except ValueError as exc:
                shape = _looks_like_moment(value)
                why = f"not a real date and time ({exc})" if shape else "must be a date and time like 2026-12-02T07:00"
                self.report(at, f"{why}, got {shown(value)}")
                return None
        if not YEARS[0] <= moment.year <= YEARS[1]:
            self.report(at, f"must lie in the years {YEARS[0]} to {YEARS[1]}, got {moment.isoformat(timespec='minutes')}")
            return None
        return moment


#: Years a date in a job may lie in: plans reach days and weeks ahead of their start, and
#: dates near the ends of the calendar would run past what a date can hold.
YEARS = (1970, 2199)


def bad_characters(text: str) -> str:
    """The control characters in ``text`` (NUL, escape, line breaks...) as escapes, or ''."""
    found = sorted({c for c in text if unicodedata.category(c) in ("Cc", "Cs", "Zl", "Zp")
                    or c in _INVISIBLE})
    return " ".join(repr(c)[1:-1] for c in found)


#: Format characters that reorder or hide text (bidirectional overrides and isolates, marks,
#: byte-order mark, non-characters): an id holding them can show as another id.
_INVISIBLE = frozenset("\u061c\u200e\u200f\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069"
                       "\ufeff\ufffe\uffff")


def _finite(value: Any) -> bool:
    if not isinstance(value, (int, float)):
        return False
    try:
        return math.isfinite(value)
    except OverflowError:        # a whole number too large for a float
        return False


def _looks_like_moment(text: str) -> bool:
    """Text shaped like a date (2026-02-30, 2026-12-07T25:00), so the message can say why it is none."""
    return re.fullmatch(r"\d{4}-\d{1,2}-\d{1,2}([T ]\d{1,2}:\d{1,2}(:\d{1,2}(\.\d+)?)?)?", text.strip()) is not None


def _kind(value: Any) -> str:
    if value is None:
        return "nothing"
    if isinstance(value, bool):
        return f"yes/no ({value})"
    if isinstance(value, dict):
        return "a mapping"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, Tagged):
        return str(value)
    if isinstance(value, int) and abs(value) > 10 ** 15:
        return f"a {len(str(abs(value)))}-digit number"
    return shown(value) if isinstance(value, str) else repr(value)[:80]
