"""Figures as a planner reads them: durations, moments, masses, shares.

Every number that reaches the report or an operator sheet goes through one of
these, so no raw ISO time or Python structure is ever printed.
"""

from __future__ import annotations

from datetime import datetime

__all__ = ["duration", "moment", "clock", "share", "mass", "spools", "litres", "plural", "copy_tag"]

#: Filament is bought and loaded in 1 kg spools (common practice, no source).
SPOOL_G = 1000.0


def duration(seconds: float) -> str:
    """``'4 h 05 min'``, ``'35 min'`` or ``'2 d 3 h'`` for long spans (s in)."""
    minutes = int(round(max(seconds, 0.0) / 60.0))
    days, rest = divmod(minutes, 24 * 60)
    h, m = divmod(rest, 60)
    if days:
        return f"{days} d {h} h"
    if h:
        return f"{h} h {m:02d} min"
    return f"{m} min"


def moment(t: datetime | None) -> str:
    """``'Mon 07 Dec 13:34'`` (no seconds); ``'not scheduled'`` for None."""
    if t is None:
        return "not scheduled"
    return t.strftime("%a %d %b %H:%M")


def clock(t: datetime) -> str:
    """``'13:34'``."""
    return t.strftime("%H:%M")


def share(x: float) -> str:
    """``'55.3 %'``."""
    return f"{100.0 * x:.1f} %"


def mass(grams: float) -> str:
    """``'176 g'`` or ``'1.24 kg'``."""
    return f"{grams / 1000.0:.2f} kg" if grams >= 1000.0 else f"{grams:.0f} g"


def spools(grams: float) -> str:
    """Filament as a share of 1 kg spools: ``'0.18 spool'``."""
    n = grams / SPOOL_G
    return f"{n:.2f} spool" + ("s" if n >= 1.005 else "")


def litres(volume_mm3: float) -> str:
    """Resin volume: ``'0.12 L'`` (1 L = 1e6 mm3)."""
    return f"{volume_mm3 / 1e6:.2f} L"


def plural(n: int, word: str, many: str | None = None) -> str:
    """``'1 copy'``, ``'3 copies'``."""
    if n == 1:
        return f"1 {word}"
    return f"{n} {many or (word[:-1] + 'ies' if word.endswith('y') else word + 's')}"


def copy_tag(k: int) -> str:
    """Short tag of the k-th copy of a plate (0-based): ``'1'``, ``'2'``, ..."""
    return str(k + 1)
