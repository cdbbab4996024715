"""The fleet planner: which copies go on which plate of which printer, and when.

The planner works against one layout service (:class:`packer.layouts.LayoutService`)
so it does not depend on the engines: ``can_print`` screens a copy against a
printer, ``capacity`` cheaply estimates the share of a plate a set of copies
needs (an area or volume bound), ``fits`` confirms a plate with a real, verified
layout, ``fill`` lays out required copies and as many more as fit, and
``traits`` says what the planner may assume of a printer's layouts.

How a plan is made
------------------
1. Screening: a copy no printer can print goes to ``unplaced`` with the
   reasons the printers gave.
2. Plate contents by list scheduling, per technology: the printer that can
   start soonest takes the most urgent remaining copies of one material it
   runs, in the order (due half-day, height, priority, due, name), while the
   capacity hint and the fill rule (``FILL_MODES``) allow. Sorting by height
   within a due half-day is the height banding (copies of similar height
   share a plate; for resin the tallest copy sets the plate's time). Every
   rule, banded or not, is tried on hint-only plates; the best is built with
   ``fits`` (and the runner-up too while the budget allows).
3. Confirmation: ``fits`` confirms each plate; when it does not, the longest
   fitting prefix is found by bisection (at most ``max_fit_tries`` calls,
   starting from the fill the profile reached before) and the rest goes back
   to the pool; a copy that does not fit alone on an empty plate of a profile
   is kept off that profile.
4. Merging: the emptiest plates are merged into partners when ``fits``
   agrees and the re-timed plan gets better.
5. Sequencing with CP-SAT (:mod:`packer.fleet.schedule`): plate contents
   fixed, printers (same profile) and starts chosen for weighted lateness,
   then finish.
6. Contents with CP-SAT (:mod:`packer.fleet.contents`): copies of each order
   line move between filament and resin plates (lateness, then finish, then
   plates); each changed plate is confirmed by ``fits``, overflow goes to new
   plates and the slots that did not nest get a lower capacity in the next
   round (``contents_rounds``, bounded).

Every candidate plan is re-timed in real seconds with the calendar (left
shift, never later than the model's times) and the best by (weighted
lateness, finish, plates) is kept and checked by :func:`check_plan`.

Every budget decision reads a work clock (:mod:`packer.fleet.clock`): layout
calls are charged the work their answers report (``Attempt.work_s``),
CP-SAT solves their deterministic time. So the plan is the same per job, seed
and budget (when ``fits`` is deterministic) on any machine, unless a wall-clock
safety net of a solver fires; ``stats["deterministic"]`` tells.
"""


from __future__ import annotations

import math
import time as _time
from collections.abc import Sequence
from dataclasses import replace as dc_replace
from datetime import datetime, timedelta

from packer.errors import InputError, PackerError
from packer.fleet.builder import Builder
from packer.fleet.calendar import check_calendar
from packer.fleet.clock import WorkClock
from packer.fleet.improve import Improver
from packer.fleet.lowfill import empty_low_plates
from packer.fleet.planbounds import BoundsMixin
from packer.fleet.records import FILL_MODES, CopyRef, FleetResult, PlannerSettings, PlannedPlate, copy_key
from packer.fleet.scoring import late_orders, score_plan
from packer.fleet.timemodel import PartStats
from packer.intake.job import Calendar, Printer
from packer.layouts import LayoutService

__all__ = ["CopyRef", "PlannedPlate", "FleetResult", "PlannerSettings", "plan_fleet", "check_plan",
           "score_plan", "FILL_MODES"]


class _Context(Builder, Improver, BoundsMixin):
    """Everything one plan needs: caches, counters and the steps."""


#: layout calls kept back from the final merge for emptying under-filled plates
LOWFILL_CALLS = 6


