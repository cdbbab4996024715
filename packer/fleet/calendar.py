"""Operator shifts: when plates can be started and cleared.

A plate may START only while an operator is there, and its parts are CLEARED
only while an operator is there, so a plate that ends at 02:00 waits for the
morning shift before the printer is free again. The ideal overnight plate
ends just as the shift begins.

A shift is the half-open interval ``[shift_start, shift_end)`` on each
working day of :class:`packer.intake.job.Calendar`; clearing a plate must fit in one
shift. Shifts that cross midnight are not supported.
"""

from __future__ import annotations

from datetime import datetime, timedelta

from packer.errors import InputError
from packer.intake.job import Calendar

__all__ = ["check_calendar", "is_open", "next_open", "clear_start", "printer_free_after",
           "shift_windows", "to_minutes", "from_minutes"]

_DAY = timedelta(days=1)


def check_calendar(cal: Calendar) -> None:
    """Raise :class:`InputError` if the calendar has no usable shift."""
    if not cal.days or any(d not in range(7) for d in cal.days):
        raise InputError("calendar.days must name at least one working day (Monday = 0 ... Sunday = 6)")
    if cal.shift_end <= cal.shift_start:
        raise InputError("calendar shift_end must be later than shift_start on the same day")


def _shift(cal: Calendar, day: datetime) -> tuple[datetime, datetime]:
    d = day.replace(hour=0, minute=0, second=0, microsecond=0)
    return d.replace(hour=cal.shift_start.hour, minute=cal.shift_start.minute), \
        d.replace(hour=cal.shift_end.hour, minute=cal.shift_end.minute)


def is_open(cal: Calendar, t: datetime) -> bool:
    """True when ``t`` lies inside a shift."""
    s, e = _shift(cal, t)
    return t.weekday() in cal.days and s <= t < e


def next_open(cal: Calendar, t: datetime, *, need_s: float = 0.0) -> datetime:
    """Earliest moment ``>= t`` inside a shift with ``need_s`` seconds of shift left.

    Parameters
    ----------
    cal
    t
        Earliest wanted moment.
    need_s
        Operator time the task needs; it must end by the end of the same shift.

    Raises
    ------
    InputError
        If ``need_s`` is longer than a shift or the calendar has no working day.
    """
    check_calendar(cal)
    need = timedelta(seconds=need_s)
    s, e = _shift(cal, t)
    if e - s < need:
        raise InputError(f"an operator task of {need_s:.0f} s does not fit in one shift")
    day = t
    for _ in range(15):
        s, e = _shift(cal, day)
        cand = max(t, s)
        if day.weekday() in cal.days and cand + need <= e and cand < e:
            return cand
        day = (day + _DAY).replace(hour=0, minute=0, second=0, microsecond=0)
    raise InputError("no shift within two weeks")  # unreachable when check_calendar passed


def clear_start(cal: Calendar, end: datetime, clear_s: float) -> datetime:
    """When the operator starts clearing a plate that ends at ``end``."""
    return next_open(cal, end, need_s=clear_s)


def printer_free_after(cal: Calendar, end: datetime, clear_s: float) -> datetime:
    """When the printer is free again after a plate that ends at ``end``.

    ``clear_start(end) + clear_s``: clearing starts at the first moment at or
    after ``end`` inside a shift with ``clear_s`` left in it.

    Examples
    --------
    >>> from datetime import time
    >>> cal = Calendar(time(7), time(19), (0, 1, 2, 3, 4))
    >>> printer_free_after(cal, datetime(2026, 3, 3, 2, 0), 900)   # a Tuesday, 02:00
    datetime.datetime(2026, 3, 3, 7, 15)
    """
    return clear_start(cal, end, clear_s) + timedelta(seconds=clear_s)


def shift_windows(cal: Calendar, origin: datetime, days: int) -> list[tuple[datetime, datetime]]:
    """The shifts from the day of ``origin`` for ``days`` days, as ``(start, end)``.

    The first window is cut to start at ``origin`` when ``origin`` lies inside it;
    windows that end by ``origin`` are left out.
    """
    check_calendar(cal)
    out = []
    day = origin.replace(hour=0, minute=0, second=0, microsecond=0)
    for k in range(days):
        d = day + k * _DAY
        if d.weekday() not in cal.days:
            continue
        s, e = _shift(cal, d)
        if e <= origin:
            continue
        out.append((max(s, origin), e))
    return out


def to_minutes(t: datetime, origin: datetime, *, up: bool) -> int:
    """Whole minutes from ``origin`` to ``t``, rounded up (``up=True``) or down."""
    m = (t - origin).total_seconds() / 60.0
    return int(-(-m // 1)) if up else int(m // 1)


def from_minutes(m: int, origin: datetime) -> datetime:
    return origin + timedelta(minutes=m)
