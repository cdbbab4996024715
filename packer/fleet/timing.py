"""Plate times in real seconds and in the ticks of the CP-SAT models, and sequencing by CP-SAT.

Shared by the fleet planner and by replanning (:mod:`packer.replan`):

- tick conversion: :func:`ticks` (a moment, rounded up or down), :func:`ticks_up`
  (a duration, rounded up), :func:`tick_time` (back to a moment), :func:`tick_windows`
  (the shifts, rounded inward), :func:`order_ticks` (due tick and integer weight per
  order), :func:`down_ticks` (down windows, rounded outward);
- re-timing in real seconds with the calendar: :func:`start_after` (a plate's start
  after a material change), :func:`retime` (every printer's plates left-shifted in their
  order), :func:`slot` (one plate around down windows);
- :func:`sequence_plates`: printer and start of every plate by the CP-SAT model of
  :mod:`packer.fleet.schedule`, from plates, their ways to run and real times.

Rounding goes outward (durations and the moments a printer is ready up, shift ends and
due times down), so an integer answer is feasible in real time.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import replace
from datetime import datetime, timedelta

from packer.fleet.calendar import next_open, printer_free_after, shift_windows
from packer.fleet.schedule import TICK_S, PlateTask, ScheduleAnswer, ScheduleSettings, solve_schedule
from packer.fleet.scoring import copy_weight
from packer.intake.job import Calendar

__all__ = ["ticks", "ticks_up", "tick_time", "tick_windows", "order_ticks", "down_ticks",
           "start_after", "retime", "slot", "sequence_plates"]

#: a down window or a horizon given as (from, until); until None: for good
Span = tuple[datetime, datetime | None]


def ticks(t: datetime, origin: datetime, *, up: bool) -> int:
    """Ticks of ``TICK_S`` seconds from ``origin`` to ``t``, rounded up or down.

    >>> from datetime import datetime
    >>> o = datetime(2026, 12, 7, 8, 0)
    >>> ticks(datetime(2026, 12, 7, 8, 0, 15), o, up=True), ticks(datetime(2026, 12, 7, 8, 0, 15), o, up=False)
    (2, 1)
    """
    x = (t - origin).total_seconds() / TICK_S
    return math.ceil(x - 1e-9) if up else math.floor(x + 1e-9)


def ticks_up(seconds: float) -> int:
    """A duration in ticks, rounded up.

    >>> ticks_up(10.0), ticks_up(10.5)
    (1, 2)
    """
    return math.ceil(seconds / TICK_S - 1e-9)


def tick_time(n: int, origin: datetime) -> datetime:
    """The moment of tick ``n``."""
    return origin + timedelta(seconds=TICK_S * n)


def tick_windows(calendar: Calendar, origin: datetime, last: datetime, extra_s: float) -> list[tuple[int, int]]:
    """Shift windows in ticks (start rounded up, end down; empty ones left out) from ``origin``
    over the days up to ``last``, three more and one per full day in ``extra_s`` seconds
    (room for the solver to move plates later)."""
    days = (last - origin).days + 3 + int(extra_s // 86400)
    windows = []
    for s, e in shift_windows(calendar, origin, days):
        a, b = ticks(s, origin, up=True), ticks(e, origin, up=False)
        if b > a:
            windows.append((a, b))
    return windows


def order_ticks(plates: Sequence, origin: datetime) -> tuple[dict, list[int], list[int]]:
    """(order -> index, due tick per order, integer weight per order) of the orders on ``plates``.

    Orders are indexed in sorted order; the due tick is rounded down, the weight is the
    largest :func:`~packer.fleet.scoring.copy_weight` of its copies rounded up (at least 1).
    """
    orders = sorted({c.order for p in plates for c in p.copies})
    oidx = {o: k for k, o in enumerate(orders)}
    due = [0] * len(orders)
    weight = [1] * len(orders)
    for p in plates:
        for c in p.copies:
            due[oidx[c.order]] = ticks(c.due, origin, up=False)
            weight[oidx[c.order]] = max(weight[oidx[c.order]], int(math.ceil(copy_weight(c))))
    return oidx, due, weight


def down_ticks(downs: Sequence[Span], origin: datetime, horizon: int) -> list[tuple[int, int]]:
    """Down windows in ticks, rounded outward; a window for good ends after ``horizon``."""
    return [(ticks(a, origin, up=False), horizon + 1 if u is None else ticks(u, origin, up=True))
            for a, u in downs]


def start_after(profile, calendar: Calendar, free: datetime, last: str | None,
                material: str) -> tuple[datetime, float]:
    """(start, change s) of a plate of ``material`` on a printer of ``profile`` free from ``free``.

    A change from the printer's last material (``last``; None: none known, no change)
    is operator work of the profile's ``material_change_s``, inside one shift, before
    the plate starts in a shift.
    """
    change = profile.material_change_s if last is not None and last != material else 0.0
    t = next_open(calendar, free)
    if change > 0:
        t = next_open(calendar, printer_free_after(calendar, t, change))
    return t, change


def retime(plates: Sequence, printers: Sequence, ready: Sequence[datetime], calendar: Calendar) -> list:
    """Left-shift every printer's plates in their current order (real seconds, calendar),
    with a material change before a plate whose material differs from the one before it.

    ``plates`` are :class:`~packer.fleet.records.PlannedPlate`; ``ready[i]`` is when
    ``printers[i]`` takes its first plate. Plates come back sorted by (start, printer, id).
    """
    free_at = {p.name: r for p, r in zip(printers, ready)}
    index = {p.name: i for i, p in enumerate(printers)}
    last: dict = {}
    out = []
    for p in sorted(plates, key=lambda p: (p.start, p.printer, p.id)):
        prof = printers[index[p.printer]].profile
        begin, change = start_after(prof, calendar, free_at[p.printer], last.get(p.printer), p.material)
        end = begin + timedelta(seconds=p.time.machine_s)
        free = printer_free_after(calendar, end, p.time.clear_s)
        free_at[p.printer] = free
        last[p.printer] = p.material
        out.append(replace(p, start=begin, end=end, free=free, change_s=change,
                           post=prof.post_processing, cal=calendar))
    return out


def slot(calendar: Calendar, t: datetime, machine_s: float, clear_s: float,
         downs: Sequence[Span] = ()) -> tuple[datetime, datetime, datetime] | None:
    """(start, end, free) of a plate started as early as possible from ``t`` outside the down
    windows (start and clearing inside shifts; the plate occupies its printer from start to
    free), or None when a window for good is in the way."""
    while True:
        begin = next_open(calendar, t)
        end = begin + timedelta(seconds=machine_s)
        free = printer_free_after(calendar, end, clear_s)
        hit = [u for a, u in downs if a < free and (u is None or u > begin)]
        if not hit:
            return begin, end, free
        if any(u is None for u in hit):
            return None
        t = max(hit)


def sequence_plates(plates: Sequence, ways: Sequence[Sequence[tuple[int, float]]], clear_s: Sequence[float], *,
                    ready: Sequence[datetime], calendar: Calendar, origin: datetime, last: datetime,
                    extra_s: float, hint_printer: Sequence[int], hint_order: Sequence[int],
                    settings: ScheduleSettings, downs: Sequence[Sequence[Span]] = ()) -> ScheduleAnswer | None:
    """Printer and start tick of every plate by :func:`~packer.fleet.schedule.solve_schedule`
    (weighted lateness of the orders, then the finish), times in ticks from ``origin``.

    Parameters
    ----------
    plates
        Anything with ``copies`` (of :class:`~packer.fleet.records.CopyRef`): the orders,
        their due times and weights come from there.
    ways : per plate, (printer index, machine s) pairs
        The printers that may run each plate and its machine time there.
    clear_s : per plate
        Operator clear time (s).
    ready : per printer
        When each printer takes its first plate.
    calendar, origin
        Shifts, and tick 0.
    last, extra_s
        The shift windows reach the days up to ``last`` and beyond (:func:`tick_windows`).
    hint_printer, hint_order
        A feasible plan: printer index per plate and the order they were placed in.
    settings
    downs : per printer, down windows (from, until or None), optional.

    Returns
    -------
    ScheduleAnswer or None
        None when the solver found nothing in time.

    Raises
    ------
    PackerError
        When no shift window can hold a plate in the horizon, or on a model bug.
    """
    oidx, due, weight = order_ticks(plates, origin)
    tasks = []
    for p, w, clear in zip(plates, ways, clear_s):
        ms = tuple(ticks_up(m) for _, m in w)
        tasks.append(PlateTask(printers=tuple(i for i, _ in w), machine_t=min(ms), clear_t=ticks_up(clear),
                               orders=tuple(sorted({oidx[c.order] for c in p.copies})),
                               machine_by=ms if len(set(ms)) > 1 else ()))
    windows = tick_windows(calendar, origin, last, extra_s)
    horizon = windows[-1][1]
    blocked = [down_ticks(d, origin, horizon) for d in downs]
    return solve_schedule(tasks, ready=[ticks(r, origin, up=True) for r in ready], windows=windows, due=due,
                          weight=weight, hint_printer=hint_printer, hint_order=hint_order, settings=settings,
                          blocked=blocked)
