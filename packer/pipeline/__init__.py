"""The whole path of one plan: job -> parts -> layouts -> fleet plan -> plan.

:func:`plan_job` is what ``packer plan`` runs; it returns plain data that
:func:`write_outputs` turns into files. Nothing here draws, parses YAML or
talks to the user: the command line does that.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field, replace
from datetime import datetime
from typing import Callable, Sequence

import numpy as np

from packer.errors import PackerError
from packer.fleet.timemodel import bed_material_g, part_mass_g
from packer.intake.identity import PartKind
from packer.intake.job import Job, Printer
from packer.layouts.flat import plate_rule
from packer.output.partstable import parts_table
from packer.output.plan import PlacedCopy, Plan, PlatePlan, UnplacedCopy, name_plates
from packer.pipeline.components import plan_components
from packer.pipeline.executor import Executor, InProcess, executor_for
from packer.pipeline.service import layout_parts, layout_service
from packer.pipeline.copies import (Catalog, Copy, account, catalog, expand_copies, intake, line_refusal,
                                    order_status, stats_of)

__all__ = ["Copy", "Catalog", "PlanSettings", "Outcome", "PlateMaker", "layout_service", "layout_parts", "plan_job",
           "intake", "line_refusal", "expand_copies", "catalog", "order_status", "stats_of", "split_timing",
           "plan_components", "Executor", "executor_for"]


@dataclass(frozen=True)
class PlanSettings:
    seconds: float = 30.0       # budget of the whole plan (s); the fleet planner gets PLANNER_SHARE of it
    seed: int = 0


@dataclass(frozen=True)
class Outcome:
    plan: Plan
    parts: dict                 # PartId -> Part
    printers: tuple[Printer, ...]
    job: Job
    log: tuple[str, ...] = field(default=())
    run: dict = field(default_factory=dict)     # wall-clock figures of this run (run.json, not plan.json)


def _rule(job: Job, printer: Printer):
    return plate_rule(job.rules, printer)


def plan_job(job: Job, *, settings: PlanSettings = PlanSettings(),
             say: Callable[[str], None] = lambda s: None,
             progress: Callable[[str, int, int], None] | None = None,
             executor: Executor | None = None) -> Outcome:
    """Plan a job: every ordered copy ends on a plate or in the unplaced list with a reason.

    ``say`` gets a line per stage; ``progress(stage, done, total)``, when given,
    follows the mesh intake. The fleet is planned component by component
    (:mod:`packer.pipeline.components`) on ``executor`` (default: in-process); the
    plan does not depend on the executor.
    """
    say(f"reading {sum(len(o.lines) for o in job.orders)} order lines")
    parts, failures = intake(job, progress=progress)
    copies, unplaced, notes = expand_copies(job, parts, failures)
    problems = [str(p) for p in job.problems]
    problems += [n for n in notes if n not in problems]
    say(f"{len(parts)} parts ready, {len(failures)} rejected; {len(copies)} copies to place")
    for part in parts.values():
        if part.exam.cautions:
            say(f"caution: {part.source}: " + ", ".join(f"{d.kind} ({d.count})" for d in part.exam.cautions)
                + " (planned; see the parts table)")

    table = catalog(copies, parts)
    where = f", {executor.name}" if executor is not None and not isinstance(executor, InProcess) else ""
    say(f"planning plates over {len(job.fleet)} printers ({settings.seconds:g} s budget{where})")
    try:
        fleet = plan_components(job, parts, table.kinds, table.stats, list(table.refs.values()),
                                seconds=PLANNER_SHARE * settings.seconds, seed=settings.seed, executor=executor)
    except PackerError as exc:          # name the job file (and the key, for a calendar that cannot work)
        hint = "calendar.shift: " if "shift" in str(exc) else ""
        raise type(exc)(f"{job.file}: {hint}{exc}") from None
    for ref, reason in fleet.unplaced:
        unplaced.append(UnplacedCopy(ref.order, ref.part, ref.copy, reason))
    maker = PlateMaker(job, parts, table.kinds)
    plates = _changes_from(name_plates([maker.plate_plan(p) for p in fleet.plates]))
    orders = order_status(job, plates)
    stats, run = split_timing(_jsonable(fleet.stats))
    plan = Plan(job=job.name, job_file=job.file, start=job.start, plates=tuple(plates),
                unplaced=tuple(unplaced), orders=orders, problems=tuple(problems),
                bounds=_jsonable(fleet.bounds), stats=stats, parts=parts_table(job, parts, failures))
    account(job, plan)
    return Outcome(plan=plan, parts=parts, printers=job.fleet, job=job, run=run)


#: Planner statistics read off the wall clock: they differ from run to run, so they go to
#: run.json, never into plan.json (which must be byte-identical for the same job, seed, budget).
WALL_CLOCK_STATS = ("planning_s", "phases_s", "fits_s")
_COMPONENT = re.compile(r"components\[\d+\]")


def split_timing(notes: dict) -> tuple[dict, dict]:
    """Split the planner's statistics into (deterministic statistics, wall-clock figures).

    The keys of :data:`WALL_CLOCK_STATS` at the top and in each of ``components``
    (a plan joined from components), and every ``wall_s`` below them, go to the second
    dict, named by their key path (``contents.rounds[0].wall_s``).
    """
    run: dict = {}

    def strip(value, where: str):
        if isinstance(value, dict):
            kept = {}
            for k, v in value.items():
                at = f"{where}.{k}" if where else str(k)
                if k == "wall_s" or (k in WALL_CLOCK_STATS and (not where or _COMPONENT.fullmatch(where))):
                    run[at] = v
                else:
                    kept[k] = strip(v, at)
            return kept
        if isinstance(value, list):
            return [strip(v, f"{where}[{i}]") for i, v in enumerate(value)]
        return value
    return strip(notes, ""), run


#: Share of the plan's budget given to the fleet planner (on its work clock); the rest is
#: for reading the meshes and assembling the plan, which the planner does not see.
PLANNER_SHARE = 0.85


class PlateMaker:
    """Turns the planner's plates into the plan's PlatePlans (copies placed, masses, times)."""

    def __init__(self, job: Job, parts: dict, kinds: Sequence[PartKind]) -> None:
        self.job, self.kinds = job, layout_parts(parts, kinds)
        self.meshes = [k.part.mesh for k in kinds]      # the mesh file each kind's copies name

    def plate_plan(self, pj) -> PlatePlan:
        printer = next(p for p in self.job.fleet if p.name == pj.printer)
        prof, rule = printer.profile, _rule(self.job, printer)
        layout = pj.layout
        items = []
        for k, ref in enumerate(pj.copies):
            kind = self.kinds[ref.kind]
            part = kind.part
            mass = part_mass_g(prof, ref.material, stats_of(part))
            items.append(PlacedCopy(ref.order, ref.part, ref.copy, self.meshes[ref.kind], layout.transforms[k],
                                    ref.material, part.volume, mass, locked=kind.locked))
        volume = sum(i.volume_mm3 for i in items)
        height = layout.build_height_mm
        x, y, _ = prof.build_volume
        mass = sum(i.mass_g for i in items) + bed_material_g(prof, pj.material, build_volume_used_mm3=x * y * height,
                                                             parts_volume_mm3=volume)
        return PlatePlan(id=pj.id, printer=pj.printer, profile=prof.name, technology=prof.technology,
                         material=pj.material, volume=tuple(prof.build_volume), spacing=rule.spacing,
                         margin=rule.margin, items=tuple(items), start=pj.start, end=pj.end, free=pj.free,
                         height_mm=height, utilization=layout.utilization, print_s=pj.time.total_s - pj.time.clear_s,
                         mass_g=mass, time_terms=dict(pj.time.terms), note=pj.note,
                         change_s=pj.change_s, post=tuple((q.step, q.duration_s, q.operator) for q in pj.post),
                         done=pj.done if pj.post else pj.free)


def _jsonable(value):
    """Bounds and statistics as plain JSON values."""
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if isinstance(value, (np.floating, float)):
        return round(float(value), 4)
    if isinstance(value, (np.integer, int, bool, str)) or value is None:
        return value.item() if isinstance(value, np.generic) else value
    if isinstance(value, datetime):
        return value.isoformat(timespec="seconds")
    return str(value)


def _changes_from(plates: list[PlatePlan]) -> list[PlatePlan]:
    """Name the material each material change starts from (the printer's plate before)."""
    before: dict[str, str] = {}
    out = {}
    for p in sorted(plates, key=lambda p: (p.start, p.printer)):
        out[p.id] = replace(p, change_from=before.get(p.printer, "")) if p.change_s else p
        before[p.printer] = p.material
    return [out[p.id] for p in plates]
