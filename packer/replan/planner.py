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

from collections import defaultdict
from dataclasses import dataclass, field, replace
from typing import Sequence

from packer.errors import PackerError
from packer.fleet.calendar import is_open
from packer.fleet.planner import plan_fleet
from packer.fleet.records import PlannerSettings
from packer.fleet.scoring import late_orders
from packer.fleet.timing import slot
from packer.fleet.timemodel import PartStats
from packer.intake.identity import copy_key
from packer.intake.job import Calendar, Printer
from packer.layouts import LayoutService
from packer.output.plan import plate_id
from packer.replan.floor import lateness_floor
from packer.replan.ledger import Ledger
from packer.replan.moves import other_profiles, renest_shrunk, ways_of
from packer.replan.reasons import why_changed
from packer.replan.sequence import Frame, rank, sequence, timed
from packer.replan.state import FROZEN, PlanState, PlateState, Situation, fmt_time

__all__ = ["ReplanSettings", "Replanned", "replan", "check_replan"]


@dataclass(frozen=True)
class ReplanSettings:
    """The replan's work budget and its shares. Every choice depends on these and on the
    work clock (work the layout calls and solvers report), never on the wall clock, so
    the same events, seed and budget give the same replan on any machine.

    ``seconds``: the work budget (work-clock seconds; about seconds of an idle machine).
    Its shares: the copies that need a plate get ``pool_base_s + pool_per_copy_s`` per
    copy, at most ``seconds``; each CP-SAT sequencing ``schedule_share`` (as deterministic
    time, :func:`~packer.replan.sequence.solve_det`, between ``schedule_det_min`` and
    ``schedule_det``); when an order is later than the lateness floor
    (:func:`~packer.replan.floor.lateness_floor`), layouts for other profiles at most
    ``alt_calls`` ``fits`` calls (each allowed ``alt_fit_s``) and ``alt_share`` of
    reported layout work, then, while still above the floor, planning every plate not
    started again ``dissolve_share``. ``schedule_s`` is only the floor of the solver's
    wall-clock safety net (:func:`~packer.fleet.budget.wall_net`)."""

    seconds: float = 10.0
    schedule_s: float = 5.0
    schedule_share: float = 0.1
    schedule_det_min: float = 0.1
    schedule_det: float = 2.0
    seed: int = 0
    workers: int = 2
    alt_calls: int = 24
    alt_share: float = 0.3
    alt_fit_s: float = 2.0
    dissolve_share: float = 0.3
    pool_base_s: float = 2.0
    pool_per_copy_s: float = 0.05


@dataclass(frozen=True)
class Replanned:
    state: PlanState
    stats: dict = field(default_factory=dict)


@dataclass(frozen=True)
class _Fleet:
    """The replan's view of the fleet: printers, calendar and the layout service."""

    printers: tuple
    stats: tuple
    calendar: Calendar
    layouts: LayoutService
    settings: ReplanSettings


