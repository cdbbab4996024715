"""Replanning: planning again with frozen parts, by the same planner.

From a :class:`~packer.replan.state.Situation`:

1. Each printer is ready for new work at the latest of ``now``, its
   availability and the moment its frozen plates are cleared. A down window
   that has begun moves that to its end (a printer down for good takes no
   work). Before a window still to come, the printer keeps its planned plates
   that are cleared before the window (pinned, left-shifted in their order).
2. Planned plates keep their contents, layout and id; a plate no available
   printer of its profile can run is dissolved into the pool.
3. The copies that need a plate (failed copies with their boost, new orders,
   copies of dissolved plates, earlier unplaced ones) go through
   :func:`~packer.fleet.planner.plan_fleet` with the printers' ready times as
   their availability: new plates are nested and confirmed by the usual ``fits``.
4. Kept and new plates are sequenced together: list schedules on the plates'
   own printers (old order; new plates at their planned times, first or last)
   and the fleet's CP-SAT model (:func:`~packer.fleet.schedule.solve_schedule`:
   weighted lateness, then finish) hinted by the best of them, all re-timed
   with the calendar in real seconds. Kept: least weighted lateness, then
   fewest plates moved to another printer, earliest finish, fewest starts moved.
5. New and changed plates get new ids; everything is checked by
   :func:`check_replan`.
"""

from __future__ import annotations

import math
import time as _time
from collections import defaultdict
from dataclasses import dataclass, field, replace
from datetime import datetime, timedelta
from typing import Sequence

from packer.errors import PackerError
from packer.fleet import schedule as _schedule
from packer.fleet.calendar import is_open, next_open, printer_free_after, shift_windows
from packer.fleet.clock import WorkMeter
from packer.fleet.planner import CanPrintFn, FitsFn, HintFn, plan_fleet
from packer.fleet.records import FillFn
from packer.fleet.schedule import PlateTask, ScheduleSettings, solve_schedule
from packer.fleet.timemodel import PartStats
from packer.job import Calendar, Printer
from packer.replan.state import FROZEN, PlanState, PlateState, Situation, fmt_time, key_of

__all__ = ["ReplanSettings", "Replanned", "replan", "check_replan", "plate_id"]


@dataclass(frozen=True)
class ReplanSettings:
    """``seconds``: budget of the fleet planner for the copies that need a plate;
    ``schedule_s``: budget of the CP-SAT sequencing of all plates not started."""

    seconds: float = 10.0
    schedule_s: float = 5.0
    seed: int = 0
    workers: int = 2


@dataclass(frozen=True)
class Replanned:
    state: PlanState
    stats: dict = field(default_factory=dict)


def plate_id(n: int) -> str:
    return f"P{n:02d}"


