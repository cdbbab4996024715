"""The fleet planner: which copies go on which plate of which printer, and when.

The planner works against callables so it does not depend on the nesting
engine: ``can_print`` screens a copy against a printer, ``capacity_hint``
cheaply estimates the share of a plate a set of copies needs (an area or
volume bound), and ``fits`` confirms a plate with a real, verified layout.

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

Solver effort is a fixed share of ``seconds`` in deterministic time, so the
plan is the same per seed (when ``fits`` is deterministic) unless a
wall-clock safety net fires; ``stats["deterministic"]`` tells.
"""

from __future__ import annotations

import math
import time as _time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from dataclasses import replace as dc_replace
from datetime import datetime, timedelta

from packer.errors import InputError, PackerError
from packer.fleet.bounds import l2_bound, makespan_bound
from packer.fleet.calendar import (check_calendar, next_open, printer_free_after,
                                   shift_windows)
from packer.fleet.contents import LotPair, Slot, solve_contents
from packer.fleet.schedule import TICK_S, PlateTask, ScheduleSettings, solve_schedule
from packer.fleet.timemodel import PartStats, TimeEstimate, deposited_volume_mm3, layers, plate_time
from packer.job import Calendar, Printer

__all__ = ["CopyRef", "PlateJob", "FleetResult", "PlannerSettings", "plan_fleet", "check_plan"]


@dataclass(frozen=True)
class CopyRef:
    """One physical copy to print.

    ``part_key`` indexes the ``stats`` table given to :func:`plan_fleet`.
    ``boost`` raises the lateness weight (``priority * (1 + boost)``) and
    puts the copy first in its due half-day, for copies replanned after a failure.
    """

    order: str
    part: str
    copy: int
    part_key: int
    material: str
    due: datetime
    priority: int
    boost: float = 0.0


@dataclass(frozen=True)
class PlateJob:
    """A plate the planner decided on: contents, printer and times.

    ``end`` is the end of printing (for powder, of cool-down); ``free`` is when
    the printer is free again after clearing inside a shift.
    """

    id: str
    printer: str
    material: str
    copies: tuple[CopyRef, ...]
    layout: object
    start: datetime
    end: datetime
    free: datetime
    time: TimeEstimate


@dataclass(frozen=True)
class FleetResult:
    plates: tuple[PlateJob, ...]
    unplaced: tuple[tuple[CopyRef, str], ...]
    bounds: dict = field(default_factory=dict)
    stats: dict = field(default_factory=dict)


@dataclass(frozen=True)
class PlannerSettings:
    """Knobs of the planner.

    Attributes
    ----------
    fill_target : float
        Share of a plate, by the capacity hint, a plate is filled to before
        ``fits`` is asked. With a hint from a lower bound, 1.0 is the most that
        can fit; ``fits`` then trims the set.
    max_fit_tries : int
        ``fits`` calls per plate: the longest fitting prefix of the chosen copies
        (most urgent first) is found by bisection within this many calls,
        starting from the fill the profile's previous plates reached; if none
        fits, the first copy is tried alone.
    first_probe_fill : float
        Hint share of the first ``fits`` probe on a profile before any plate of it
        was confirmed (nesting irregular parts rarely reaches the area bound: common
        practice, no source); later probes start from what the profile reached.
    overflow_share : float
        Share of the copies dropped at the first probe after the whole set failed.
    due_bucket_h : float
        Width of the due-time buckets inside which copies are banded by height.
    build_share : float
        After this share of the budget, a plate gets at most two ``fits`` calls
        before its first copy is tried alone, so a slow layout engine still ends.
    second_try_share : float
        While less than this share of the budget is spent, the runner-up fill rule of
        each technology is also built with ``fits`` and the better real plan kept.
    contents : bool
        Run the CP-SAT model that moves copies between plates (filament and resin).
    contents_share : float
        Share of the solver time given to that model (the rest sequences fixed plates).
    contents_neighbours : int
        A lot may move to this many plates of its kind nearest in start time.
    sequence_effort, contents_effort : float
        Deterministic solver time (about core-seconds) per second of budget for the
        sequencing model and for each round of the contents model. They depend on the
        budget only, so a plan is the same on a slow or busy machine unless a wall-clock
        safety net fires (then ``stats["deterministic"]`` is False).
    contents_rounds : int
        Solve-and-confirm rounds of that model: plates that did not nest send their
        overflow back and get the capacity they reached in the next round.
    merge_share : float
        Share of the budget left after building plates that merging plates may use.
    schedule_share : float
        Share of ``seconds`` left after building plates that the CP-SAT
        sequencing may use.
    workers : int
        CP-SAT workers.
    """

    fill_target: float = 1.0
    max_fit_tries: int = 6
    first_probe_fill: float = 0.85
    overflow_share: float = 0.1
    due_bucket_h: float = 12.0
    build_share: float = 0.5
    second_try_share: float = 0.3
    merge_share: float = 0.25
    contents: bool = True
    contents_share: float = 0.7
    contents_neighbours: int = 8
    contents_rounds: int = 3
    sequence_effort: float = 0.03
    contents_effort: float = 0.04
    schedule_share: float = 0.9
    workers: int = 2
    log: bool = False


FILL_MODES = ("due", "strict", "full")
"""How a plate is filled. ``due``: a copy joins unless it makes a copy late that is on
time so far (copies already late do not hold the plate back), or when the printer's
projected free time does not move (a plate ending at night is cleared in the morning
whatever its length, so it may take more); ``strict``: a copy joins only if the projected
free time stays by the earliest due time on the plate, or does not move; ``full``: by
capacity alone. The planner tries each on capacity-hint plates and keeps the best."""

FitsFn = Callable[[Printer, Sequence[CopyRef]], object | None]
HintFn = Callable[[Printer, Sequence[CopyRef]], float]
CanPrintFn = Callable[[Printer, CopyRef], str | None]


def _weight(c: CopyRef) -> float:
    return c.priority * (1.0 + c.boost)


