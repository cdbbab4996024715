"""The plan as the replanner sees it, and what events do to it.

A :class:`PlanState` is a plan at the level of the fleet: plates with their
copies (as :class:`~packer.fleet.planner.CopyRef`), times and a state, plus
the copies not placed. :func:`apply_events` checks events against it and
decides, for every plate, whether it is frozen (finished, printing, failed)
or may still change (planned), and which copies need a plate. It touches no
file and no mesh, so tests can drive it with a generated fleet.

States
------
``planned``   not started; may be re-sequenced (its contents kept) or changed.
``printing``  started; frozen.
``finished``  printed; frozen.
``failed``    stopped; frozen. Its ``copies`` are the survivors, ``lost`` the
              copies that went back to the pool (each with one more failure in
              its ``boost``).

A plate nobody reported on is taken to have run as planned: finished if it
ends by ``now``, printing if it started by ``now`` (``assumed`` is then set).
A plate that was printing when its printer went down is taken as failed then.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field, replace
from datetime import datetime, timedelta
from typing import Sequence

from packer.errors import InputError
from packer.fleet.calendar import printer_free_after
from packer.fleet.planner import CopyRef
from packer.fleet.timemodel import PartStats, plate_time
from packer.intake.identity import copy_key
from packer.intake.job import Calendar, Printer
from packer.replan.events import Added, Cancelled, Down, Event, Failed, Finished, Printing

__all__ = ["FROZEN", "PlateState", "PlanState", "Situation", "apply_events", "state_of_fleet",
           "fmt_time"]

FROZEN = ("printing", "finished", "failed")


def fmt_time(t: datetime | None) -> str:
    return t.strftime("%a %d %b %H:%M") if t else "-"


@dataclass(frozen=True)
class PlateState:
    """One plate: contents, printer, times (s), state.

    ``machine_s`` is warm-up plus print (``end - start`` for a plate that ran
    through), ``clear_s`` the operator's clearing. ``origin`` says where a
    plate of a new plan came from: ``kept`` (same contents as before),
    ``new`` (planned now), ``shrunk:P05`` (P05 without cancelled copies).
    ``layout`` is the layout of a new plate (opaque here).
    """

    id: str
    printer: str
    material: str
    copies: tuple[CopyRef, ...]
    start: datetime
    end: datetime
    free: datetime
    machine_s: float
    clear_s: float
    state: str = "planned"
    lost: tuple[CopyRef, ...] = ()
    assumed: bool = False
    origin: str = "kept"
    layout: object = None


@dataclass(frozen=True)
class PlanState:
    """A plan at fleet level: what a replan reads and writes.

    ``now`` is the moment of the replan that made it (None for a first plan);
    ``down`` the printer down windows still in force; ``next_number`` the
    number of the next new plate id (ids are never reused).
    """

    start: datetime
    plates: tuple[PlateState, ...]
    unplaced: tuple[tuple[CopyRef, str], ...]
    now: datetime | None = None
    cancelled: tuple[str, ...] = ()
    down: tuple[Down, ...] = ()
    next_number: int = 1

    def copies(self) -> list[CopyRef]:
        """Every copy the plan accounts for (on a plate or unplaced)."""
        return [c for p in self.plates for c in p.copies] + [c for c, _ in self.unplaced]


@dataclass(frozen=True)
class Situation:
    """The plan after the events: what is frozen, what may change, what needs a plate."""

    start: datetime
    now: datetime
    frozen: tuple[PlateState, ...]
    planned: tuple[PlateState, ...]          # not started: contents kept unless they must change
    pool: tuple[CopyRef, ...]                # copies that need a plate
    down: tuple[Down, ...]                   # with start filled in
    cancelled: tuple[str, ...]
    next_number: int
    notes: tuple[str, ...]                   # what was applied or assumed, in words
    removed: tuple[CopyRef, ...] = ()        # copies of cancelled orders taken off planned plates


def _plate_ids(plates) -> str:
    ids = sorted(p.id for p in plates)
    return ", ".join(ids[:12]) + (" ..." if len(ids) > 12 else "")


def apply_events(state: PlanState, events: Sequence[Event], *, now: datetime, printers: Sequence[Printer],
                 calendar: Calendar, stats: Sequence[PartStats]) -> Situation:
    """Check ``events`` against the plan and work out the situation at ``now``.

    Parameters
    ----------
    state
        The plan being replanned.
    events
        Reported events; ``Added`` events must carry their copies.
    now
        The moment of the replan; nothing new starts before it.
    printers, calendar
        The fleet and the operator shifts (clearing a failed or finished plate).
    stats
        Part statistics indexed by ``CopyRef.kind`` (plate time of a plate
        that loses cancelled copies).

    Raises
    ------
    InputError
        Listing every event that does not fit the plan: unknown plate, printer
        or order, a plate reported twice or both finished and failed, a finished
        plate reported failed, times before the plan's start or after ``now``.
    """
    by_name = {p.name: p for p in printers}
    reports, new_down, cancelled, added = _check_events(state, events, now=now, printers=by_name)
    # down windows: a new report for a printer replaces its earlier windows
    renewed = {d.printer for d in new_down}
    down = tuple(d for d in state.down if d.printer not in renewed and (d.until is None or d.until > now)) \
        + tuple(new_down)
    gone = set(cancelled)
    s = _sort_plates(state, reports, down, gone, now=now, calendar=calendar, printers=by_name, stats=stats)
    s.problems.extend(_printer_overlaps(s.frozen))
    if s.problems:
        raise InputError("the events do not fit the plan:\n" + "\n".join(s.problems))
    pool = s.pool + [c for c, _ in state.unplaced if c.order not in gone] + list(added)
    removed = s.removed + [c for c, _ in state.unplaced if c.order in gone]
    notes = sorted(s.notes, key=lambda n: ("taken as" in n, n))    # failures and removals first, then assumptions
    return Situation(start=state.start, now=now, frozen=tuple(s.frozen), planned=tuple(s.planned), pool=tuple(pool),
                     down=down, cancelled=tuple(cancelled), next_number=state.next_number, notes=tuple(notes),
                     removed=tuple(removed))


@dataclass
class _Sorted:
    """Plates sorted by what the events did to them (a working record of :func:`apply_events`)."""

    frozen: list = field(default_factory=list)
    planned: list = field(default_factory=list)
    pool: list = field(default_factory=list)
    removed: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    problems: list = field(default_factory=list)


def _sort_plates(state: PlanState, reports: dict, down: Sequence[Down], gone: set, *, now: datetime,
                 calendar: Calendar, printers: dict, stats: Sequence[PartStats]) -> _Sorted:
    """Every plate of ``state`` frozen (with the copies a failure sends back to the pool) or still
    planned (without the copies of cancelled orders)."""
    windows = defaultdict(list)
    for d in down:
        windows[d.printer].append(d)
    out = _Sorted()
    for pl in sorted(state.plates, key=lambda p: (p.printer, p.start, p.id)):
        ev = reports.get(pl.id)
        if pl.state in ("finished", "failed"):       # a finished plate reported finished again: no change
            out.frozen.append(pl)
            continue
        new = _reported(pl, ev, now, calendar) if ev is not None else _implicit(pl, now, windows[pl.printer],
                                                                                   calendar)
        if new.state == "failed":
            out.pool += [replace(c, boost=c.boost + 1.0) for c in new.lost if c.order not in gone]
            out.frozen.append(new)
            why = "reported" if ev is not None else "assumed: its printer went down while it printed"
            out.notes.append(f"{pl.id} failed at {fmt_time(new.end)} ({why}): {len(new.lost)} copies lost, "
                             f"{len(new.copies)} survived")
        elif new.state in FROZEN:
            d = next((d for d in windows[new.printer] if d.start < new.end and (d.until is None or d.until > new.start)),
                     None)
            if d is not None:
                out.problems.append(f"{d.origin}: printer {d.printer} is down from {fmt_time(d.start)} but plate "
                                    f"{pl.id} is {new.state} on it from {fmt_time(new.start)} to "
                                    f"{fmt_time(new.end)}; report {pl.id} failed or give a later down time")
            out.frozen.append(new)
            if new.assumed and pl.state != new.state:
                out.notes.append(f"{pl.id} taken as {new.state} (nobody reported on it; planned "
                                 f"{fmt_time(pl.start)} to {fmt_time(pl.end)})")
        else:
            _keep_planned(pl, gone, out, printers=printers, stats=stats)
    return out


def _keep_planned(pl: PlateState, gone: set, out: _Sorted, *, printers: dict, stats: Sequence[PartStats]) -> None:
    """A plate not started, without the copies of cancelled orders (shrunk, or removed when none is left)."""
    keep = tuple(c for c in pl.copies if c.order not in gone)
    out.removed += [c for c in pl.copies if c.order in gone]
    if not keep:
        out.notes.append(f"{pl.id} removed: every copy on it belonged to a cancelled order")
    elif len(keep) < len(pl.copies):
        prof = printers[pl.printer].profile
        machine = pl.machine_s if prof.technology == "powder" else \
            plate_time(prof, [stats[c.kind] for c in keep]).machine_s
        out.planned.append(replace(pl, id="", copies=keep, machine_s=machine, origin=f"shrunk:{pl.id}"))
    else:
        out.planned.append(pl)


def _check_events(state: PlanState, events: Sequence[Event], *, now: datetime, printers: dict):
    """Events checked one by one against the plan: (plate reports, down windows, cancelled, added copies).

    Raises
    ------
    InputError
        Listing every event that does not fit.
    """
    problems: list[str] = []
    known_orders = {c.order for c in state.copies()} | {c.order for p in state.plates for c in p.lost} \
        | set(state.cancelled)
    if now < state.start:
        problems.append(f"now ({fmt_time(now)}) is before the plan's start ({fmt_time(state.start)})")
    if state.now and now < state.now:
        problems.append(f"now ({fmt_time(now)}) is before the moment of the last replan ({fmt_time(state.now)})")
    reports: dict[str, Event] = {}
    new_down: list[Down] = []
    cancelled = list(state.cancelled)
    added: list[CopyRef] = []
    for ev in events:
        if isinstance(ev, (Failed, Finished, Printing)):
            problems += _report_problems(state, ev, reports, now=now)
        elif isinstance(ev, Down):
            problem = _down_problem(state, ev, now=now, printers=printers)
            if problem:
                problems.append(problem)
            else:
                new_down.append(replace(ev, start=ev.start or now))
        elif isinstance(ev, Cancelled):
            if ev.order not in known_orders:
                problems.append(f"{ev.origin}: no order {ev.order} in the plan")
            elif ev.order in cancelled:
                problems.append(f"{ev.origin}: order {ev.order} is already cancelled")
            else:
                cancelled.append(ev.order)
        elif isinstance(ev, Added):
            for o in sorted({c.order for c in ev.copies}):
                if o in known_orders:
                    problems.append(f"{ev.origin}: order {o} is already in the plan")
            known_orders |= {c.order for c in ev.copies}
            added += list(ev.copies)
    if problems:
        raise InputError("the events do not fit the plan:\n" + "\n".join(problems))
    return reports, new_down, cancelled, added


def _report_problems(state: PlanState, ev: Event, reports: dict, *, now: datetime) -> list[str]:
    """What is wrong with a plate report (failed, finished, printing); a report that fits is
    entered in ``reports``."""
    pl = next((p for p in state.plates if p.id == ev.plate), None)
    kind = type(ev).__name__.lower()
    if pl is None:
        return [f"{ev.origin}: no plate {ev.plate} in the plan (plates: {_plate_ids(state.plates)})"]
    if ev.plate in reports:
        prev = reports[ev.plate]
        return [f"{ev.origin}: plate {ev.plate} is also reported {type(prev).__name__.lower()} ({prev.origin})"]
    if pl.state == "failed":
        return [f"{ev.origin}: plate {ev.plate} already failed in an earlier version"]
    if pl.state == "finished" and kind != "finished":
        return [f"{ev.origin}: plate {ev.plate} is already finished; a finished plate cannot be reported {kind}"]
    problems = []
    t = getattr(ev, "at", None) or getattr(ev, "since", None)
    if t is not None and t < state.start:
        problems.append(f"{ev.origin}: the time {fmt_time(t)} is before the plan's start ({fmt_time(state.start)})")
    elif t is not None and t > now:
        problems.append(f"{ev.origin}: the time {fmt_time(t)} is after now ({fmt_time(now)})")
    if isinstance(ev, Failed):
        on = {copy_key(c) for c in pl.copies}
        for k in ev.survived:
            if k not in on:
                problems.append(f"{ev.origin}: copy {'/'.join(map(str, k))} is not on plate {ev.plate}")
        if len(set(ev.survived)) != len(ev.survived):
            problems.append(f"{ev.origin}: a surviving copy is named twice")
    reports[ev.plate] = ev
    return problems


def _down_problem(state: PlanState, ev: Down, *, now: datetime, printers: dict) -> str | None:
    """What is wrong with a printer down report, or None."""
    if ev.printer not in printers:
        return f"{ev.origin}: no printer {ev.printer} in the fleet (printers: {', '.join(sorted(printers))})"
    start = ev.start or now
    if start < state.start:                            # a window may be announced ahead of now
        return f"{ev.origin}: the start {fmt_time(start)} is before the plan's start ({fmt_time(state.start)})"
    if ev.until is not None and ev.until <= start:
        return f"{ev.origin}: the end {fmt_time(ev.until)} is not after the start {fmt_time(start)}"
    return None


def _reported(pl: PlateState, ev: Event, now: datetime, cal: Calendar) -> PlateState:
    if isinstance(ev, Failed):
        at = ev.at or min(now, pl.end)
        survived = set(ev.survived)
        keep = tuple(c for c in pl.copies if copy_key(c) in survived)
        lost = tuple(c for c in pl.copies if copy_key(c) not in survived)
        return replace(pl, state="failed", copies=keep, lost=lost, start=min(pl.start, at), end=at,
                       free=printer_free_after(cal, at, pl.clear_s), assumed=False)
    if isinstance(ev, Finished):
        end = ev.at or min(pl.end, now)
        if end == pl.end:
            return replace(pl, state="finished", assumed=False)
        return replace(pl, state="finished", start=min(pl.start, end), end=end,
                       free=printer_free_after(cal, end, pl.clear_s), assumed=False)
    since = ev.since or (pl.start if pl.start <= now else now)
    end = since + timedelta(seconds=pl.machine_s)
    return replace(pl, state="printing", start=since, end=end, free=printer_free_after(cal, end, pl.clear_s),
                   assumed=False)


def _implicit(pl: PlateState, now: datetime, downs: list[Down], cal: Calendar) -> PlateState:
    """A plate nobody reported on runs as planned, unless its printer went down first or during it."""
    if pl.state == "planned" and (pl.start > now or any(
            d.start <= pl.start and (d.until is None or d.until > pl.start) for d in downs)):
        return pl
    cut = min((d.start for d in downs if pl.start < d.start < pl.end and d.start <= now), default=None)
    if cut is not None:
        return replace(pl, state="failed", copies=(), lost=pl.copies, end=cut,
                       free=printer_free_after(cal, cut, pl.clear_s), assumed=True)
    if pl.end <= now:
        return replace(pl, state="finished", assumed=True)
    return pl if pl.state == "printing" else replace(pl, state="printing", assumed=True)


def _printer_overlaps(frozen: Sequence[PlateState]) -> list[str]:
    """Frozen plates of one printer must not print at the same time."""
    out = []
    by_printer = defaultdict(list)
    for p in frozen:
        by_printer[p.printer].append(p)
    for name, ps in by_printer.items():
        ps.sort(key=lambda p: (p.start, p.id))
        for a, b in zip(ps, ps[1:]):
            if b.start < a.end:
                out.append(f"plates {a.id} ({a.state} {fmt_time(a.start)} to {fmt_time(a.end)}) and {b.id} "
                           f"({b.state} from {fmt_time(b.start)}) would print at the same time on {name}; "
                           f"report {a.id} finished or failed before {b.id} started")
    return out


def state_of_fleet(plates, unplaced, *, start: datetime) -> PlanState:
    """A first plan (version 1) from the fleet planner's plates, all ``planned``.

    Parameters
    ----------
    plates
        :class:`~packer.fleet.planner.PlannedPlate` objects (ids ``P01``...).
    unplaced
        ``(CopyRef, reason)`` pairs.
    """
    states = tuple(PlateState(id=p.id, printer=p.printer, material=p.material, copies=tuple(p.copies),
                              start=p.start, end=p.end, free=p.free, machine_s=p.time.machine_s,
                              clear_s=p.time.clear_s, layout=p.layout) for p in plates)
    numbers = [int(p.id[1:]) for p in plates if p.id[1:].isdigit()]
    return PlanState(start=start, plates=states, unplaced=tuple(unplaced), next_number=max(numbers, default=0) + 1)
