"""The fleet planner: which copies go on which plate of which printer, and when.

The planner works against one layout service (:class:`packer.layouts.LayoutService`),
not the engines: ``can_print`` screens a copy against a printer, ``capacity``
estimates the share of a plate a set needs (an area or volume bound), ``fits``
confirms a plate with a verified layout, ``fill`` lays out required copies and as
many more as fit, ``traits`` says what the planner may assume of a printer's layouts.

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
3. Confirmation: ``fits`` confirms each plate, else the longest fitting prefix
   is found by bisection (``max_fit_tries`` calls at most, from the fill the
   profile reached before), the rest back to the pool; a copy that does not
   fit alone on an empty plate of a profile is kept off that profile.
4. Merging: the emptiest plates are merged into partners when ``fits``
   agrees and the re-timed plan gets better.
5. Sequencing with CP-SAT (:mod:`packer.fleet.schedule`): contents fixed,
   printers (same profile) and starts for weighted lateness, then finish.
6. Contents with CP-SAT (:mod:`packer.fleet.contents`): copies of each order
   line move between filament and resin plates (lateness, then finish, then
   plates); each changed plate is confirmed by ``fits``, overflow goes to new
   plates, slots that did not nest get a lower capacity in the next round.
7. Merging again, under-filled plates emptied or given a reason
   (:mod:`packer.fleet.lowfill`), whole plates moved to earlier places in the
   queues (:mod:`packer.fleet.requeue`), each while no order gets later.

Every candidate plan is re-timed in real seconds with the calendar (left shift) and
the best by (weighted lateness, finish, plates) is kept and checked by :func:`check_plan`.

Every budget decision reads a work clock (:mod:`packer.fleet.clock`): layout
calls are charged the work their answers report (``Attempt.work_s``),
CP-SAT solves their deterministic time. So the plan is the same per job, seed
and budget (when ``fits`` is deterministic) on any machine, unless a wall-clock
safety net of a solver fires; ``stats["deterministic"]`` tells.
"""

from __future__ import annotations

import time as _time
from collections.abc import Sequence
from dataclasses import dataclass, field
from dataclasses import replace as dc_replace
from datetime import datetime, timedelta

from packer.errors import InputError
from packer.fleet.budget import Budget
from packer.fleet.builder import build_plates
from packer.fleet.calendar import check_calendar
from packer.fleet.check import check_plan
from packer.fleet.clock import WorkClock
from packer.fleet.consolidate import consolidate
from packer.fleet.improve import move_copies, sequence_fixed
from packer.fleet.lowfill import empty_low_plates
from packer.fleet.hinttrials import largest_plates_trial, spare_trial
from packer.fleet.merge import merge_plates
from packer.fleet.planbounds import finish_bound, plan_bounds
from packer.fleet.records import FILL_MODES, CopyRef, FleetResult, PlannerSettings, PlannedPlate, copy_key
from packer.fleet.requeue import requeue_plates
from packer.fleet.scoring import late_orders, score_plan
from packer.fleet.split import split_late_builds
from packer.fleet.timemodel import PartStats
from packer.fleet.view import FleetView, screen
from packer.intake.job import Calendar, Printer
from packer.layouts import LayoutService

__all__ = ["CopyRef", "PlannedPlate", "FleetResult", "PlannerSettings", "plan_fleet", "check_plan", "score_plan",
           "FILL_MODES"]


#: layout calls kept back from the final merge for emptying under-filled plates
LOWFILL_CALLS = 6