def replan(sit: Situation, *, printers: Sequence[Printer], stats: Sequence[PartStats], calendar: Calendar,
           fits: FitsFn, capacity_hint: HintFn, can_print: CanPrintFn,
           settings: ReplanSettings = ReplanSettings(), work_meter: WorkMeter | None = None,
           fill: FillFn | None = None) -> Replanned:
    """The next plan: frozen plates as they are, everything else planned again.

    ``work_meter`` and ``fill`` are passed to :func:`packer.fleet.planner.plan_fleet`
    (the work ``fits`` reports, for the deterministic planning clock; the optional
    pool fill that builds filament and resin plates in one layout call each).

    Returns
    -------
    Replanned
        The new :class:`PlanState` (ready for the next replan) and figures:
        ``pool`` copies that needed a plate, ``new_plates``, ``dissolved``,
        ``pinned``, ``schedule`` (which sequence was kept), ``replan_s``.
    """
    t0 = _time.monotonic()
    names = sorted(p.name for p in printers)
    by_name = {p.name: p for p in printers}
    ready: dict[str, datetime] = {p.name: max(sit.now, p.available_from) for p in printers}
    for f in sit.frozen:
        ready[f.printer] = max(ready[f.printer], f.free)
    planned_on = defaultdict(list)
    for p in sorted(sit.planned, key=lambda p: (p.start, p.id)):
        planned_on[p.printer].append(p)

    usable: dict[str, datetime] = {}
    pinned: list[PlateState] = []
    down_reason: dict[str, str] = {}
    for name in names:
        r = ready[name]
        wins = sorted((d for d in sit.down if d.printer == name and (d.until is None or d.until > r)),
                      key=lambda d: d.start)
        if not wins:
            usable[name] = r
            continue
        down_reason[name] = f"{name} is down from {fmt_time(wins[0].start)}" + (
            f" until {fmt_time(max(d.until for d in wins))}" if all(d.until for d in wins) else "")
        if wins[0].start > r:
            t = r
            for p in planned_on[name]:
                begin = next_open(calendar, t)
                end = begin + timedelta(seconds=p.machine_s)
                free = printer_free_after(calendar, end, p.clear_s)
                if free > wins[0].start:
                    break
                pinned.append(replace(p, start=begin, end=end, free=free))
                t = free
        if all(d.until is not None for d in wins):
            usable[name] = next_open(calendar, max(max(d.until for d in wins), r))
    pinned_src = {(p.printer, p.id, p.origin) for p in pinned}
    rest = [p for p in sit.planned if (p.printer, p.id, p.origin) not in pinned_src]

    def allowed(p: PlateState) -> list[str]:
        prof = by_name[p.printer].profile.name
        return [n for n in names if n in usable and by_name[n].profile.name == prof
                and p.material in by_name[n].materials]

    kept, pool, dissolved = [], list(sit.pool), []
    for p in rest:
        if allowed(p):
            kept.append(p)
        else:
            dissolved.append(p.id or p.origin)
            pool += list(p.copies)

    new_plates, unplaced, fleet_stats = _plan_pool(pool, printers, usable, stats, calendar, sit.now,
                                                   fits, capacity_hint, can_print, down_reason, settings,
                                                   work_meter, fill)
    tasks = kept + new_plates
    sequenced, sched = _sequence(tasks, printers, usable, allowed, calendar, sit.now, sit.frozen + tuple(pinned),
                                 settings)

    # ids: kept plates keep theirs; new and shrunk plates get the next numbers, in start order
    number = sit.next_number
    out = []
    for p in sorted(list(pinned) + sequenced, key=lambda p: (p.start, p.printer, p.id)):
        if not p.id:
            p = replace(p, id=plate_id(number))
            number += 1
        out.append(p)
    state = PlanState(start=sit.start, plates=tuple(sorted(list(sit.frozen) + out, key=lambda p: (p.start, p.id))),
                      unplaced=tuple(unplaced), now=sit.now, cancelled=sit.cancelled, down=sit.down,
                      next_number=number)
    check_replan(sit, state, printers=printers, calendar=calendar)
    return Replanned(state, {"pool": len(pool), "new_plates": len(new_plates), "kept_plates": len(kept),
                             "pinned": len(pinned), "dissolved": dissolved, "schedule": sched,
                             "fleet": fleet_stats, "replan_s": _time.monotonic() - t0})


def _plan_pool(pool, printers, usable, stats, calendar, now, fits, hint, can_print, down_reason, settings,
               work_meter: WorkMeter | None = None, fill: FillFn | None = None):
    """New plates for the copies that need one, by the fleet planner."""
    if not pool:
        return [], [], {}
    avail = [replace(p, available_from=usable[p.name]) for p in printers if p.name in usable]
    if not avail:
        why = "no printer is available: " + "; ".join(down_reason[n] for n in sorted(down_reason))
        return [], [(c, why) for c in pool], {}
    res = plan_fleet(pool, avail, stats=stats, calendar=calendar, start=now, fits=fits, capacity_hint=hint,
                     can_print=can_print, seconds=settings.seconds, seed=settings.seed, work_meter=work_meter,
                     fill=fill)
    plates = [PlateState(id="", printer=pj.printer, material=pj.material, copies=pj.copies, start=pj.start,
                         end=pj.end, free=pj.free, machine_s=pj.time.machine_s, clear_s=pj.time.clear_s,
                         origin="new", layout=pj.layout) for pj in res.plates]
    unplaced = []
    for c, why in res.unplaced:
        could = [n for n in sorted(down_reason) if can_print(next(p for p in printers if p.name == n), c) is None
                 and c.material in next(p for p in printers if p.name == n).materials]
        if could:
            why = f"{why}; " + "; ".join(down_reason[n] for n in could)
        unplaced.append((c, why))
    return plates, unplaced, {"fits_calls": res.stats.get("fits_calls"), "planning_s": res.stats.get("planning_s")}