def replan(sit: Situation, *, printers: Sequence[Printer], stats: Sequence[PartStats], calendar: Calendar,
           layouts: LayoutService, settings: ReplanSettings = ReplanSettings()) -> Replanned:
    """The next plan: frozen plates as they are, everything else planned again, lateness first.

    ``layouts`` is the layout service, passed on to :func:`packer.fleet.planner.plan_fleet`
    (the work each call reports feeds the deterministic planning clock).

    Returns
    -------
    Replanned
        The new :class:`PlanState` (ready for the next replan) and figures:
        ``pool`` copies that needed a plate, ``new_plates``, ``dissolved``,
        ``pinned``, ``schedule`` (which plan was kept and why), ``reasons``
        (plate id -> why it changed), ``replan_s``.
    """
    led = Ledger()
    fl = _Fleet(tuple(printers), tuple(stats), calendar, layouts, settings)
    frame, pinned, down_reason = _frame(sit, fl)
    usable = set(frame.ready)
    pinned_src = {(p.printer, p.id, p.origin) for p in pinned}
    rest = [p for p in sit.planned if (p.printer, p.id, p.origin) not in pinned_src]
    kept, pool, dissolved = [], list(sit.pool), []
    for p in rest:
        if ways_of(p, printers, usable):
            kept.append(p)
        else:
            dissolved.append(p.id or p.origin)
            pool += list(p.copies)
    kept, pool, renest_notes = renest_shrunk(kept, pool, printers=printers, stats=stats, layouts=layouts)
    led.step("copies nested again")
    new_plates, unplaced, fleet_stats = _plan_pool(pool, frame, fl, down_reason, _pool_seconds(len(pool), settings))
    led.step("pool plan", fleet_stats)
    tasks = kept + new_plates
    ways = [ways_of(p, printers, usable) for p in tasks]
    base = sequence(tasks, ways, frame, settings)
    led.step("stable sequencing", base)
    floor = 0 if base.rank[0] == 0 else round(lateness_floor([c for p in tasks for c in p.copies], frame,
                                                             printers=printers, stats=stats, layouts=layouts,
                                                             reached=base.rank[0]))
    led.step("lateness floor")
    best, tried = base, {"stable": base.rank}
    if base.rank[0] > floor:
        best, tried, unplaced, fleet_stats = _lower_lateness(base, tasks, ways, kept, pool, unplaced, fleet_stats,
                                                            frame, fl, down_reason, floor, led)
    reasons = why_changed(best, base, _baseline(tasks, ways, frame), sit)

    # ids: kept plates keep theirs; new, moved and shrunk plates get the next numbers, in start order
    number = sit.next_number
    out, named = [], {}
    for k, p in sorted(enumerate(list(pinned) + best.plates), key=lambda kp: (kp[1].start, kp[1].printer, kp[1].id)):
        if not p.id:
            p = replace(p, id=plate_id(number))
            number += 1
        named[k] = p.id
        out.append(p)
    why = {named[k + len(pinned)]: r for k, r in reasons.items()}
    if fleet_stats.get("taken_apart"):
        why = {pid: ("new: copies that needed a plate and copies of the plates taken apart, for lateness"
                     if r.startswith("new:") else r) for pid, r in why.items()}
    for pid in fleet_stats.get("taken_apart", []):
        why[pid] = "taken apart: its copies planned again with the copies that needed a plate, for lateness"
    state = PlanState(start=sit.start, plates=tuple(sorted(list(sit.frozen) + out, key=lambda p: (p.start, p.id))),
                      unplaced=tuple(unplaced), now=sit.now, cancelled=sit.cancelled, down=sit.down,
                      next_number=number)
    check_replan(sit, state, printers=printers, calendar=calendar)
    lat, untouched_n, _, _, starts = best.rank
    return Replanned(state, {"pool": len(pool), "new_plates": sum(1 for p in best.plates if p.origin == "new"),
                             "kept_plates": len(kept), "pinned": len(pinned), "dissolved": dissolved,
                             "renested": renest_notes, "reasons": why, "fleet": fleet_stats,
                             "schedule": {"status": best.status, "kept": best.name, "weighted_lateness_h": lat / 3600,
                                          "floor_h": floor / 3600, "untouched": -untouched_n, "start_moved": starts,
                                          "tried": {k: v[0] / 3600 for k, v in tried.items()}},
                             "work_s": {k: round(v, 3) for k, v in led.work.items()},
                             "safety_nets": list(led.nets), "phases_s": {k: round(v, 2) for k, v in led.wall.items()},
                             "replan_s": led.total()})


def _pool_seconds(n: int, settings: ReplanSettings) -> float:
    """Planning budget for ``n`` copies that need a plate: ``pool_base_s + pool_per_copy_s * n``, at most
    ``seconds`` (a few failed copies need no full budget; a function of the count, so deterministic)."""
    return min(settings.seconds, settings.pool_base_s + settings.pool_per_copy_s * n)