def plan_fleet(copies: Sequence[CopyRef], printers: Sequence[Printer], *,
               stats: Sequence[PartStats], calendar: Calendar, start: datetime,
               fits: FitsFn, capacity_hint: HintFn, can_print: CanPrintFn,
               seconds: float, seed: int = 0,
               settings: PlannerSettings | None = None) -> FleetResult:
    """Plan plates, printers and start times for a day's copies.

    Parameters
    ----------
    copies
        Every copy to print, each once.
    printers
        The fleet.
    stats
        Part statistics; ``copies[k].part_key`` indexes it.
    calendar
        Operator shifts.
    start
        Planning origin: nothing starts before it.
    fits
        ``fits(printer, copies)`` returns a verified layout of the set on the
        printer's plate, or None. For powder profiles the layout may carry a
        ``build_height_mm`` attribute used by the time model.
    capacity_hint
        ``capacity_hint(printer, copies)``: share of the plate the set needs,
        from an area (volume) bound. The planner adds single-copy hints, so the
        hint should be nearly additive; it is also used for the plate bound.
    can_print
        ``can_print(printer, copy)`` returns None or the reason it cannot. The
        answer is cached per (printer, part_key, material).
    seconds
        Wall-clock budget for the whole plan (plates and sequencing).
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
        On an empty fleet, a bad calendar or a ``part_key`` outside ``stats``.
    """
    t0 = _time.monotonic()
    settings = settings or PlannerSettings()
    check_calendar(calendar)
    if not printers:
        raise InputError("the fleet has no printer")
    printers = sorted(printers, key=lambda p: p.name)
    for c in copies:
        if not 0 <= c.part_key < len(stats):
            raise InputError(f"copy {c.order}/{c.part}/{c.copy}: part_key {c.part_key} is not in stats")
    ctx = _Context(printers, stats, calendar, start, fits, capacity_hint, can_print, settings)
    ctx.deadline = t0 + settings.build_share * seconds
    eligible, unplaced = ctx.screen(copies)
    pool = [c for c in copies if eligible.get(_ck(c))]

    # per technology (separate printers), pick the fill rule and the banding by list schedules
    # on capacity-hint plates (no fits calls), then build the chosen one with fits
    plates, greedy_plates, choice, trials, band_trials = [], [], {}, {}, ([], [])
    by_tech: dict = {}
    for c in pool:
        by_tech.setdefault(ctx.tech_of[printers[eligible[_ck(c)][0]].name], []).append(c)
    for tech, part in sorted(by_tech.items()):
        tr = {(m, b): ctx.build(part, eligible, banded=b, mode=m, confirm=False)
              for m in FILL_MODES for b in (True, False)}
        ranked = sorted(tr, key=lambda k: (_score(tr[k].plates, start), FILL_MODES.index(k[0]), not k[1]))
        mode, banded = ranked[0]
        built = ctx.build(part, eligible, banded=banded, mode=mode)
        # hint plates can mislead when fits trims plates: build the runner-up for real too
        # while the budget allows, and keep the better real plan
        if len(ranked) > 1 and not ctx.past(t0 + settings.second_try_share * seconds, "runner-up build skipped"):
            m2, b2 = next((k for k in ranked[1:] if k[0] != mode), ranked[1])
            other = ctx.build(part, eligible, banded=b2, mode=m2)
            if (_score(other.plates, start), len(other.unplaced)) < (_score(built.plates, start), len(built.unplaced)):
                built, mode, banded = other, m2, b2
        unplaced += built.unplaced
        plates += built.plates
        choice[tech] = f"{mode}/{'banded' if banded else 'mixed'}"
        trials.update({f"{tech}/{m}/{'banded' if b else 'mixed'}": _score(t.plates, start)
                       for (m, b), t in tr.items()})
        band_trials[0].extend(tr[(mode, True)].plates)
        band_trials[1].extend(tr[(mode, False)].plates)
    plates = [dc_replace(p, id=f"G{k}") for k, p in enumerate(plates)]   # unique across technologies
    ctx.deadline = math.inf      # later plates (contents overflow) get every fits call
    phases = {"plates_s": _time.monotonic() - t0}
    merge_deadline = t0 + max(0.5, seconds - (_time.monotonic() - t0)) * settings.merge_share \
        + (_time.monotonic() - t0)
    plates, merges = ctx.merge(plates, merge_deadline)
    phases["merge_s"] = _time.monotonic() - t0 - sum(phases.values())
    greedy_score = _score(plates, start)

    left = max(0.5, (seconds - (_time.monotonic() - t0)) * settings.schedule_share)
    sched_stats: dict = {"status": "not run"}
    contents_stats: dict = {"status": "not run"}
    if plates:
        share = settings.contents_share if settings.contents else 0.0
        improved, sched_stats = ctx.sequence(plates, left * (1 - share), seed,
                                             settings.sequence_effort * seconds)
        if improved is not None and _score(improved, start) < greedy_score:
            plates = improved
            sched_stats["used"] = True
        phases["sequence_s"] = _time.monotonic() - t0 - sum(phases.values())
        remaining = seconds - (_time.monotonic() - t0)
        if settings.contents:
            moved, contents_stats = ctx.contents(plates, pool, eligible, remaining * settings.schedule_share,
                                                 seed, t0 + seconds, settings.contents_effort * seconds)
            if moved is not None and _score(moved, start) < _score(plates, start):
                plates = moved
                contents_stats["used"] = True
    phases["contents_s"] = _time.monotonic() - t0 - sum(phases.values())
    plates = tuple(_renumber(plates))
    result_unplaced = tuple(unplaced)
    check_plan(plates, result_unplaced, copies, printers, calendar=calendar, start=start)
    lat, finish, n = _score(plates, start)
    stats_out = {
        "copies": len(copies), "printers": len(printers), "plates": len(plates),
        "unplaced": len(result_unplaced),
        "weighted_lateness_h": lat / 3600.0,
        "late_orders": _late_orders(plates),
        "finish": start + timedelta(seconds=finish) if plates else start,
        "greedy_weighted_lateness_h": greedy_score[0] / 3600.0,
        "greedy_finish": start + timedelta(seconds=greedy_score[1]),
        "schedule": sched_stats,
        "contents": contents_stats,
        "fits_calls": ctx.fits_calls,
        "merged_plates": merges,
        "fill": choice, "trials": trials,
        "height_bands": _band_report(band_trials[0], band_trials[1], start, ctx.tech_of),
        "planning_s": _time.monotonic() - t0,
        "phases_s": {k: round(v, 2) for k, v in phases.items()},
        "fits_s": round(ctx.fits_s, 2),
        "safety_nets": list(ctx.safety)
        + (["sequencing solver stopped by the wall clock"] if not sched_stats.get("deterministic", True) else [])
        + (["contents solver stopped by the wall clock"] if not all(
            r.get("deterministic", True) for r in contents_stats.get("rounds", []) if isinstance(r, dict)) else []),
        "deterministic": not ctx.safety and all(
            d.get("deterministic", True) for d in [sched_stats] + [
                r for r in contents_stats.get("rounds", []) if isinstance(r, dict)]),
    }
    return FleetResult(plates=plates, unplaced=result_unplaced,
                       bounds=ctx.bounds(pool, eligible, plates), stats=stats_out)


