"""Printer and start of every plate not started, lateness first.

Each plate has one or more *ways* to run: on a printer of its own profile with
its own layout, or on a printer of another profile with a layout nested for
that profile (:mod:`packer.replan.moves`). Candidates are timed in real seconds
with the calendar and the printers' down windows (a plate occupies its printer
from start to clearing; no part of that may fall in a down window, so the
free time before and after a window is used). Candidates: list schedules on
the plates' own printers (old order, new plates first or last, earliest due
first), greedy ones that put each plate where it is cleared soonest (in the kept
order, and earliest due first), and the
fleet's CP-SAT model (:func:`~packer.fleet.schedule.solve_schedule`: weighted
lateness, then finish) over every way, hinted by the best list schedule and
followed by a pass that puts moved plates back where that costs nothing.

Ranking (:func:`rank`): least weighted lateness; then most plates untouched
(same contents on the same printer); then the earliest finish; then fewest
plates; then fewest starts moved.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from datetime import datetime
from typing import Sequence

from packer.errors import PackerError
from packer.fleet.budget import CPSAT_WALL_PER_DET, wall_net
from packer.fleet.schedule import ScheduleSettings
from packer.fleet.scoring import score_plan
from packer.fleet.timing import sequence_plates, slot
from packer.intake.job import Calendar
from packer.replan.state import PlateState

__all__ = ["Way", "Frame", "Sequenced", "timed", "rank", "untouched", "sequence", "solve_det"]


@dataclass(frozen=True)
class Way:
    """One way to run a plate: on ``printer``; ``layout`` is a layout nested for that
    printer's profile (None: the plate's own layout)."""

    printer: str
    machine_s: float
    clear_s: float
    layout: object = None


@dataclass(frozen=True)
class Frame:
    """What the sequencing works in: printers' ready times, their down windows
    (``(from, until)``; until None: for good), the calendar, now, and the plates that
    stay fixed (frozen and pinned, scored with the rest)."""

    ready: dict
    downs: dict
    calendar: Calendar
    now: datetime
    fixed: tuple = ()
    old: dict = None                # id -> PlateState of the plan being replanned (planned plates)

    def free_from(self, name: str) -> datetime:
        """When printer ``name`` can start new work: its ready time, or the end of a down window
        under way at that time."""
        t = self.ready[name]
        for a, u in sorted(self.downs.get(name, ())):
            if u is not None and a <= t < u:
                t = u
        return t


@dataclass(frozen=True)
class Sequenced:
    """The kept timing: plates, which candidate, its rank, the solver's status, and the way
    (``pick``) and order of each task, so a later sequencing can start from it."""

    plates: list
    name: str
    rank: tuple
    status: str
    pick: tuple = ()
    order: tuple = ()
    work_s: float = 0.0             # work-clock seconds the CP-SAT solve was charged
    deterministic: bool = True      # False: the solver's wall-clock safety net stopped it


def timed(tasks: Sequence[PlateState], ways: Sequence[Sequence[Way]], pick: Sequence[int], order: Sequence[int],
          frame: Frame) -> list[PlateState] | None:
    """Left-shifted real times for tasks run in ``order``, task ``j`` the way ``pick[j]``;
    None if a plate finds no slot."""
    free_at = dict(frame.ready)
    out: list = [None] * len(tasks)
    for j in order:
        p, w = tasks[j], ways[j][pick[j]]
        got = slot(frame.calendar, free_at[w.printer], w.machine_s, w.clear_s, frame.downs.get(w.printer, ()))
        if got is None:
            return None
        begin, end, free = got
        q = replace(p, printer=w.printer, start=begin, end=end, free=free, machine_s=w.machine_s)
        if w.layout is not None:
            q = replace(q, layout=w.layout, id="",
                        origin=q.origin if q.origin == "new" else f"moved:{p.id or p.origin}")
        out[j] = q
        free_at[w.printer] = free
    return out


def untouched(plates: Sequence[PlateState], old: dict) -> int:
    """Plates of the old plan kept under their id with the same contents on the same printer."""
    return sum(1 for p in plates if p.id and p.origin == "kept" and p.id in old and old[p.id].printer == p.printer)


def rank(plates: Sequence[PlateState], frame: Frame) -> tuple:
    """(weighted lateness s, -untouched, finish s, plates, starts moved): smaller is better."""
    lat, finish, _ = score_plan(list(frame.fixed) + list(plates), frame.now)
    old = frame.old or {}
    moved = sum(1 for p in plates if p.id in old and abs((p.start - old[p.id].start).total_seconds()) >= 60)
    return (round(lat), -untouched(plates, old), round(finish), len(plates), moved)


def _list_candidates(tasks, ways, frame) -> list[tuple[str, list, list]]:
    """(name, pick, order) of the list schedules."""
    n = len(tasks)
    fresh = [t.origin == "new" for t in tasks]
    due = [min(c.due for c in t.copies) for t in tasks]
    keys = {"kept order": lambda j: (tasks[j].start, tasks[j].id),
            "new plates first": lambda j: (not fresh[j], tasks[j].start, tasks[j].id),
            "new plates last": lambda j: (fresh[j], tasks[j].start, tasks[j].id),
            "earliest due first": lambda j: (due[j], tasks[j].start, tasks[j].id)}
    out = [(name, [0] * n, sorted(range(n), key=key)) for name, key in keys.items()]
    # greedy: in the kept order and earliest due first, each plate on the way that clears it soonest
    for name, first in (("soonest cleared", "earliest due first"), ("soonest cleared, kept order", "kept order")):
        order = sorted(range(n), key=keys[first])
        out.append((name, _soonest(tasks, ways, frame, order), order))
    return out


def _soonest(tasks, ways, frame, order) -> list[int]:
    """Per task, the way that clears it soonest when the tasks are placed in ``order``."""
    free_at, pick = dict(frame.ready), [0] * len(tasks)
    for j in order:
        best = None
        for k, w in enumerate(ways[j]):
            got = slot(frame.calendar, free_at[w.printer], w.machine_s, w.clear_s, frame.downs.get(w.printer, ()))
            if got is not None and (best is None or (got[2], k) < best[0]):
                best = ((got[2], k), k)
        if best is not None:
            pick[j] = best[1]
            free_at[ways[j][best[1]].printer] = best[0][0]
    return pick


#: The wall-clock safety net of a sequencing solve is :func:`~packer.fleet.budget.wall_net` of this many
#: times its deterministic limit: the fleet's own net fired at a load of 6 on two cores (solves of
#: 120 plates took 15 s a deterministic unit), and a net that fires makes the replan depend on the machine.
WALL_NET_FACTOR = 8.0


def solve_det(settings) -> float:
    """Deterministic limit of one CP-SAT sequencing: ``schedule_share`` of the replan's work
    budget at :data:`~packer.fleet.budget.CPSAT_WALL_PER_DET` work seconds a unit, between
    ``schedule_det_min`` and ``schedule_det``. A function of the settings only."""
    det = settings.schedule_share * settings.seconds / CPSAT_WALL_PER_DET
    return min(settings.schedule_det, max(settings.schedule_det_min, det))


def _cp_sat(tasks, ways, frame, hint_pick, hint_order, settings):
    """(pick, order, status, answer) of the fleet's CP-SAT sequencing over every way, or
    (None, None, why, answer or None). It stops on its deterministic limit (:func:`solve_det`);
    the wall clock only stops it as a far safety net (:data:`WALL_NET_FACTOR`)."""
    names = sorted(frame.ready)
    idx = {n: i for i, n in enumerate(names)}
    hint = timed(tasks, ways, hint_pick, hint_order, frame)
    last = max([p.free for p in hint] + list(frame.ready.values()) +
               [u for ds in frame.downs.values() for _, u in ds if u is not None])
    det = solve_det(settings)
    try:
        ans = sequence_plates(tasks, [[(idx[w.printer], w.machine_s) for w in ws] for ws in ways],
                              [ws[0].clear_s for ws in ways], ready=[frame.ready[n] for n in names],
                              calendar=frame.calendar, origin=frame.now, last=last,
                              extra_s=sum(w[0].machine_s + w[0].clear_s for w in ways),
                              hint_printer=[idx[ways[j][hint_pick[j]].printer] for j in range(len(tasks))],
                              hint_order=hint_order, downs=[frame.downs.get(n, ()) for n in names],
                              settings=ScheduleSettings(time_limit_s=wall_net(settings.schedule_s, WALL_NET_FACTOR * det),
                                                        workers=settings.workers, seed=settings.seed,
                                                        deterministic_limit=det))
    except PackerError as exc:         # the horizon or a window that cannot hold a plate: keep the list plans
        return None, None, f"not used ({exc})", None
    if ans is None:
        return None, None, "no answer in its deterministic time", None
    pick = [next(k for k, w in enumerate(ways[j]) if idx[w.printer] == ans.printer[j]) for j in range(len(tasks))]
    order = sorted(range(len(tasks)), key=lambda j: (ans.start[j], ans.printer[j]))
    return pick, order, ans.status, ans


def _put_back(tasks, ways, pick, order, frame):
    """Plates the solver moved off their first way go back where that ranks no worse:
    (plates, pick)."""
    pick = list(pick)
    cur = timed(tasks, ways, pick, order, frame)
    best = rank(cur, frame)
    for j in order:
        if pick[j] == 0:
            continue
        trial = pick[:j] + [0] + pick[j + 1:]
        got = timed(tasks, ways, trial, order, frame)
        if got is not None and rank(got, frame) <= best:
            pick, cur, best = trial, got, rank(got, frame)
    return cur, pick


def sequence(tasks: Sequence[PlateState], ways: Sequence[Sequence[Way]], frame: Frame, settings,
             hint: tuple | None = None) -> Sequenced:
    """The best-ranked timing of ``tasks`` (see the module docstring).

    ``ways[j][0]`` is the way task ``j`` runs if nothing moves it (its own printer when
    that is still usable). ``settings`` gives the solve's limits (:func:`solve_det`, and
    ``schedule_s`` for the wall-clock safety net), ``workers`` and ``seed``. ``hint``:
    (pick, order) of an earlier plan, one more candidate.
    """
    if not tasks:
        return Sequenced([], "nothing to sequence", rank([], frame), "nothing to sequence")
    named = _list_candidates(tasks, ways, frame)
    if hint is not None and hint[0]:
        named.append(("previous plan", list(hint[0]), list(hint[1])))
    cands = []
    for name, pick, order in named:
        got = timed(tasks, ways, pick, order, frame)
        if got is not None:
            cands.append((rank(got, frame), name, got, pick, order))
    if not cands:
        raise PackerError("no list schedule places every plate (a bug: ways must be usable)")
    cands.sort(key=lambda c: c[0])
    _, _, _, hpick, horder = cands[0]
    pick, order, status, ans = _cp_sat(tasks, ways, frame, hpick, horder, settings)
    # charged like the fleet planner's solves: the deterministic time used, the whole limit without an answer
    work = 0.0 if status.startswith("not used") else \
        CPSAT_WALL_PER_DET * (ans.det_s if ans is not None else solve_det(settings))
    if pick is not None:
        got = timed(tasks, ways, pick, order, frame)
        if got is not None:
            cands.append((rank(got, frame), "cp-sat", got, pick, order))
            back, bpick = _put_back(tasks, ways, pick, order, frame)
            cands.append((rank(back, frame), "cp-sat, moves put back", back, bpick, order))
    r, name, best, pick, order = min(cands, key=lambda c: c[0])
    return Sequenced(best, name, r, status, tuple(pick), tuple(order), work_s=work,
                     deterministic=ans is None or ans.deterministic)