def _score(plates: Sequence[PlateState]) -> tuple[float, datetime | None]:
    """(weighted lateness in s, last free) over the given plates: smaller is better."""
    done: dict[str, datetime] = {}
    due: dict[str, tuple[datetime, float]] = {}
    for p in plates:
        for c in p.copies:
            done[c.order] = max(done.get(c.order, p.free), p.free)
            w = c.priority * (1.0 + c.boost)
            due[c.order] = (c.due, max(w, due.get(c.order, (c.due, 0.0))[1]))
    lat = sum(w * max(0.0, (done[o] - d).total_seconds()) for o, (d, w) in due.items())
    return round(lat, 3), max((p.free for p in plates), default=None)


# the sequencing model's time unit: TICK_S seconds where the schedule module has it, else minutes
UNIT_S = getattr(_schedule, "TICK_S", 60)


def _units(t: datetime, origin: datetime, *, up: bool) -> int:
    """Whole model units from ``origin`` to ``t``, rounded up or down."""
    x = (t - origin).total_seconds() / UNIT_S
    return int(math.ceil(x - 1e-9)) if up else int(math.floor(x + 1e-9))


def _task(printers: tuple[int, ...], machine_s: float, clear_s: float, orders: tuple[int, ...]) -> PlateTask:
    """A PlateTask in model units (durations rounded up)."""
    m, c = math.ceil(machine_s / UNIT_S - 1e-9), math.ceil(clear_s / UNIT_S - 1e-9)
    if "machine_t" in PlateTask.__dataclass_fields__:
        return PlateTask(printers=printers, machine_t=m, clear_t=c, orders=orders)
    return PlateTask(printers=printers, machine_min=m, clear_min=c, orders=orders)


def _timed(tasks, printer_of, order, ready, calendar) -> list[PlateState]:
    """Left-shifted real times for tasks run in ``order`` on their printers."""
    free_at = dict(ready)
    out: list = [None] * len(tasks)
    for j in order:
        p, name = tasks[j], printer_of[j]
        begin = next_open(calendar, free_at[name])
        end = begin + timedelta(seconds=p.machine_s)
        free = printer_free_after(calendar, end, p.clear_s)
        out[j] = replace(p, printer=name, start=begin, end=end, free=free)
        free_at[name] = free
    return out