def _frame(sit: Situation, fl: _Fleet):
    """(Frame, pinned plates, down reason per printer).

    A printer is ready at the latest of now, its availability and the clearing of
    its frozen plates. Down windows with an end are left to the sequencing (the free
    time before and after them is used); a printer down for good keeps only the planned
    plates it clears before the window (pinned, left-shifted in their order) and takes
    no other work.
    """
    ready = {p.name: max(sit.now, p.available_from) for p in fl.printers}
    for f in sit.frozen:
        ready[f.printer] = max(ready[f.printer], f.free)
    planned_on = defaultdict(list)
    for p in sorted(sit.planned, key=lambda p: (p.start, p.id)):
        planned_on[p.printer].append(p)
    downs, pinned, reason = {}, [], {}
    for name in sorted(ready):
        wins = sorted((d for d in sit.down if d.printer == name and (d.until is None or d.until > ready[name])),
                      key=lambda d: d.start)
        if not wins:
            continue
        reason[name] = "; ".join(f"{name} is down from {fmt_time(d.start)}" +
                                 (f" until {fmt_time(d.until)}" if d.until else " for good") for d in wins)
        ends = [d for d in wins if d.until is None]
        spans = [(d.start, d.until) for d in wins]
        if not ends:
            downs[name] = tuple(spans)
            continue
        gone = min(d.start for d in ends)
        t = ready[name]
        for p in planned_on[name]:
            got = slot(fl.calendar, t, p.machine_s, p.clear_s, [s for s in spans if s[0] < gone])
            if got is None or got[2] > gone:
                break
            pinned.append(replace(p, start=got[0], end=got[1], free=got[2]))
            t = got[2]
        del ready[name]
    old = {p.id: p for p in sit.planned if p.id}
    return Frame(ready=ready, downs=downs, calendar=fl.calendar, now=sit.now, fixed=tuple(sit.frozen) + tuple(pinned),
                 old=old), pinned, reason


def _lower_lateness(base, tasks, ways, kept, pool, unplaced, fleet_stats, frame, fl, down_reason, floor, led):
    """Some order is later than the floor. First the plates may move to other profiles (layouts
    nested for them, the plates of late orders first); if an order is still later than the
    floor, every plate not started is taken apart and planned again with the pool. The
    best-ranked plan is kept; a step is skipped once a plan reaches the floor."""
    late = late_orders(list(frame.fixed) + list(base.plates))
    tried = {"stable": base.rank}
    first = sorted(range(len(tasks)), key=lambda j: (not ({c.order for c in tasks[j].copies} & late),
                                                      tasks[j].start, tasks[j].id))
    wide, calls, spent = [list(w) for w in ways], 0, 0.0
    for j in first:
        if calls >= fl.settings.alt_calls or spent > fl.settings.alt_share * fl.settings.seconds:
            break
        alt, n, work = other_profiles(tasks[j], fl.printers, set(frame.ready), stats=fl.stats, layouts=fl.layouts,
                                      fit_s=fl.settings.alt_fit_s)
        calls += n
        spent += work
        wide[j] += [w for w in alt if w.printer not in {x.printer for x in wide[j]}]
    led.step("layouts for other profiles", spent)
    best = base
    if any(len(a) > len(b) for a, b in zip(wide, ways)):
        # the stable plan's ways keep their indices in ``wide``: it is a candidate (and the hint) again
        other = sequence(tasks, wide, frame, fl.settings, hint=(base.pick, base.order))
        led.step("sequencing with other profiles", other)
        tried["other profiles"] = other.rank
        best = min(best, other, key=lambda s: s.rank)
    if best.rank[0] > floor and kept and fl.settings.dissolve_share > 0 and not _wide_fits(len(kept), fl):
        led.step(f"every plate not started planned again: skipped ({len(kept)} plates, share too small)")
    elif best.rank[0] > floor and kept and fl.settings.dissolve_share > 0:
        got = _taken_apart(kept, kept, pool, frame, fl, down_reason, fl.settings.dissolve_share, led)
        tried["every plate not started planned again"] = got[0].rank
        if len(got[1]) <= len(unplaced) and got[0].rank < best.rank:
            best, unplaced, fleet_stats = got[0], got[1], dict(got[2], taken_apart=[
                p.id or p.origin.split(":", 1)[1] for p in kept])
    return replace(best, name=best.name if best is base else f"{_label(tried, best)}: {best.name}"), tried, \
        unplaced, fleet_stats


def _wide_fits(plates: int, fl: _Fleet) -> bool:
    """Whether planning every plate not started again can be paid from its share of the budget
    (``dissolve_share`` x ``seconds``). The fleet planner makes at least one layout call per
    plate it builds, each allowed at least ``PlannerSettings.min_fit_s``, and a fresh plan of
    the copies of ``plates`` plates builds about as many: when that many allowances exceed
    the share, the step would cost many times its share (it did, 32 s of work for a 3 s
    share on the 2,000-copy bench day) and is skipped. A function of counts and settings,
    so deterministic."""
    return plates * PlannerSettings().min_fit_s <= fl.settings.dissolve_share * fl.settings.seconds