def plan_fleet(copies: Sequence[CopyRef], printers: Sequence[Printer], *,
               stats: Sequence[PartStats], calendar: Calendar, start: datetime,
               layouts: LayoutService, seconds: float, seed: int = 0,
               settings: PlannerSettings | None = None, finish_floor: datetime | None = None) -> FleetResult:
    """Plan plates, printers and start times for a day's copies.

    Parameters
    ----------
    copies, printers
        Every copy to print, each once; the fleet.
    stats
        Part statistics; ``copies[k].kind`` indexes it.
    calendar, start
        Operator shifts; the planning origin (nothing starts before it).
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
    seed, settings
        Seed of the solver; the planner's knobs.
    finish_floor
        The whole fleet's finishing bound when these copies are one component of it: fewer
        plates may buy a finish up to ``finish_slack`` x the later of it and their own bound.

    Returns
    -------
    FleetResult
        ``bounds``: plate, lateness and finish bounds; ``stats``: objectives, timings.

    Raises
    ------
    InputError
        On an empty fleet, a bad calendar or a ``kind`` outside ``stats``.
    """
    t0 = _time.monotonic()
    settings = settings or PlannerSettings()
    printers = _checked(copies, printers, stats, calendar)
    eligible, unplaced = screen(copies, printers, layouts)
    view = FleetView(printers, stats, calendar, start, settings, layouts, eligible)
    pool = [c for c in copies if eligible.get(copy_key(c))]
    by_tech = _by_technology(view, pool)
    # every fill rule, banded or not, on capacity-hint plates (no layout calls)
    hints = {tech: {(m, b): build_plates(view, None, part, banded=b, mode=m) for m in FILL_MODES for b in (True, False)}
             for tech, part in sorted(by_tech.items())}
    budget = Budget(settings, layouts, fit_allowance=_fit_allowance(settings, seconds, hints), hard_end=seconds)
    log = _Log(t0, budget.clock)
    plates = _build(view, budget, by_tech, hints, seconds, log, finish_floor)
    unplaced += log.unplaced
    log.mark("plates_s")
    plates = _consolidate(view, budget, pool, plates, seconds, log, finish_floor)
    log.mark("consolidate_s")
    now = budget.clock.now()
    plates, log.merges = merge_plates(view, budget, plates, now + max(0.5, seconds - now) * settings.merge_share)
    log.mark("merge_s")
    log.greedy = score_plan(plates, start)
    plates = _cp_sat_steps(view, budget, plates, seed, seconds, log)
    log.mark("contents_s")
    plates = tuple(_renumber(_last_steps(view, budget, plates, seconds, log)))
    unplaced = tuple(unplaced)
    check_plan(plates, unplaced, copies, printers, calendar=calendar, start=start)
    return FleetResult(plates=plates, unplaced=unplaced, bounds=plan_bounds(view, pool, plates),
                       stats=_stats(view, budget, log, copies, plates, unplaced))


def _checked(copies, printers, stats, calendar) -> list:
    """The printers sorted by name, after checking the calendar, the fleet and the copies' kinds."""
    check_calendar(calendar)
    if not printers:
        raise InputError("the fleet has no printer")
    for c in copies:
        if not 0 <= c.kind < len(stats):
            raise InputError(f"copy {c.order}/{c.part}/{c.copy}: kind {c.kind} is not in stats")
    return sorted(printers, key=lambda p: p.name)


def _by_technology(view: FleetView, pool) -> dict:
    """The pool per technology (of the first printer that may print each copy)."""
    by_tech: dict = {}
    for c in pool:
        by_tech.setdefault(view.tech_of[view.printers[view.eligible[copy_key(c)][0]].name], []).append(c)
    return by_tech


def _fit_allowance(settings: PlannerSettings, seconds: float, hints: dict) -> float:
    """What each layout call may use: a share of the budget over the calls expected (hint plates)."""
    hint_plates = sum(min(len(t.plates) for t in tr.values()) for tr in hints.values())
    expected_calls = settings.fits_calls_per_plate * hint_plates + settings.fits_calls_extra
    return max(settings.min_fit_s, settings.fits_share * seconds / expected_calls)


@dataclass
class _Log:
    """What the phases report: wall and work-clock seconds per phase, and their figures."""

    t0: float
    clock: WorkClock
    phases: dict = field(default_factory=dict)
    work: dict = field(default_factory=dict)
    unplaced: list = field(default_factory=list)
    choice: dict = field(default_factory=dict)
    trials: dict = field(default_factory=dict)
    bands: tuple = field(default_factory=lambda: ([], []))
    merges: int = 0
    consolidated: int = 0
    final_merges: int = 0
    greedy: tuple = ()
    schedule: dict = field(default_factory=lambda: {"status": "not run"})
    contents: dict = field(default_factory=lambda: {"status": "not run"})
    emptied: int = 0
    kept_low: int = 0
    requeued: int = 0
    splits: int = 0     # late builds split

    def mark(self, name: str) -> None:
        """Close phase ``name``: the seconds since the previous phase on both clocks."""
        self.phases[name] = _time.monotonic() - self.t0 - sum(self.phases.values())
        self.work[name] = self.clock.now() - sum(self.work.values())