def _ck(c: CopyRef) -> tuple:
    return (c.order, c.part, c.copy)


def _score(plates: Sequence[PlateJob], origin: datetime) -> tuple[float, float, int]:
    """(weighted lateness s, finish s from origin, plates): smaller is better, in this order."""
    done: dict[str, datetime] = {}
    due: dict[str, tuple[datetime, float]] = {}
    for p in plates:
        for c in p.copies:
            done[c.order] = max(done.get(c.order, p.free), p.free)
            w = due.get(c.order, (c.due, 0.0))[1]
            due[c.order] = (c.due, max(w, _weight(c)))
    lat = sum(w * max(0.0, (done[o] - d).total_seconds()) for o, (d, w) in due.items())
    finish = max(((p.free - origin).total_seconds() for p in plates), default=0.0)
    return (round(lat, 3), round(finish, 3), len(plates))


def _late_orders(plates: Sequence[PlateJob]) -> int:
    done: dict[str, tuple[datetime, datetime]] = {}
    for p in plates:
        for c in p.copies:
            prev = done.get(c.order, (p.free, c.due))[0]
            done[c.order] = (max(prev, p.free), c.due)
    return sum(1 for d, due in done.values() if d > due)


def _renumber(plates: Sequence[PlateJob]):
    from dataclasses import replace
    order = sorted(plates, key=lambda p: (p.start, p.printer))
    width = max(2, len(str(len(order))))
    return [replace(p, id=f"P{k + 1:0{width}d}") for k, p in enumerate(order)]