def _taken_apart(apart, kept, pool, frame, fl: _Fleet, down_reason, share, led):
    """(sequenced plan, unplaced, fleet figures) with the plates ``apart`` taken apart and their
    copies planned again with the pool, the other kept plates as they are."""
    keys = {id(p) for p in apart}
    stay = [p for p in kept if id(p) not in keys]
    fresh, unplaced, stats = _plan_pool(list(pool) + [c for p in apart for c in p.copies], frame, fl, down_reason,
                                        fl.settings.seconds * share)
    led.step("plates not started planned again", stats)
    tasks = stay + fresh
    got = sequence(tasks, [ways_of(p, fl.printers, set(frame.ready)) for p in tasks], frame, fl.settings)
    led.step("sequencing of the plates planned again", got)
    return got, unplaced, stats


def _label(tried: dict, best) -> str:
    return next(k for k, v in tried.items() if v == best.rank)


def _baseline(tasks, ways, frame) -> tuple[list, tuple | None]:
    """The plan that disturbs least (every plate on its own printer, in the old order) and its rank."""
    order = sorted(range(len(tasks)), key=lambda j: (tasks[j].start, tasks[j].id))
    got = timed(tasks, ways, [0] * len(tasks), order, frame) if tasks else []
    return (got, rank(got, frame)) if got is not None else ([], None)


def _plan_pool(pool, frame, fl: _Fleet, down_reason, seconds):
    """New plates for the copies that need one, by the fleet planner."""
    if not pool:
        return [], [], {}
    avail = []
    for p in fl.printers:
        if p.name not in frame.ready:
            continue
        avail.append(replace(p, available_from=frame.free_from(p.name)))
    if not avail:
        why = "no printer is available: " + "; ".join(down_reason[n] for n in sorted(down_reason))
        return [], [(c, why) for c in pool], {}
    res = plan_fleet(pool, avail, stats=fl.stats, calendar=fl.calendar, start=frame.now, layouts=fl.layouts,
                     seconds=seconds, seed=fl.settings.seed)
    plates = [PlateState(id="", printer=pj.printer, material=pj.material, copies=pj.copies, start=pj.start,
                         end=pj.end, free=pj.free, machine_s=pj.time.machine_s, clear_s=pj.time.clear_s,
                         origin="new", layout=pj.layout) for pj in res.plates]
    unplaced = []
    for c, why in res.unplaced:
        could = [n for n in sorted(down_reason) if fl.layouts.can_print(next(p for p in fl.printers if p.name == n), c) is None
                 and c.material in next(p for p in fl.printers if p.name == n).materials]
        if could:
            why = f"{why}; " + "; ".join(down_reason[n] for n in could)
        unplaced.append((c, why))
    return plates, unplaced, {"fits_calls": res.stats.get("fits_calls"), "planning_s": res.stats.get("planning_s"),
                              "work_clock_s": res.stats.get("work_clock_s", 0.0),
                              "deterministic": res.stats.get("deterministic", True)}


def check_replan(sit: Situation, new: PlanState, *, printers: Sequence[Printer], calendar: Calendar) -> None:
    """Check a replan independently of how it was made; raise :class:`PackerError` on a bug.

    Every copy that was in the plan or added and is not cancelled is on exactly
    one plate or unplaced with a reason; frozen plates are unchanged; plates
    not started begin at or after ``now`` on a printer of their profile and
    material, start inside a shift, and neither overlap on a printer nor touch
    a down window of it.
    """
    gone = set(sit.cancelled)
    want = {copy_key(c) for c in sit.pool} | {copy_key(c) for p in sit.planned for c in p.copies} \
        | {copy_key(c) for p in sit.frozen for c in p.copies}
    seen: dict = defaultdict(int)
    for p in new.plates:
        for c in p.copies:
            seen[copy_key(c)] += 1
    for c, why in new.unplaced:
        seen[copy_key(c)] += 1
        if not why:
            raise PackerError(f"unplaced copy {copy_key(c)} has no reason")
    dup = sorted(k for k, v in seen.items() if v > 1)
    if dup or set(seen) != want:
        raise PackerError(f"replan does not account for every copy once (a bug): duplicated {dup[:3]}, "
                          f"missing {sorted(want - set(seen))[:3]}, unexpected {sorted(set(seen) - want)[:3]}")
    for c in (c for p in new.plates if p.state == "planned" for c in p.copies):
        if c.order in gone:
            raise PackerError(f"copy {copy_key(c)} of a cancelled order is still planned (a bug)")
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