def _build(view: FleetView, budget: Budget, by_tech: dict, hints: dict, seconds: float, log: _Log,
           floor: datetime | None) -> list:
    """Per technology (separate printers), build the best fill rule on hint plates with layouts, and
    while the budget allows the runner-up too (hint plates can mislead when layouts trim plates),
    keeping the better real plan. Plates get ids unique across technologies."""
    settings, start = view.settings, view.start
    plates = []
    for tech, part in sorted(by_tech.items()):
        tr = hints[tech]
        ranked = sorted(tr, key=lambda k: (score_plan(tr[k].plates, start), FILL_MODES.index(k[0]), not k[1]))
        mode, banded = ranked[0]
        spare, best = spare_trial(view, part, tr[ranked[0]], mode, banded)
        only = largest_plates_trial(view, tech, part, best, mode, banded, _finish_cap(view, part, floor), spare)
        few = settings.build_share * seconds
        built = build_plates(view, budget, part, banded=banded, mode=mode, few_calls_after=few, only=only, spare=spare)
        if len(ranked) > 1 and not budget.past(settings.second_try_share * seconds, "runner-up build skipped"):
            m2, b2 = next((k for k in ranked[1:] if k[0] != mode), ranked[1])
            other = build_plates(view, budget, part, banded=b2, mode=m2, few_calls_after=few)
            if (score_plan(other.plates, start), len(other.unplaced)) < \
                    (score_plan(built.plates, start), len(built.unplaced)):
                built, mode, banded, spare = other, m2, b2, False
        log.unplaced += built.unplaced
        plates += built.plates
        log.choice[tech] = f"{mode}/{'banded' if banded else 'mixed'}" + ("/largest plates" if only else "") \
            + ("/by scarcity" if spare else "")
        log.trials.update({f"{tech}/{m}/{'banded' if b else 'mixed'}": score_plan(t.plates, start)
                           for (m, b), t in tr.items()})
        log.bands[0].extend(tr[(mode, True)].plates)
        log.bands[1].extend(tr[(mode, False)].plates)
    return [dc_replace(p, id=f"G{k}") for k, p in enumerate(plates)]


def _consolidate(view: FleetView, budget: Budget, pool, plates, seconds: float, log: _Log,
                 floor: datetime | None) -> list:
    """The emptiest plates shared out over the others of their group (``consolidate_share`` of
    the budget left), while no order gets later and the day ends within ``finish_slack`` x its
    bound (or no later than it does)."""
    if not plates:
        return plates
    s = view.settings
    now = budget.clock.now()
    cap = _finish_cap(view, pool, floor)
    plates = [dc_replace(p, id=f"C{k}") for k, p in enumerate(plates)]
    plates, log.consolidated = consolidate(view, budget, plates, deadline=now + (seconds - now) * s.consolidate_share,
                                           finish_cap=cap)
    return plates


def _finish_cap(view: FleetView, pool, floor: datetime | None) -> datetime:
    """When the plates of ``pool`` may end: ``finish_slack`` x their finishing bound, the bound
    raised to ``floor`` (the day ends no earlier anyway) when that is later."""
    bound = finish_bound(view, pool)
    if floor is not None:
        bound = max(bound, floor)
    return view.start + (bound - view.start) * view.settings.finish_slack


def _cp_sat_steps(view: FleetView, budget: Budget, plates, seed: int, seconds: float, log: _Log) -> list:
    """Sequencing with contents fixed, then moving copies between plates; each plan kept when it
    scores better."""
    settings, start = view.settings, view.start
    if not plates:
        return plates
    left = max(0.5, (seconds - budget.clock.now()) * settings.schedule_share)
    share = settings.contents_share if settings.contents else 0.0
    improved, log.schedule = sequence_fixed(view, budget, plates, left * (1 - share), seed,
                                            settings.sequence_effort * seconds)
    if improved is not None and score_plan(improved, start) < log.greedy:
        plates = improved
        log.schedule["used"] = True
    log.mark("sequence_s")
    remaining = seconds - budget.clock.now()
    if settings.contents:
        moved, log.contents = move_copies(view, budget, plates, remaining * settings.schedule_share, seed,
                                          seconds, settings.contents_effort * seconds)
        if moved is not None and score_plan(moved, start) < score_plan(plates, start):
            plates = moved
            log.contents["used"] = True
    return plates