def plan_fleet(copies: Sequence[CopyRef], printers: Sequence[Printer], *,
               stats: Sequence[PartStats], calendar: Calendar, start: datetime,
               layouts: LayoutService, seconds: float, seed: int = 0,
               settings: PlannerSettings | None = None) -> FleetResult:
    """Plan plates, printers and start times for a day's copies.

    Parameters
    ----------
    copies
        Every copy to print, each once.
    printers
        The fleet.
    stats
        Part statistics; ``copies[k].kind`` indexes it.
    calendar
        Operator shifts.
    start
        Planning origin: nothing starts before it.
    layouts
        The layout service (:class:`packer.layouts.LayoutService`). ``fits`` gives a
        verified layout of a set on a printer's plate (its ``build_height_mm`` feeds
        the time model), every call with the work it cost, which the work clock adds
        up. ``capacity(printer, copies)`` is the share of the plate the set needs by
        an area (volume) bound; the planner adds single-copy hints, so it should be
        nearly additive; it is also used for the plate bound. ``can_print(printer,
        copy)`` is None or the reason it cannot, cached per (printer, kind, material).
        Where ``traits(printer).pool_fill``, each new plate takes one ``fill`` call
        (the engine picks from more candidates than fit, so small copies fill the
        gaps); elsewhere, or when it finds no layout, the longest fitting prefix is
        found by bisection with ``fits``.
    seconds
        Budget for the whole plan (plates and sequencing), in seconds of planning
        work on the work clock (:mod:`packer.fleet.clock`), which tracks the wall
        clock of an idle machine.
    seed
        Seed of the solver.
    settings

    Returns
    -------
    FleetResult
        ``bounds`` holds the plate bounds per technology and material and the
        finishing-time bound; ``stats`` the objective values, timings and the
        height-band comparison.

    Raises
    ------
    InputError
        On an empty fleet, a bad calendar or a ``kind`` outside ``stats``.
    """
    t0 = _time.monotonic()
    settings = settings or PlannerSettings()
    check_calendar(calendar)
    if not printers:
        raise InputError("the fleet has no printer")
    printers = sorted(printers, key=lambda p: p.name)
    for c in copies:
        if not 0 <= c.kind < len(stats):
            raise InputError(f"copy {c.order}/{c.part}/{c.copy}: kind {c.kind} is not in stats")
    ctx = _Context(printers, stats, calendar, start, layouts, settings)
    ctx.clock = clock = WorkClock()
    ctx.deadline = settings.build_share * seconds
    eligible, unplaced = ctx.screen(copies)
    pool = [c for c in copies if eligible.get(copy_key(c))]

    # per technology (separate printers), pick the fill rule and the banding by list schedules
    # on capacity-hint plates (no fits calls), then build the chosen one with fits
    plates, choice, trials, band_trials = [], {}, {}, ([], [])
    by_tech: dict = {}
    for c in pool:
        by_tech.setdefault(ctx.tech_of[printers[eligible[copy_key(c)][0]].name], []).append(c)
    hint_trials = {tech: {(m, b): ctx.build(part, eligible, banded=b, mode=m, confirm=False)
                          for m in FILL_MODES for b in (True, False)}
                   for tech, part in sorted(by_tech.items())}
    # what each fits call may use: a share of the budget over the calls expected (hint plates)
    hint_plates = sum(min(len(t.plates) for t in tr.values()) for tr in hint_trials.values())
    expected_calls = settings.fits_calls_per_plate * hint_plates + settings.fits_calls_extra
    ctx.fit_allowance = max(settings.min_fit_s, settings.fits_share * seconds / expected_calls)
    ctx.hard_end = seconds
    for tech, part in sorted(by_tech.items()):
        tr = hint_trials[tech]
        ranked = sorted(tr, key=lambda k: (score_plan(tr[k].plates, start), FILL_MODES.index(k[0]), not k[1]))
        mode, banded = ranked[0]
        built = ctx.build(part, eligible, banded=banded, mode=mode)
        # hint plates can mislead when fits trims plates: build the runner-up for real too
        # while the budget allows, and keep the better real plan
        if len(ranked) > 1 and not ctx.past(settings.second_try_share * seconds, "runner-up build skipped"):
            m2, b2 = next((k for k in ranked[1:] if k[0] != mode), ranked[1])
            other = ctx.build(part, eligible, banded=b2, mode=m2)
            if (score_plan(other.plates, start), len(other.unplaced)) < (score_plan(built.plates, start), len(built.unplaced)):
                built, mode, banded = other, m2, b2
        unplaced += built.unplaced
        plates += built.plates
        choice[tech] = f"{mode}/{'banded' if banded else 'mixed'}"
        trials.update({f"{tech}/{m}/{'banded' if b else 'mixed'}": score_plan(t.plates, start)
                       for (m, b), t in tr.items()})
        band_trials[0].extend(tr[(mode, True)].plates)
        band_trials[1].extend(tr[(mode, False)].plates)
    plates = [dc_replace(p, id=f"G{k}") for k, p in enumerate(plates)]   # unique across technologies
    ctx.deadline = math.inf      # later plates (contents overflow) get every fits call
    phases = {"plates_s": _time.monotonic() - t0}
    work = {"plates_s": clock.now()}
    merge_deadline = clock.now() + max(0.5, seconds - clock.now()) * settings.merge_share
    plates, merges = ctx.merge(plates, merge_deadline)
    phases["merge_s"] = _time.monotonic() - t0 - sum(phases.values())
    greedy_score = score_plan(plates, start)

    work["merge_s"] = clock.now() - sum(work.values())
    left = max(0.5, (seconds - clock.now()) * settings.schedule_share)
    sched_stats: dict = {"status": "not run"}
    contents_stats: dict = {"status": "not run"}
    if plates:
        share = settings.contents_share if settings.contents else 0.0
        improved, sched_stats = ctx.sequence(plates, left * (1 - share), seed,
                                             settings.sequence_effort * seconds)
        if improved is not None and score_plan(improved, start) < greedy_score:
            plates = improved
            sched_stats["used"] = True
        phases["sequence_s"] = _time.monotonic() - t0 - sum(phases.values())
        work["sequence_s"] = clock.now() - sum(work.values())
        remaining = seconds - clock.now()
        if settings.contents:
            moved, contents_stats = ctx.contents(plates, pool, eligible, remaining * settings.schedule_share,
                                                 seed, seconds, settings.contents_effort * seconds)
            if moved is not None and score_plan(moved, start) < score_plan(plates, start):
                plates = moved
                contents_stats["used"] = True
    phases["contents_s"] = _time.monotonic() - t0 - sum(phases.values())
    work["contents_s"] = clock.now() - sum(work.values())
    final_merges = 0
    if settings.final_merge and plates:
        # the CP-SAT steps can leave under-filled plates (overflow, cut plates): merge them when
        # no order gets later and the day does not end later
        # fresh ids: contents overflow numbers its new plates from the count, which can repeat an
        # id left by the first merge, and merging identifies plates by id
        plates = [dc_replace(p, id=f"F{k}") for k, p in enumerate(plates)]
        plates, final_merges = ctx.merge(plates, seconds - (2 + LOWFILL_CALLS) * (ctx.fit_allowance or 0.0))
        phases["final_merge_s"] = _time.monotonic() - t0 - sum(phases.values())
        work["final_merge_s"] = clock.now() - sum(work.values())
    emptied, notes = 0, {}
    if plates:
        # under-filled plates: emptied into others where no order gets later, or a reason noted
        plates = [dc_replace(p, id=f"L{k}") for k, p in enumerate(plates)]
        plates, notes, emptied = empty_low_plates(ctx, plates, deadline=seconds - (ctx.fit_allowance or 0.0))
        plates = [dc_replace(p, note=notes.get(p.id, "")) for p in plates]
        phases["low_fill_s"] = _time.monotonic() - t0 - sum(phases.values())
        work["low_fill_s"] = clock.now() - sum(work.values())
    plates = tuple(_renumber(plates))
    result_unplaced = tuple(unplaced)
    check_plan(plates, result_unplaced, copies, printers, calendar=calendar, start=start)
    lat, finish, n = score_plan(plates, start)
    # the only wall-clock decisions left: a solver stopped by its wall-clock safety net
    nets = (["sequencing solver stopped by the wall clock"] if not sched_stats.get("deterministic", True) else []) \
        + (["contents solver stopped by the wall clock"] if not all(
            r.get("deterministic", True) for r in contents_stats.get("rounds", []) if isinstance(r, dict)) else [])
    stats_out = {
        "copies": len(copies), "printers": len(printers), "plates": len(plates),
        "unplaced": len(result_unplaced),
        "weighted_lateness_h": lat / 3600.0,
        "late_orders": len(late_orders(plates)),
        "finish": start + timedelta(seconds=finish) if plates else start,
        "greedy_weighted_lateness_h": greedy_score[0] / 3600.0,
        "greedy_finish": start + timedelta(seconds=greedy_score[1]),
        "schedule": sched_stats,
        "contents": contents_stats,
        "fits_calls": ctx.fits_calls,
        "merged_plates": merges,
        "final_merged_plates": final_merges,
        "emptied_low_plates": emptied,
        "kept_low_plates": len(notes),
        "fit_allowance_s": ctx.fit_allowance,
        "fill": choice, "trials": trials,
        "height_bands": _band_report(band_trials[0], band_trials[1], start, ctx.tech_of),
        "planning_s": _time.monotonic() - t0,
        "work_clock_s": clock.now(),
        "phases_s": {k: round(v, 2) for k, v in phases.items()},
        "work_phases_s": {k: round(v, 2) for k, v in work.items()},
        "budget_cuts": list(ctx.cuts),
        "fits_s": round(ctx.fits_s, 2),
        "safety_nets": nets,
        "deterministic": not nets,
    }
    return FleetResult(plates=plates, unplaced=result_unplaced,
                       bounds=ctx.bounds(pool, eligible, plates), stats=stats_out)



