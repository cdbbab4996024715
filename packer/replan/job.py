"""The whole path of one replan: written plan + events -> situation -> replanned plan.

:func:`replan_job` is what ``packer replan`` runs, the replanning twin of
:func:`packer.pipeline.plan_job`: it reads the newest version in an output
folder, applies the events, replans and returns plain data (the next
:class:`~packer.output.plan.Plan` among it) that
:func:`packer.replan.write.write_version` turns into files. Nothing here parses
arguments or prints: the command does that.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from datetime import datetime
from pathlib import Path
from typing import Callable, Sequence

from packer.errors import InputError
from packer.intake.identity import CopyKey, copy_key
from packer.output.plan import Plan
from packer.pipeline import PlateMaker, layout_service
from packer.replan.changes import Changes, compare
from packer.replan.events import Added, Event, Failed
from packer.replan.planner import Replanned, ReplanSettings, replan
from packer.replan.state import Situation, apply_events, fmt_time
from packer.replan.versions import Written, load_written
from packer.replan.write import next_plan

__all__ = ["ReplanOutcome", "replan_job"]


@dataclass(frozen=True)
class ReplanOutcome:
    """A replan, ready to write.

    Attributes
    ----------
    previous : Written
        The version replanned.
    events : tuple
        The events applied (survivors attached to their failed plates, added orders
        with their copies).
    now : datetime
    situation : Situation
        Frozen plates, plates not started and the copies that needed a plate.
    replanned : Replanned
        The next plan at fleet level and the replanner's figures.
    changes : Changes
        What changed from the version before.
    plan : Plan
        The next version as the plan contract has it.
    files : dict
        Plate id -> how its file is made: ``copy`` (unchanged, copied byte for byte) or ``export``.
    stats : dict
        Figures of the replan for plan.json (the same for the same events, seed and budget).
    run : dict
        Figures for run.json: wall seconds (``replan_s``, ``phases_s`` per step) and work-clock
        seconds per step (``work_clock_s``; the fleet planner's reported work differed by 1 ms
        between two runs of one case with the same plan, so it stays out of plan.json).
    """

    previous: Written
    events: tuple
    now: datetime
    situation: Situation
    replanned: Replanned
    changes: Changes
    plan: Plan
    files: dict
    stats: dict = field(default_factory=dict)
    run: dict = field(default_factory=dict)


def replan_job(outdir: Path, events: Sequence[Event], *, now: datetime | None = None,
               survived: Sequence[CopyKey] = (), settings: ReplanSettings = ReplanSettings(),
               plates_dir: Path | None = None, say: Callable[[str], None] = lambda s: None,
               note: Callable[[str], None] = lambda s: None) -> ReplanOutcome:
    """Replan the newest version in ``outdir`` after ``events``.

    ``now`` is the moment of the replan (None: the clock, which must not be before
    the plan's start); ``survived`` names copies of failed plates that came out fine.
    ``say`` gets the line that names the replan, ``note`` the situation after the events.

    Raises
    ------
    InputError
        When there is no plan to replan, or the events do not fit it.
    """
    prev = load_written(Path(outdir), plates_dir=plates_dir,
                        added_files=[e.file for e in events if isinstance(e, Added)])
    if now is None:
        now = datetime.now().replace(second=0, microsecond=0)
        if now < prev.state.start:
            raise InputError(f"the clock says {fmt_time(now)}, before the plan's start "
                             f"({fmt_time(prev.state.start)}); give the moment of the replan with --now")
    say(f"packer replan: {prev.job.name}, version {prev.version} -> {prev.version + 1}, now {fmt_time(now)}")
    events = _with_copies(_attach(list(events), survived, prev), prev)
    job = prev.job
    sit = apply_events(prev.state, events, now=now, printers=job.fleet, calendar=job.calendar, stats=prev.stats)
    note(f"{len(sit.frozen)} plates frozen, {len(sit.planned)} not started, {len(sit.pool)} copies need a plate")
    layouts = layout_service(job, prev.parts, prev.kinds, seed=settings.seed)
    rp = replan(sit, printers=job.fleet, stats=prev.stats, calendar=job.calendar, layouts=layouts,
                settings=settings)
    ch = compare(prev.state, rp.state)
    stats = {"pool_copies": len(sit.pool), "new_plates": len(ch.new_plates),
             "removed_plates": len(ch.removed_plates), "moved_plates": len(ch.moved_plates),
             "moved_copies": len(ch.moved_copies), "late_orders": list(ch.late_now),
             "schedule": rp.stats["schedule"], "safety_nets": rp.stats["safety_nets"]}
    problems = list(prev.data.get("problems", [])) + list(prev.new_problems)
    plan, files = next_plan(prev, rp.state, maker=PlateMaker(job, prev.parts, prev.kinds), events=events, problems=problems, stats=stats)
    return ReplanOutcome(previous=prev, events=tuple(events), now=now, situation=sit, replanned=rp, changes=ch,
                         plan=plan, files=files, stats=stats,
                         run={"replan_s": round(rp.stats["replan_s"], 2), "phases_s": rp.stats["phases_s"],
                              "work_clock_s": rp.stats["work_s"]})


def _attach(events: list, survived: Sequence[CopyKey], prev: Written) -> list:
    """Give each surviving copy to the failed plate that holds it."""
    if not survived:
        return events
    failed = [k for k, e in enumerate(events) if isinstance(e, Failed)]
    if not failed:
        raise InputError("--survived needs a --failed plate")
    extra: dict[int, list] = {}
    for key in survived:
        holder = [k for k in failed if events[k].plate in prev.plates
                  and key in {copy_key(i) for i in prev.plates[events[k].plate].items}]
        if not holder:
            raise InputError(f"--survived {key.label}: not on any failed plate "
                             f"({', '.join(events[k].plate for k in failed)})")
        extra.setdefault(holder[0], []).append(key)
    return [replace(e, survived=tuple(e.survived) + tuple(extra[k])) if k in extra else e
            for k, e in enumerate(events)]


def _with_copies(events: list, prev: Written) -> list:
    """Each ``Added`` event with its orders and their copies (read with the plan)."""
    groups = iter(prev.new_groups)
    out = []
    for e in events:
        if isinstance(e, Added):
            ids = set(next(groups))
            e = replace(e, orders=tuple(o for o in prev.new_orders if o.id in ids),
                        copies=tuple(c for key, c in sorted(prev.refs.items()) if key[0] in ids))
        out.append(e)
    return out