def _last_steps(view: FleetView, budget: Budget, plates, seconds: float, log: _Log) -> list:
    """Merging again, late builds split, under-filled plates, then whole plates moved to earlier places."""
    if view.settings.final_merge and plates:
        plates = _final_merge(view, budget, plates, seconds, log)
        log.mark("final_merge_s")
    if plates:
        plates, log.splits = split_late_builds(view, budget, plates, deadline=seconds - (budget.fit_allowance or 0))
        plates = _low_fill(view, budget, plates, seconds, log)
        log.mark("low_fill_s")
    if view.settings.requeue_share > 0 and plates:
        plates, log.requeued = requeue_plates(view, budget, plates, view.settings.requeue_share * seconds)
        log.mark("requeue_s")
    return plates


def _final_merge(view: FleetView, budget: Budget, plates, seconds: float, log: _Log) -> list:
    """The CP-SAT steps can leave under-filled plates (overflow, cut plates): merge them when
    no order gets later and the day does not end later. Fresh ids first: contents overflow
    numbers its new plates from the count, which can repeat an id left by the first merge,
    and merging identifies plates by id."""
    plates = [dc_replace(p, id=f"F{k}") for k, p in enumerate(plates)]
    plates, log.final_merges = merge_plates(view, budget, plates,
                                            seconds - (2 + LOWFILL_CALLS) * (budget.fit_allowance or 0.0))
    return plates


def _low_fill(view: FleetView, budget: Budget, plates, seconds: float, log: _Log) -> list:
    """Under-filled plates emptied into others where no order gets later, or a reason noted."""
    plates = [dc_replace(p, id=f"L{k}") for k, p in enumerate(plates)]
    plates, notes, log.emptied = empty_low_plates(view, budget, plates,
                                                  deadline=seconds - (budget.fit_allowance or 0.0))
    log.kept_low = len(notes)
    return [dc_replace(p, note=notes.get(p.id, "")) for p in plates]


def _stats(view: FleetView, budget: Budget, log: _Log, copies, plates, unplaced) -> dict:
    """The figures of ``FleetResult.stats``."""
    start = view.start
    lat, finish, _ = score_plan(plates, start)
    # the only wall-clock decisions left: a solver stopped by its wall-clock safety net
    nets = (["sequencing solver stopped by the wall clock"] if not log.schedule.get("deterministic", True) else []) \
        + (["contents solver stopped by the wall clock"] if not all(
            r.get("deterministic", True) for r in log.contents.get("rounds", []) if isinstance(r, dict)) else [])
    return {
        "copies": len(copies), "printers": len(view.printers), "plates": len(plates), "unplaced": len(unplaced),
        "weighted_lateness_h": lat / 3600.0, "late_orders": len(late_orders(plates)),
        "finish": start + timedelta(seconds=finish) if plates else start,
        "greedy_weighted_lateness_h": log.greedy[0] / 3600.0, "greedy_finish": start + timedelta(seconds=log.greedy[1]),
        "schedule": log.schedule, "contents": log.contents, "fits_calls": budget.fits_calls,
        "consolidated_plates": log.consolidated, "merged_plates": log.merges,
        "final_merged_plates": log.final_merges, "requeued_plates": log.requeued,
        "emptied_low_plates": log.emptied, "kept_low_plates": log.kept_low,
        **({"split_late_builds": log.splits} if log.splits else {}),
        "fit_allowance_s": budget.fit_allowance,
        "fill": log.choice, "trials": log.trials,
        "height_bands": _band_report(log.bands[0], log.bands[1], start, view.tech_of),
        "planning_s": _time.monotonic() - log.t0,
        "work_clock_s": budget.clock.now(),
        "phases_s": {k: round(v, 2) for k, v in log.phases.items()},
        "work_phases_s": {k: round(v, 2) for k, v in log.work.items()},
        "budget_cuts": list(budget.cuts),
        "fits_s": round(budget.fits_s, 2),
        "safety_nets": nets, "deterministic": not nets,
    }


def _renumber(plates: Sequence[PlannedPlate]):
    order = sorted(plates, key=lambda p: (p.start, p.printer))
    width = max(2, len(str(len(order))))
    return [dc_replace(p, id=f"P{k + 1:0{width}d}") for k, p in enumerate(order)]


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