def _renumber(plates: Sequence[PlannedPlate]):
    from dataclasses import replace
    order = sorted(plates, key=lambda p: (p.start, p.printer))
    width = max(2, len(str(len(order))))
    return [replace(p, id=f"P{k + 1:0{width}d}") for k, p in enumerate(order)]


def _band_report(banded: Sequence[PlannedPlate], mixed: Sequence[PlannedPlate], origin: datetime,
                 tech_of: dict) -> dict:
    """Machine time and finish of the list schedule with and without height bands (hint-only plates)."""
    def machine(ps):
        return sum(p.time.machine_s for p in ps)
    out = {"banded_machine_h": machine(banded) / 3600, "mixed_machine_h": machine(mixed) / 3600}
    for tech in sorted({tech_of[p.printer] for p in list(banded) + list(mixed)}):
        out[f"{tech}_saved_machine_h"] = (
            machine([p for p in mixed if tech_of[p.printer] == tech])
            - machine([p for p in banded if tech_of[p.printer] == tech])) / 3600
    out["saved_machine_h"] = out["mixed_machine_h"] - out["banded_machine_h"]
    out["banded_finish_h"] = score_plan(banded, origin)[1] / 3600
    out["mixed_finish_h"] = score_plan(mixed, origin)[1] / 3600
    out["note"] = "list schedule on capacity-hint plates (no fits), same fill target"
    return out


