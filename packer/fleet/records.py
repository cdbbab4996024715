"""Data of the fleet planner: copies and their key, plates, results, settings.

Shared by the planner's steps (:mod:`packer.fleet.builder`, :mod:`packer.fleet.merge`,
:mod:`packer.fleet.improve`, :mod:`packer.fleet.lowfill`, :mod:`packer.fleet.planbounds`)
and by callers.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime, timedelta

from packer.fleet.calendar import printer_free_after
from packer.fleet.timemodel import TimeEstimate
from packer.intake.identity import copy_key  # noqa: F401 - the one copy key, used by the planner's steps

__all__ = ["CopyRef", "PlannedPlate", "FleetResult", "PlannerSettings", "FILL_MODES", "copy_key", "post_done"]


@dataclass(frozen=True)
class CopyRef:
    """One physical copy to print.

    ``kind`` indexes the ``stats`` table given to :func:`plan_fleet`.
    ``boost`` raises the lateness weight (``priority * (1 + boost)``) and
    puts the copy first in its due half-day, for copies replanned after a failure.
    """

    order: str
    part: str
    copy: int
    kind: int
    material: str
    due: datetime
    priority: int
    boost: float = 0.0


@dataclass(frozen=True)
class PlannedPlate:
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
    note: str = ""          # why an under-filled plate stays (packer.fleet.lowfill), else ""
    change_s: float = 0.0   # material change on the printer just before this plate (s)
    post: tuple = ()        # the profile's post-processing steps (packer.intake.profile.PostStep)
    cal: object = None      # the operator calendar the post-processing steps keep

    @property
    def done(self) -> datetime:
        """When the plate's parts are through post-processing (``free`` when there is none).

        Steps run one after another from the moment the plate is cleared; a step that
        needs an operator starts inside a shift with its whole duration left in it, the
        others run by themselves (also overnight). Stations are taken to be free.
        """
        return post_done(self.post, self.cal, self.free)


@dataclass(frozen=True)
class FleetResult:
    plates: tuple[PlannedPlate, ...]
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
    max_powder_tries : int
        The same for powder builds, whose packing costs far more than a plate's
        nesting (a build of 180 bodies takes seconds).
    first_probe_fill : float
        Hint share of the first ``fits`` probe on a profile before any plate of it
        was confirmed (nesting irregular parts rarely reaches the area bound: common
        practice, no source); later probes start from what the profile reached.
    pool_target : float
        With a pool fill (``plan_fleet(fill=...)``), a plate's candidates reach this hint
        share; the layout engine keeps what fits.
    must_share : float
        The candidates a pool fill must place: the most urgent ones up to this share of
        the fill the profile reached lately (at least one).
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
    fits_share : float
        Share of ``seconds`` the ``fits`` calls may use in all. When ``fits`` accepts a
        ``seconds`` keyword, each call is told ``fits_share * seconds`` over the calls
        expected (``fits_calls_per_plate`` per hint-only plate, plus ``fits_calls_extra``),
        at least ``min_fit_s``: a function of the budget and the day only, so the
        plan stays deterministic.
    fits_calls_per_plate, fits_calls_extra, min_fit_s
        See ``fits_share``.
    fits_reserve_calls : float
        Safety net: when less than this many allowances of wall clock are left in the
        budget, each call gets what is left over this number (at least ``min_fit_s``).
    consolidate_share : float
        Share of the budget left after building plates that consolidation may use (the
        emptiest plates of a technology and material shared out over the others).
    finish_slack : float
        Consolidation may let the day end up to this many times its finishing bound
        (measured from the plan's start; never earlier than the plan ends before it).
    due_first : bool
        Inside a due half-day, copies are taken by due time before weight (else weight first).
    largest_plates : bool
        Per technology, also list-schedule on the printers with the largest plate alone
        (hint plates); build that way when it scores no later with fewer plates.
    scarcity : bool
        Per technology, also list-schedule the best fill rule with material choice by scarcity
        (:mod:`packer.fleet.scarcity`, hint plates) and build that way when it scores better.
        Off: on the 5,000-copy day it moved the lateness from PETG to PLA and the real plan got
        later (fleet README, "Material choice by scarcity").
    night_fill : bool
        A plate that runs across a closed period takes, after the copies due before the
        morning it is cleared, the copies that bring the most machine time per capacity
        share (the printer stands finished until the morning whatever the plate holds).
    final_merge : bool
        After the CP-SAT steps, merge under-filled plates again when the plan gets no
        later (weighted lateness and finish unchanged or better, fewer plates).
    requeue_share : float
        Work-clock seconds, per second of budget, that moving whole plates to earlier places
        in the printers' queues may use at the end of planning (:mod:`packer.fleet.requeue`;
        0: not run). Its own share: on a large day the budget is spent by then.
    """

    fill_target: float = 1.0
    max_fit_tries: int = 6
    max_powder_tries: int = 3
    first_probe_fill: float = 0.85
    pool_target: float = 1.3
    must_share: float = 0.5
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
    fits_share: float = 0.55
    fits_calls_per_plate: float = 2.0
    fits_calls_extra: int = 10
    min_fit_s: float = 0.25
    fits_reserve_calls: float = 3.0
    final_merge: bool = True
    night_fill: bool = True
    largest_plates: bool = True
    scarcity: bool = False
    due_first: bool = True
    consolidate_share: float = 0.5
    finish_slack: float = 1.25
    requeue_share: float = 0.02


FILL_MODES = ("due", "strict", "full")
"""How a plate is filled. ``due``: a copy joins unless it makes a copy late that is on
time so far (copies already late do not hold the plate back), or when the printer's
projected free time does not move (a plate ending at night is cleared in the morning
whatever its length, so it may take more); ``strict``: a copy joins only if the projected
free time stays by the earliest due time on the plate, or does not move (a plate whose
first copy is late even alone fills by ``due``); ``full``: by
capacity alone. The planner tries each on capacity-hint plates and keeps the best."""


def post_done(post, cal, free: datetime) -> datetime:
    """When parts cleared at ``free`` are through the post-processing steps ``post``: one after
    another; a step that needs an operator starts inside a shift of ``cal`` with its whole
    duration left in it, the others run by themselves (also overnight)."""
    t = free
    for step in post:
        if step.operator:
            t = printer_free_after(cal, t, step.duration_s)
        else:
            t = t + timedelta(seconds=step.duration_s)
    return t