def _band_report(banded: Sequence[PlateJob], mixed: Sequence[PlateJob], origin: datetime,
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
    out["banded_finish_h"] = _score(banded, origin)[1] / 3600
    out["mixed_finish_h"] = _score(mixed, origin)[1] / 3600
    out["note"] = "list schedule on capacity-hint plates (no fits), same fill target"
    return out


@dataclass
class _Built:
    plates: list
    unplaced: list


class _Context:
    """State shared by the steps of one plan (caches, counters)."""

    def __init__(self, printers, stats, calendar, start, fits, hint, can_print, settings):
        self.printers = printers
        self.stats = stats
        self.cal = calendar
        self.start = start
        self.fits = fits
        self.hint = hint
        self.can_print = can_print
        self.settings = settings
        self.fits_calls = 0
        self._hint1: dict = {}
        self.ready = [next_open(calendar, max(start, p.available_from)) for p in printers]
        self.tech_of = {p.name: p.profile.technology for p in printers}
        self.why: dict = {}
        self.target: dict = {}          # per profile: the hint fill fits accepted lately
        self.deadline = math.inf        # after it, fewer fits calls per plate
        self.fits_s = 0.0
        self.safety: list[str] = []     # wall-clock safety nets that fired
        self._index = {p.name: i for i, p in enumerate(printers)}
        self._split: dict = {}

    # -- screening ---------------------------------------------------------------------------
    def screen(self, copies):
        cache: dict = {}
        eligible: dict = {}
        unplaced: list = []
        for c in copies:
            ok, reasons = [], []
            for i, p in enumerate(self.printers):
                key = (p.name, c.part_key, c.material)
                if key not in cache:
                    r = None if c.material in p.materials else f"{p.name} does not run {c.material}"
                    cache[key] = r or self.can_print(p, c)
                r = cache[key]
                (reasons if r else ok).append(r or i)
            eligible[_ck(c)] = ok
            if not ok:
                unplaced.append((c, "; ".join(sorted(set(reasons))) or "no printer"))
        return eligible, unplaced

    def hint1(self, i: int, c: CopyRef) -> float:
        key = (self.printers[i].profile.name, c.part_key)
        if key not in self._hint1:
            self._hint1[key] = float(self.hint(self.printers[i], [c]))
        return self._hint1[key]

    # -- plates by list scheduling -------------------------------------------------------------
    def _key(self, c: CopyRef, banded: bool):
        bucket_s = self.settings.due_bucket_h * 3600
        bucket = math.floor((c.due - self.start).total_seconds() / bucket_s)
        h = -round(self.stats[c.part_key].height_mm, 1) if banded else 0.0
        return (bucket - (1 if c.boost > 0 else 0), h, -_weight(c), c.due, c.order, c.part, c.copy)

    def build(self, pool, eligible, *, banded: bool, mode: str, confirm: bool = True,
              free_from: Sequence[datetime] | None = None) -> _Built:
        remaining = sorted(pool, key=lambda c: self._key(c, banded))
        allowed = {_ck(c): set(eligible[_ck(c)]) for c in remaining}
        free_at = list(free_from or self.ready)
        plates, unplaced = [], []
        live = set(range(len(self.printers)))
        while remaining:
            live = {i for i in live if any(i in allowed[_ck(c)] for c in remaining)}
            cands = [(free_at[i], self.printers[i].name, i) for i in sorted(live)]
            if not cands:
                for c in remaining:
                    unplaced.append((c, self.why.get(_ck(c), "no printer can take it")))
                break
            _, _, i = min(cands)
            p = self.printers[i]
            chosen, layout = self._fill(i, remaining, allowed, confirm,
                                        next_open(self.cal, free_at[i]), mode)
            if not chosen:
                continue
            taken = {_ck(c) for c in chosen}
            remaining = [c for c in remaining if _ck(c) not in taken]
            job = self._timed(i, chosen, layout, free_at[i], len(plates))
            free_at[i] = job.free
            plates.append(job)
        return _Built(plates, unplaced)

    def _parts(self, i: int, c: CopyRef) -> tuple[float, float]:
        """(additive, per-plate) machine time of one copy on printer ``i`` (s), cached.

        The machine time of a plate is exactly the sum of the additive terms plus the
        largest per-plate term (see :func:`_work_lb`; for powder with the build height
        taken as the tallest copy).
        """
        prof = self.printers[i].profile
        key = (prof.name, c.part_key)
        if key not in self._split:
            add, _, _ = _work_lb(prof, self.stats[c.part_key])
            self._split[key] = (add, plate_time(prof, [self.stats[c.part_key]]).machine_s - add)
        return self._split[key]

    def _powder_per(self, prof, height: float) -> float:
        """Per-build machine time of a powder build ``height`` mm high (no scan), cached by layer."""
        n = layers(height, prof.time.layer_height_mm)
        key = (prof.name, "layers", n)
        if key not in self._split:
            probe = PartStats(0.0, 0.0, n * prof.time.layer_height_mm, 0.0)
            self._split[key] = plate_time(prof, [probe]).machine_s
        return self._split[key]

    def _fill(self, i, remaining, allowed, confirm, begin, mode):
        """Choose the copies of the next plate of printer ``i`` starting at ``begin``.

        In the sorted order, a copy of the first copy's material joins while the
        capacity hint allows and, by ``mode`` (see ``FILL_MODES``), the due times allow.
        """
        s = self.settings
        prof = self.printers[i].profile
        clear = prof.time.clear_s
        powder = prof.technology == "powder"
        first = next(c for c in remaining if i in allowed[_ck(c)])
        chosen, load, proj, cum = [], 0.0, [], []
        add_sum, per_max, due_min, tallest = 0.0, 0.0, None, 0.0
        cur_free, due_min_ok = None, None
        for c in remaining:
            if c.material != first.material or i not in allowed[_ck(c)]:
                continue
            h = self.hint1(i, c)
            if chosen and load + h > s.fill_target:
                continue
            a, q = self._parts(i, c)
            per = max(per_max, q)
            if powder:   # the build is at least as high as the parts' volume share of the room
                height = max(tallest, self.stats[c.part_key].height_mm, (load + h) * prof.build_volume[2])
                per = max(per, self._powder_per(prof, height))
            end = begin + timedelta(seconds=add_sum + a + per)
            new_free = printer_free_after(self.cal, end, clear)
            d = c.due if due_min is None else min(due_min, c.due)
            if chosen and new_free > cur_free:
                if mode == "strict":
                    blocked = new_free > d
                elif mode == "due":      # protect the copies that are on time so far
                    on_time = [x for x in (due_min_ok, c.due if c.due >= cur_free else None) if x]
                    blocked = bool(on_time) and new_free > min(on_time)
                else:
                    blocked = False
                if blocked:
                    continue
            chosen.append(c)
            proj.append(new_free)
            load += h
            cum.append(load)
            if c.due >= new_free:
                due_min_ok = c.due if due_min_ok is None else min(due_min_ok, c.due)
            if due_min_ok is not None and due_min_ok < new_free:
                due_min_ok = min((x.due for x in chosen if x.due >= new_free), default=None)
            add_sum, per_max, due_min, cur_free = add_sum + a, max(per_max, q), d, new_free
            tallest = max(tallest, self.stats[c.part_key].height_mm)
            if load >= s.fill_target:
                break
        if not confirm:
            return chosen, None
        p = self.printers[i]
        late_anyway = mode == "full"

        def fits(k: int):
            """A layout of the first k copies that keeps the fill rule with the layout's time."""
            layout = self.timed_fits(p, chosen[:k])
            if layout is None or late_anyway or not powder:
                return layout     # filament and resin times do not depend on the layout
            est = plate_time(prof, [self.stats[c.part_key] for c in chosen[:k]],
                             build_height_mm=getattr(layout, "build_height_mm", None))
            free = printer_free_after(self.cal, begin + timedelta(seconds=est.machine_s), clear)
            ok = free <= max(proj[k - 1], min(c.due for c in chosen[:k])) or k == 1
            if mode == "due":
                ok = ok or all(c.due < proj[k - 1] or c.due >= free for c in chosen[:k])
            return layout if ok else None

        # the longest fitting prefix (copies were added most urgent first): bounded bisection,
        # first probing the fill this profile reached before (learned from earlier plates)
        n = len(chosen)
        target = self.target.get(prof.name, min(s.fill_target, s.first_probe_fill))
        first_probe = max(1, sum(1 for x in cum if x <= target + 1e-9))
        ok_n, ok_layout, fail_n, probe = 0, None, n + 1, first_probe
        tries = 2 if self.past(self.deadline, "fewer fits calls per plate") else s.max_fit_tries
        for t in range(tries):
            layout = fits(probe)
            if layout is not None:
                ok_n, ok_layout = probe, layout
            else:
                fail_n = probe
            if fail_n - ok_n <= 1:
                break
            if ok_n == 0 and t == 0:
                probe = max(1, min(fail_n - 1, math.floor(probe * (1 - s.overflow_share))))
            else:
                probe = (ok_n + fail_n) // 2
        if fail_n <= n:
            self.target[prof.name] = max(cum[ok_n - 1] if ok_n else 0.0, cum[fail_n - 1] - 0.01)
        elif ok_n:
            self.target[prof.name] = min(s.fill_target, max(target, cum[ok_n - 1]) + 0.02)
        if ok_n == 0 and fail_n > 1:
            ok_layout = fits(1)
            ok_n = 1 if ok_layout is not None else 0
        if ok_n:
            return chosen[:ok_n], ok_layout
        # the first copy does not fit alone on this profile: keep it off every printer of it
        prof = p.profile.name
        for j, q in enumerate(self.printers):
            if q.profile.name == prof:
                allowed[_ck(chosen[0])].discard(j)
        self.why[_ck(chosen[0])] = f"does not fit on an empty plate of profile {prof}"
        return [], None

    def _timed(self, i, chosen, layout, free_at, k) -> PlateJob:
        p = self.printers[i]
        parts = [self.stats[c.part_key] for c in chosen]
        height = getattr(layout, "build_height_mm", None)
        est = plate_time(p.profile, parts, build_height_mm=height)
        begin = next_open(self.cal, free_at)
        end = begin + timedelta(seconds=est.machine_s)
        free = printer_free_after(self.cal, end, est.clear_s)
        return PlateJob(id=f"G{k}", printer=p.name, material=chosen[0].material,
                        copies=tuple(chosen), layout=layout, start=begin, end=end, free=free,
                        time=est)

    def past(self, deadline: float, what: str) -> bool:
        """True once the wall clock passed ``deadline``; such a safety-net decision makes
        the plan depend on the machine's speed, so it is recorded."""
        if _time.monotonic() > deadline:
            if what not in self.safety:
                self.safety.append(what)
            return True
        return False

    def timed_fits(self, printer, copies):
        t = _time.monotonic()
        self.fits_calls += 1
        try:
            return self.fits(printer, copies)
        finally:
            self.fits_s += _time.monotonic() - t

    # -- merging plates ---------------------------------------------------------------------------
    def _fill_of(self, p: PlateJob) -> float:
        i = self._index[p.printer]
        return sum(self.hint1(i, c) for c in p.copies)

    def retime(self, plates, changed: dict | None = None):
        """Left-shift every printer's plates in their current order (real seconds, calendar)."""
        from dataclasses import replace
        free_at = {p.name: r for p, r in zip(self.printers, self.ready)}
        out = []
        for p in sorted(plates, key=lambda p: (p.start, p.printer, p.id)):
            begin = next_open(self.cal, free_at[p.printer])
            end = begin + timedelta(seconds=p.time.machine_s)
            free = printer_free_after(self.cal, end, p.time.clear_s)
            free_at[p.printer] = free
            out.append(replace(p, start=begin, end=end, free=free))
        return out

    def merge(self, plates, deadline: float):
        """Merge pairs of plates (same profile and material) while the plan gets no worse.

        Emptiest plates first; each is tried against the three partners that would leave
        the fullest plate within ``fill_target``. A merge is kept when the re-timed plan
        scores better (weighted lateness, finish, plates) and ``fits`` confirms the merged
        plate. Bounded by the deadline and by one pass over the plates.
        """
        self._index = {p.name: i for i, p in enumerate(self.printers)}
        cur = list(plates)
        best = _score(cur, self.start)
        merges = 0
        fill = {p.id: self._fill_of(p) for p in cur}
        for b_id in [p.id for p in sorted(cur, key=lambda p: (fill[p.id], p.start, p.id))]:
            if self.past(deadline, "merging cut short"):
                break
            b = next((p for p in cur if p.id == b_id), None)
            if b is None:
                continue
            prof = self.printers[self._index[b.printer]].profile.name
            partners = [a for a in cur if a.id != b.id and a.material == b.material
                        and self.printers[self._index[a.printer]].profile.name == prof
                        and fill[a.id] + fill[b.id] <= self.settings.fill_target + 1e-9]
            partners.sort(key=lambda a: (-(fill[a.id] + fill[b.id]), a.start, a.id))
            for a in partners[:3]:
                first, second = sorted((a, b), key=lambda p: (p.start, p.id))
                copies = first.copies + second.copies
                trial = self._merged(first, copies, None)
                rest = [p for p in cur if p.id not in (a.id, b.id)]
                timed = self.retime(rest + [trial])
                if _score(timed, self.start) >= best:
                    continue
                i = self._index[first.printer]
                layout = self.timed_fits(self.printers[i], copies)
                if layout is None:
                    continue
                timed = self.retime(rest + [self._merged(first, copies, layout)])
                sc = _score(timed, self.start)
                if sc < best:
                    cur, best = timed, sc
                    fill[first.id] = fill[a.id] + fill[b.id]
                    merges += 1
                    break
        return cur, merges

    def _merged(self, first: PlateJob, copies, layout) -> PlateJob:
        from dataclasses import replace
        prof = self.printers[self._index[first.printer]].profile
        est = plate_time(prof, [self.stats[c.part_key] for c in copies],
                         build_height_mm=getattr(layout, "build_height_mm", None))
        return replace(first, copies=tuple(copies), layout=layout, time=est)

    # -- sequencing ------------------------------------------------------------------------------
    def _orders(self, plates):
        """Order index, due tick and integer weight of every order on the plates."""
        orders = sorted({c.order for p in plates for c in p.copies})
        oidx = {o: k for k, o in enumerate(orders)}
        due = [0] * len(orders)
        weight = [1] * len(orders)
        for p in plates:
            for c in p.copies:
                due[oidx[c.order]] = self._ticks(c.due, up=False)
                weight[oidx[c.order]] = max(weight[oidx[c.order]], int(math.ceil(_weight(c))))
        return oidx, due, weight

    def _ticks(self, t: datetime, *, up: bool) -> int:
        """Ticks of ``TICK_S`` seconds from the plan start to ``t``, rounded up or down."""
        x = (t - self.start).total_seconds() / TICK_S
        return math.ceil(x - 1e-9) if up else math.floor(x + 1e-9)

    def _windows(self, last: datetime, extra_t: int) -> list[tuple[int, int]]:
        days = (last - self.start).days + 3 + extra_t * TICK_S // 86400
        windows = []
        for s, e in shift_windows(self.cal, self.start, days):
            a, b = self._ticks(s, up=True), self._ticks(e, up=False)
            if b > a:
                windows.append((a, b))
        return windows

    def _slot_printers(self, p: PlateJob) -> tuple[int, ...]:
        prof = self.printers[self._index[p.printer]].profile.name
        return tuple(j for j, q in enumerate(self.printers)
                     if q.profile.name == prof and p.material in q.materials)

    def sequence(self, plates, budget_s, seed, det_limit):
        origin = self.start
        idx = {p.name: i for i, p in enumerate(self.printers)}
        oidx, due, weight = self._orders(plates)
        tasks = []
        for p in plates:
            pi = idx[p.printer]
            prof = self.printers[pi].profile.name
            ok = tuple(j for j, q in enumerate(self.printers)
                       if q.profile.name == prof and p.material in q.materials)
            tasks.append(PlateTask(printers=ok, machine_t=math.ceil(p.time.machine_s / TICK_S - 1e-9),
                                   clear_t=math.ceil(p.time.clear_s / TICK_S - 1e-9),
                                   orders=tuple(sorted({oidx[c.order] for c in p.copies}))))
        windows = self._windows(max(p.free for p in plates),
                                sum(t.machine_t + t.clear_t for t in tasks))
        ready = [self._ticks(r, up=True) for r in self.ready]
        hint_printer = [idx[p.printer] for p in plates]
        hint_order = sorted(range(len(plates)), key=lambda j: (plates[j].start, plates[j].printer))
        ans = solve_schedule(tasks, ready=ready, windows=windows, due=due, weight=weight,
                             hint_printer=hint_printer, hint_order=hint_order,
                             settings=ScheduleSettings(time_limit_s=budget_s,
                                                       deterministic_limit=det_limit,
                                                       workers=self.settings.workers,
                                                       seed=seed, log=self.settings.log))
        if ans is None:
            return None, {"status": "no answer in time"}
        # re-time in real seconds, keeping the solver's printer and order (left shift)
        from dataclasses import replace
        free_at = list(self.ready)
        out = [None] * len(plates)
        for j in sorted(range(len(plates)), key=lambda j: (ans.start[j], ans.printer[j])):
            i = ans.printer[j]
            p = plates[j]
            begin = next_open(self.cal, free_at[i])
            end = begin + timedelta(seconds=p.time.machine_s)
            free = printer_free_after(self.cal, end, p.time.clear_s)
            if free > origin + timedelta(seconds=TICK_S * (ans.start[j] + tasks[j].machine_t)) + timedelta(days=7):
                raise PackerError("re-timed plate ends far after the model's time: a bug")
            free_at[i] = free
            out[j] = replace(p, printer=self.printers[i].name, start=begin, end=end, free=free)
        return out, {"status": ans.status, "model_weighted_lateness_h": ans.lateness * TICK_S / 3600,
                     "model_finish_h": ans.makespan * TICK_S / 3600, "deterministic": ans.deterministic,
                     "wall_s": ans.wall_s, "plates": len(tasks)}

    # -- moving copies between plates (CP-SAT) ------------------------------------------------------
    def contents(self, plates, pool, eligible, budget_s, seed, hard_deadline, det_limit):
        """Let CP-SAT move copies between filament and resin plates, then confirm with ``fits``.

        Lots are the copies of one order line. Plates keep their profile and material; powder
        builds stay as they are. Every changed plate is confirmed by ``fits`` (the longest
        fitting prefix, most urgent first); copies that do not fit go on new plates by list
        scheduling after the others. Returns (plates or None, statistics).
        """
        t0 = _time.monotonic()
        tech = [self.printers[self._index[p.printer]].profile.technology for p in plates]
        lot_of: dict = {}
        lots: list = []
        for p in plates:
            for c in p.copies:
                key = (c.order, c.part, c.part_key, c.material, c.due, c.priority, c.boost)
                if key not in lot_of:
                    lot_of[key] = len(lots)
                    lots.append([])
                lots[lot_of[key]].append(c)
        for cs in lots:
            cs.sort(key=lambda c: c.copy)
        lot_idx = {_ck(c): lot_of[(c.order, c.part, c.part_key, c.material, c.due, c.priority, c.boost)]
                   for p in plates for c in p.copies}
        oidx, due, weight = self._orders(plates)
        lot_order = [oidx[cs[0].order] for cs in lots]
        counts: dict = {}
        for k, p in enumerate(plates):
            for c in p.copies:
                key = (lot_idx[_ck(c)], k)
                counts[key] = counts.get(key, 0) + 1
        slots = []
        for k, p in enumerate(plates):
            printers = self._slot_printers(p)
            fixed = tech[k] == "powder"
            prof = self.printers[self._index[p.printer]].profile.name
            load = self._fill_of(p)
            slots.append(Slot(printers=printers, clear_t=math.ceil(p.time.clear_s / TICK_S - 1e-9),
                              cap=max(load, self.target.get(prof, self.settings.fill_target)),
                              fixed_machine_t=math.ceil(p.time.machine_s / TICK_S - 1e-9) if fixed else None))
        # candidate slots per lot: where it is, plus the nearest slots of its kind
        kind = [(self.printers[self._index[p.printer]].profile.name, p.material) for p in plates]
        pairs = []
        for l, cs in enumerate(lots):
            here = sorted({k for (ll, k) in counts if ll == l})
            if any(slots[k].fixed_machine_t is not None for k in here):
                cand = here
            else:
                c = cs[0]
                ok_printers = set(eligible[_ck(c)])
                others = [k for k in range(len(plates)) if slots[k].fixed_machine_t is None
                          and kind[k][1] == c.material and k not in here
                          and any(i in ok_printers for i in slots[k].printers)]
                t_here = [plates[k].start for k in here]
                others.sort(key=lambda k: (min(abs((plates[k].start - t).total_seconds()) for t in t_here), k))
                cand = sorted(here + others[:self.settings.contents_neighbours])
            for k in cand:
                i = slots[k].printers[0]
                a, q = self._parts(i, cs[0])
                pairs.append(LotPair(lot=l, slot=k, hint=self.hint1(i, cs[0]),
                                     add_s=math.ceil(a - 1e-9), per_s=math.ceil(q - 1e-9)))
        windows = self._windows(max(p.free for p in plates),
                                sum(math.ceil(p.time.machine_s / TICK_S) + 3600 // TICK_S for p in plates))
        ready = [self._ticks(r, up=True) for r in self.ready]
        hint_printer = [self._index[p.printer] for p in plates]
        hint_order = sorted(range(len(plates)), key=lambda j: (plates[j].start, plates[j].printer))
        stats = {"lots": len(lots), "slots": len(slots), "pairs": len(pairs), "rounds": []}
        best, best_score = None, _score(plates, self.start)
        for _ in range(self.settings.contents_rounds):
            left = hard_deadline - _time.monotonic()
            limit = min(budget_s - (_time.monotonic() - t0), left) * 0.6
            if limit < 0.5:
                stats["rounds"].append("out of time")
                self.safety.append("contents rounds cut short")
                break
            ans = solve_contents(slots, pairs, qty=[len(cs) for cs in lots], lot_order=lot_order,
                                 hint_counts=counts, hint_printer=hint_printer, hint_order=hint_order,
                                 ready=ready, windows=windows, due=due, weight=weight,
                                 settings=ScheduleSettings(time_limit_s=limit, deterministic_limit=det_limit,
                                                           workers=self.settings.workers,
                                                           seed=seed, log=self.settings.log))
            if ans is None:
                stats["rounds"].append("no answer in time")
                break
            lat, fin, n_plates = _score(plates, self.start)
            promise = (ans.lateness * TICK_S < lat - 1, ans.lateness * TICK_S <= lat + 1
                       and ans.makespan * TICK_S < fin - TICK_S,
                       ans.lateness * TICK_S <= lat + 1 and ans.makespan * TICK_S <= fin + TICK_S
                       and ans.plates < n_plates)
            if not any(promise):
                stats["rounds"].append({"status": ans.status, "note": "no better plan proposed",
                                        "wall_s": round(ans.wall_s, 2), "deterministic": ans.deterministic})
                break
            out, failed, info = self._realise(plates, lots, ans, eligible, hard_deadline)
            stats["rounds"].append(info)
            if out is not None and _score(out, self.start) < best_score:
                best, best_score = out, _score(out, self.start)
            if not failed:
                break
            # overflow goes back: the slots that did not nest get the capacity they reached
            # (never below their current verified contents, so the current plan stays a hint)
            slots = [dc_replace(sl, cap=max(self._fill_of(plates[k]), failed[k])) if k in failed else sl
                     for k, sl in enumerate(slots)]
        stats["status"] = "improved" if best is not None else "no better plan"
        return best, stats

    def _realise(self, plates, lots, ans, eligible, hard_deadline):
        """Turn a contents answer into confirmed plates; returns (plates or None, failed caps, info)."""
        info = {"status": ans.status, "model_weighted_lateness_h": ans.lateness * TICK_S / 3600,
                "model_finish_h": ans.makespan * TICK_S / 3600, "model_plates": ans.plates,
                "deterministic": ans.deterministic, "wall_s": round(ans.wall_s, 2)}
        new_copies: dict = {k: [] for k in range(len(plates))}
        taken = [0] * len(lots)
        for (l, k) in sorted(ans.counts, key=lambda lk: (ans.start[lk[1]], lk[1], lk[0])):
            v = ans.counts[(l, k)]
            new_copies[k].extend(lots[l][taken[l]:taken[l] + v])
            taken[l] += v
        changed = [k for k in range(len(plates)) if ans.used[k]
                   and {_ck(c) for c in new_copies[k]} != {_ck(c) for c in plates[k].copies}]
        avg_fit = self.fits_s / self.fits_calls if self.fits_calls else 0.0
        if self.past(hard_deadline - 2 * avg_fit * len(changed), "contents not confirmed"):
            info["status"] += ", no time to confirm the plates"
            return None, {}, info
        out, leftovers, failed = [], [], {}
        for k in range(len(plates)):
            if not ans.used[k]:
                continue
            i = ans.printer[k]
            p = plates[k]
            if k in changed:
                cs = sorted(new_copies[k], key=lambda c: self._key(c, True))
                ok, layout = self._confirm(i, cs)
                if len(ok) < len(cs):
                    leftovers += cs[len(ok):]
                    failed[k] = sum(self.hint1(i, c) for c in ok)
                if not ok:
                    continue
                p = self._merged_on(i, p, ok, layout)
            else:
                p = dc_replace(p, printer=self.printers[i].name)
            out.append(dc_replace(p, start=self.start + timedelta(seconds=TICK_S * ans.start[k])))
        info["changed_plates"] = len(changed)
        info["overflow_copies"] = len(leftovers)
        out = self.retime(out)
        if leftovers:
            free_from = list(self.ready)
            for p in out:
                i = self._index[p.printer]
                free_from[i] = max(free_from[i], p.free)
            extra = self.build(leftovers, eligible, banded=True, mode="due", free_from=free_from)
            if extra.unplaced:
                info["status"] += ", overflow could not be placed"
                return None, failed, info
            base = len(plates)
            out += [dc_replace(p, id=f"G{base + j}") for j, p in enumerate(extra.plates)]
        return out, failed, info

    def _confirm(self, i, copies):
        """The longest prefix of ``copies`` that ``fits`` lays out on printer ``i`` (bisection)."""
        p = self.printers[i]
        n = len(copies)
        layout = self.timed_fits(p, copies)
        if layout is not None:
            return copies, layout
        ok_n, ok_layout, fail_n = 0, None, n
        for _ in range(self.settings.max_fit_tries - 1):
            if fail_n - ok_n <= 1:
                break
            probe = (ok_n + fail_n) // 2
            lay = self.timed_fits(p, copies[:probe])
            if lay is not None:
                ok_n, ok_layout = probe, lay
            else:
                fail_n = probe
        return copies[:ok_n], ok_layout

    def _merged_on(self, i: int, p: PlateJob, copies, layout) -> PlateJob:
        prof = self.printers[i].profile
        est = plate_time(prof, [self.stats[c.part_key] for c in copies],
                         build_height_mm=getattr(layout, "build_height_mm", None))
        return dc_replace(p, printer=self.printers[i].name, copies=tuple(copies), layout=layout,
                          time=est, material=copies[0].material)

    # -- bounds ----------------------------------------------------------------------------------
    def bounds(self, pool, eligible, plates) -> dict:
        """Plate bounds per (technology, material) and the finishing-time bound."""
        groups: dict = {}
        for c in pool:
            if not eligible[_ck(c)]:
                continue
            tech = self.printers[eligible[_ck(c)][0]].profile.technology
            groups.setdefault((tech, c.material), []).append(c)
        used: dict = {}
        for p in plates:
            key = (self.tech_of[p.printer], p.material)
            used[key] = used.get(key, 0) + 1
        out: dict = {"plates": {}}
        for (tech, mat), cs in sorted(groups.items()):
            profs = {}
            for c in cs:
                for i in eligible[_ck(c)]:
                    profs.setdefault(self.printers[i].profile.name, i)
            best = None
            for prof, i in sorted(profs.items()):
                w = [min(1.0, self.hint1(i, c)) for c in cs]
                b = l2_bound(w, 1.0)
                best = b if best is None else min(best, b)
            n = used.get((tech, mat), 0)
            out["plates"][f"{tech}/{mat}"] = {"bound": best, "used": n,
                                              "gap": (n - best) / best if best else 0.0}
        out["finish_bound"] = self._finish_bound(pool, eligible, out["plates"])
        out["lateness_bound_h"], out["surely_late_orders"] = self._lateness_bound(pool, eligible)
        return out

    def _lateness_bound(self, pool, eligible) -> tuple[float, int]:
        """Weighted lateness no plan can avoid (priority x hours) and the orders surely late.

        An order is complete at the earliest when its slowest copy, alone on a plate of
        the best printer for it, started at that printer's first shift moment, has been
        cleared inside a shift.
        """
        done: dict = {}
        for c in pool:
            best = None
            for i in eligible[_ck(c)]:
                p = self.printers[i]
                est = plate_time(p.profile, [self.stats[c.part_key]])
                end = self.ready[i] + timedelta(seconds=est.machine_s)
                free = printer_free_after(self.cal, end, est.clear_s)
                best = free if best is None else min(best, free)
            if best is None:
                continue
            prev = done.get(c.order)
            w = _weight(c)
            done[c.order] = (max(best, prev[0]) if prev else best, c.due, max(w, prev[2]) if prev else w)
        late = [(w * (t - due).total_seconds() / 3600) for t, due, w in done.values() if t > due]
        return sum(late), len(late)

    def _finish_bound(self, pool, eligible, plate_bounds) -> datetime:
        """Max over technologies of the parallel-machine load bound with per-copy work lower bounds."""
        origin = self.start
        best = 0.0
        by_tech: dict = {}
        for c in pool:
            el = eligible[_ck(c)]
            if el:
                by_tech.setdefault(self.printers[el[0]].profile.technology, []).append(c)
        for tech, cs in by_tech.items():
            idxs = [i for i, p in enumerate(self.printers) if p.profile.technology == tech]
            ready = [(self.ready[i] - origin).total_seconds() for i in idxs]
            total, longest, per_plate = 0.0, 0.0, math.inf
            for c in cs:
                works = [_work_lb(self.printers[i].profile, self.stats[c.part_key])
                         for i in eligible[_ck(c)]]
                total += min(w[0] for w in works)
                longest = max(longest, min(w[1] for w in works))
                per_plate = min(per_plate, min(w[2] for w in works))
            # every plate costs at least the smallest per-plate share; plates >= their bound
            n_plates = sum(v["bound"] or 0 for k, v in plate_bounds.items() if k.startswith(tech + "/"))
            total += per_plate * n_plates
            best = max(best, makespan_bound(total, ready, longest_s=longest))
        # the last plate is cleared inside a shift: the day cannot end at night
        min_clear = min(p.profile.time.clear_s for p in self.printers)
        bound = origin + timedelta(seconds=best)
        return max(bound, printer_free_after(self.cal, bound - timedelta(seconds=min_clear), min_clear))


def _work_lb(profile, s: PartStats) -> tuple[float, float, float]:
    """Lower bounds of the work one copy brings on a profile (s).

    Returns (additive share, its plate alone, per-plate share). The additive
    share is what the copy adds to any plate: filament deposit and travel,
    powder scan with cool-down, nothing for resin (a layer cures at once).
    The plate alone (warm-up, print, clear) is the longest indivisible piece
    it takes part in. The per-plate share is what a plate whose tallest copy
    is this one costs beyond the additive shares: warm-up, clear and the
    layer-count terms.
    """
    t = profile.time
    est = plate_time(profile, [s])
    if profile.technology == "filament":
        add = deposited_volume_mm3(t, s) / t.flow_mm3_s + layers(s.height_mm, t.layer_height_mm) * t.travel_per_part_s
    elif profile.technology == "powder":
        add = (1 + t.cooldown_factor) * s.volume_mm3 / (t.layer_height_mm * t.hatch_mm * t.scan_speed_mm_s)
    else:
        add = 0.0
    return add, est.total_s, est.total_s - add


def check_plan(plates: Sequence[PlateJob], unplaced: Sequence[tuple[CopyRef, str]],
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
            seen[_ck(c)] = seen.get(_ck(c), 0) + 1
    for c, reason in unplaced:
        if not reason:
            raise PackerError(f"unplaced copy {_ck(c)} has no reason")
        seen[_ck(c)] = seen.get(_ck(c), 0) + 1
    want = {_ck(c) for c in copies}
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