def check_plan(plates: Sequence[PlannedPlate], unplaced: Sequence[tuple[CopyRef, str]],
               copies: Sequence[CopyRef], printers: Sequence[Printer], *,
               calendar: Calendar, start: datetime) -> None:
    """Check a fleet plan independently of how it was made.

    Every copy exactly once (on a plate or unplaced with a reason); each plate
    of one material its printer runs, starting inside a shift, no earlier than
    ``start`` and its printer's availability, cleared inside one shift, and no
    two plates overlapping on a printer (from start to free).

    Raises
    ------
    PackerError
        Naming the first broken rule (a planner bug).
    """
    from packer.fleet.calendar import is_open
    seen: dict = {}
    for p in plates:
        for c in p.copies:
            seen[copy_key(c)] = seen.get(copy_key(c), 0) + 1
    for c, reason in unplaced:
        if not reason:
            raise PackerError(f"unplaced copy {copy_key(c)} has no reason")
        seen[copy_key(c)] = seen.get(copy_key(c), 0) + 1
    want = {copy_key(c) for c in copies}
    if set(seen) != want or any(v != 1 for v in seen.values()):
        extra = sorted(k for k, v in seen.items() if v != 1 or k not in want)[:3]
        missing = sorted(want - set(seen))[:3]
        raise PackerError(f"copies not placed exactly once: repeated/unknown {extra}, missing {missing}")
    by_name = {p.name: p for p in printers}
    per_printer: dict = {}
    for p in plates:
        pr = by_name.get(p.printer)
        if pr is None:
            raise PackerError(f"plate {p.id} on unknown printer {p.printer}")
        if any(c.material != p.material for c in p.copies) or p.material not in pr.materials:
            raise PackerError(f"plate {p.id}: material mix or a material {p.printer} does not run")
        if not is_open(calendar, p.start):
            raise PackerError(f"plate {p.id} starts at {p.start}, outside the shifts")
        if p.start < max(start, pr.available_from) or p.end < p.start:
            raise PackerError(f"plate {p.id} starts before its printer is available")
        clear_at = p.free - timedelta(seconds=p.time.clear_s)
        last = p.free - timedelta(microseconds=1) if p.time.clear_s > 0 else clear_at
        if clear_at < p.end or not is_open(calendar, clear_at) or not is_open(calendar, last) \
                or last.date() != clear_at.date():
            raise PackerError(f"plate {p.id} is cleared outside a shift")
        per_printer.setdefault(p.printer, []).append(p)
    for name, ps in per_printer.items():
        ps.sort(key=lambda p: p.start)
        for a, b in zip(ps, ps[1:]):
            if b.start < a.free:
                raise PackerError(f"plates {a.id} and {b.id} overlap on printer {name}")