def _sequence(tasks, printers, usable, allowed, calendar, now, fixed, settings):
    """Printer and start of every plate not started.

    Candidates: list schedules on the plates' own printers (old order, new plates
    at their planned times, first or last) and the CP-SAT answer from the best of
    them. Kept: least weighted lateness, then fewest plates moved to another
    printer, then the earliest finish, then fewest starts moved.
    """
    if not tasks:
        return [], {"status": "nothing to sequence"}
    names = [n for n in sorted(usable)]
    idx = {n: i for i, n in enumerate(names)}
    ok = [allowed(p) for p in tasks]
    hint_printer = [p.printer if p.printer in ok[j] else ok[j][0] for j, p in enumerate(tasks)]

    def moves(plates) -> tuple[int, int]:
        """(plates not started moved to another printer, plates whose start moved by a minute or more)."""
        kept = [(old, new) for old, new in zip(tasks, plates) if old.origin != "new"]
        return (sum(1 for old, new in kept if new.printer != old.printer),
                sum(1 for old, new in kept if abs((new.start - old.start).total_seconds()) >= 60))

    def rank(plates):
        lat, last = _score(list(fixed) + plates)
        return (lat, moves(plates)[0], last, moves(plates)[1])

    # list schedules on the plates' own printers: new plates where the planner put them, first, or last
    fresh = lambda j: tasks[j].origin == "new"  # noqa: E731
    keys = {"kept order": lambda j: (tasks[j].start, tasks[j].id),
            "new plates first": lambda j: (not fresh(j), tasks[j].start, tasks[j].id),
            "new plates last": lambda j: (fresh(j), tasks[j].start, tasks[j].id)}
    candidates = []
    for name, key in keys.items():
        order = sorted(range(len(tasks)), key=key)
        candidates.append((name, order, _timed(tasks, hint_printer, order, usable, calendar)))
    _, hint_order, hint = min(candidates, key=lambda c: rank(c[2]))
    candidates = [(n, t) for n, _, t in candidates]

    orders = sorted({c.order for p in tasks for c in p.copies})
    oidx = {o: k for k, o in enumerate(orders)}
    due, weight = [0] * len(orders), [1] * len(orders)
    for p in tasks:
        for c in p.copies:
            due[oidx[c.order]] = _units(c.due, now, up=False)
            weight[oidx[c.order]] = max(weight[oidx[c.order]], int(math.ceil(c.priority * (1.0 + c.boost))))
    ptasks = [_task(tuple(idx[n] for n in ok[j]), p.machine_s, p.clear_s,
                    tuple(sorted({oidx[c.order] for c in p.copies}))) for j, p in enumerate(tasks)]
    last = max([p.free for p in hint] + list(usable.values()))
    days = (last - now).days + 3 + int(sum(p.machine_s + p.clear_s for p in tasks) // 86400)
    windows = [(a, b) for a, b in ((_units(s, now, up=True), _units(e, now, up=False))
                                   for s, e in shift_windows(calendar, now, days)) if b > a]
    ready = [_units(usable[n], now, up=True) for n in names]
    status = "not run"
    try:
        ans = solve_schedule(ptasks, ready=ready, windows=windows, due=due, weight=weight,
                             hint_printer=[idx[n] for n in hint_printer], hint_order=hint_order,
                             settings=ScheduleSettings(time_limit_s=settings.schedule_s, workers=settings.workers,
                                                       seed=settings.seed))
    except PackerError as exc:            # the horizon or a window that cannot hold a plate: keep the hint
        ans, status = None, f"not used ({exc})"
    if ans is not None:
        order = sorted(range(len(tasks)), key=lambda j: (ans.start[j], ans.printer[j]))
        candidates.append(("cp-sat", _timed(tasks, [names[i] for i in ans.printer], order, usable, calendar)))
        status = ans.status

    name, best = min(candidates, key=lambda c: rank(c[1]))
    lat, printer_moves, _, start_moves = rank(best)
    return best, {"status": status, "kept": name, "weighted_lateness_h": lat / 3600,
                  "moved_to_other_printer": printer_moves, "start_moved": start_moves}


def check_replan(sit: Situation, new: PlanState, *, printers: Sequence[Printer], calendar: Calendar) -> None:
    """Check a replan independently of how it was made; raise :class:`PackerError` on a bug.

    Every copy that was in the plan or added and is not cancelled is on exactly
    one plate or unplaced with a reason; frozen plates are unchanged; plates
    not started begin at or after ``now`` on a printer of their profile and
    material, start inside a shift, and neither overlap on a printer nor touch
    a down window of it.
    """
    gone = set(sit.cancelled)
    want = {key_of(c) for c in sit.pool} | {key_of(c) for p in sit.planned for c in p.copies} \
        | {key_of(c) for p in sit.frozen for c in p.copies}
    seen: dict = defaultdict(int)
    for p in new.plates:
        for c in p.copies:
            seen[key_of(c)] += 1
    for c, why in new.unplaced:
        seen[key_of(c)] += 1
        if not why:
            raise PackerError(f"unplaced copy {key_of(c)} has no reason")
    dup = sorted(k for k, v in seen.items() if v > 1)
    if dup or set(seen) != want:
        raise PackerError(f"replan does not account for every copy once (a bug): duplicated {dup[:3]}, "
                          f"missing {sorted(want - set(seen))[:3]}, unexpected {sorted(set(seen) - want)[:3]}")
    for c in (c for p in new.plates if p.state == "planned" for c in p.copies):
        if c.order in gone:
            raise PackerError(f"copy {key_of(c)} of a cancelled order is still planned (a bug)")
    frozen = {p.id: p for p in sit.frozen}
    if [p for p in new.plates if p.id in frozen and p != frozen[p.id]] or \
            len([p for p in new.plates if p.state in FROZEN]) != len(frozen):
        raise PackerError("a frozen plate changed in the replan (a bug)")
    by_name = {p.name: p for p in printers}
    per = defaultdict(list)
    for p in new.plates:
        per[p.printer].append(p)
        if p.state != "planned":
            continue
        pr = by_name[p.printer]
        if p.start < sit.now or p.start < pr.available_from or not is_open(calendar, p.start) \
                or p.material not in pr.materials:
            raise PackerError(f"plate {p.id} is planned at {p.start} on {p.printer}: not allowed (a bug)")
        for d in sit.down:
            if d.printer == p.printer and d.start < p.free and (d.until is None or d.until > p.start):
                raise PackerError(f"plate {p.id} is planned on {p.printer} while it is down (a bug)")
    for name, ps in per.items():
        ps.sort(key=lambda p: (p.start, p.id))
        for a, b in zip(ps, ps[1:]):
            if b.state == "planned" and b.start < a.free:
                raise PackerError(f"plates {a.id} and {b.id} overlap on {name} (a bug)")
    if len({p.id for p in new.plates}) != len(new.plates):
        raise PackerError("two plates share an id (a bug)")
