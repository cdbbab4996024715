"""The whole path of one plan: job -> parts -> layouts -> fleet plan -> plan.

:func:`plan_job` is what ``packer plan`` runs; it returns plain data that
:func:`write_outputs` turns into files. Nothing here draws, parses YAML or
talks to the user: the command line does that.
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from pathlib import Path
from typing import Callable

import numpy as np

from packer.errors import GeometryError, InputError, PackerError
from packer.fleet.timemodel import PartStats, part_mass_g, plate_time
from packer.job import Job, Printer
from packer.layout import PlateRule, fits_empty_plate, layout_plates, place_transform
from packer.parts import Part, load_part
from packer.plan import OrderStatus, PlacedCopy, Plan, PlatePlan, UnplacedCopy

__all__ = ["Copy", "PlanSettings", "Outcome", "plan_job", "intake"]


@dataclass(frozen=True)
class Copy:
    """One physical piece to print."""

    order: str
    part: str
    copy: int
    key: tuple[Path, bool]     # (mesh path, orientation locked): which Part it is
    material: str
    rotations: tuple[float, ...]
    due: datetime
    priority: int


@dataclass(frozen=True)
class PlanSettings:
    seconds: float = 30.0       # wall-clock budget for the whole search
    seed: int = 0


@dataclass(frozen=True)
class Outcome:
    plan: Plan
    parts: dict                 # (mesh path, locked) -> Part
    printers: tuple[Printer, ...]
    job: Job
    log: tuple[str, ...] = field(default=())


def intake(job: Job) -> tuple[dict, dict]:
    """Load every distinct part of the job once.

    Returns ``(parts, failures)``: Part per key, and a reason per key whose
    mesh could not be used.
    """
    parts, failures = {}, {}
    for order in job.orders:
        for line in order.lines:
            key = (line.mesh, line.lock_orientation)
            if line.problem or key in parts or key in failures:
                continue
            try:
                parts[key] = load_part(line.mesh, name=line.part, lock_orientation=line.lock_orientation)
            except (GeometryError, InputError) as exc:
                failures[key] = str(exc)
    return parts, failures


def _copies(job: Job, parts: dict, failures: dict) -> tuple[list[Copy], list[UnplacedCopy], list[str]]:
    copies, unplaced, notes = [], [], []
    for order in job.orders:
        for line in order.lines:
            key = (line.mesh, line.lock_orientation)
            reason = line.problem or (f"mesh rejected: {failures[key]}" if key in failures else None)
            for n in range(1, line.quantity + 1):
                if reason:
                    unplaced.append(UnplacedCopy(order.id, line.part, n, reason))
                else:
                    copies.append(Copy(order.id, line.part, n, key, line.material, line.rotations,
                                       order.due, order.priority))
            if key in failures and not line.problem:
                notes.append(f"{job.file}: {line.where}.mesh: {failures[key]}")
    return copies, unplaced, notes


def stats_of(part: Part) -> PartStats:
    return PartStats(volume_mm3=part.volume, area_mm2=part.area, height_mm=part.height,
                     footprint_mm2=part.footprint.area)


def _rule(job: Job, printer: Printer) -> PlateRule:
    return PlateRule(printer.profile, job.rules.spacing_for(printer.profile), job.rules.margin_for(printer.profile))


def _why_not(copy: Copy, part: Part, printer: Printer, rule: PlateRule, fit_cache: dict) -> str | None:
    """None when ``printer`` could print ``copy`` on an empty plate, else the reason."""
    prof = printer.profile
    if copy.material not in printer.materials:
        return f"does not run {copy.material}"
    if prof.technology == "powder":
        inner = np.array(prof.build_volume) - 2 * rule.margin
        dims = np.sort(part.mesh.extents)
        if copy.key[1]:
            dims = np.array(part.mesh.extents)
            fits = all(dims <= inner) or all(dims[[1, 0, 2]] <= inner)
        else:
            fits = all(dims <= np.sort(inner))
        return None if fits else "larger than the build volume inside the margin"
    if part.height > prof.build_volume[2] + 1e-9:
        return f"{part.height:.1f} mm tall, taller than the {prof.build_volume[2]:g} mm build height"
    key = (copy.key, copy.rotations, prof.name, rule.spacing, rule.margin)
    if key not in fit_cache:
        fit_cache[key] = fits_empty_plate(part.footprint, copy.rotations, rule)
    return None if fit_cache[key] else "footprint does not fit the plate inside the margin in any allowed rotation"


def plan_job(job: Job, *, settings: PlanSettings = PlanSettings(),
             say: Callable[[str], None] = lambda s: None) -> Outcome:
    """Plan a job: every ordered copy ends on a plate or in the unplaced list with a reason."""
    from packer.fleet.assign import assign_plates   # the fleet stage: plates over printers and time

    say(f"reading {sum(len(o.lines) for o in job.orders)} order lines")
    parts, failures = intake(job)
    copies, unplaced, notes = _copies(job, parts, failures)
    problems = [str(p) for p in job.problems]
    problems += [n for n in notes if n not in problems]
    say(f"{len(parts)} parts ready, {len(failures)} rejected; {len(copies)} copies to place")

    fit_cache: dict = {}
    able: dict[Copy, list[Printer]] = {}
    for c in copies:
        reasons, ok = [], []
        for printer in job.fleet:
            why = _why_not(c, parts[c.key], printer, _rule(job, printer), fit_cache)
            (reasons.append(f"{printer.name}: {why}") if why else ok.append(printer))
        if ok:
            able[c] = ok
        else:
            unplaced.append(UnplacedCopy(c.order, c.part, c.copy,
                                         "fits no printer of the fleet (" + "; ".join(reasons) + ")"))
    fleet = assign_plates(job, [c for c in copies if c in able], able, parts, settings=settings, say=say)
    unplaced += fleet.unplaced
    plates = _number(fleet.plates)
    orders = _order_status(job, plates)
    plan = Plan(job=job.name, job_file=job.file, start=job.start, plates=tuple(plates),
                unplaced=tuple(unplaced), orders=orders, problems=tuple(problems),
                bounds=fleet.bounds, notes=fleet.notes)
    _account(job, plan)
    return Outcome(plan=plan, parts=parts, printers=job.fleet, job=job)


def _number(plates: list[PlatePlan]) -> list[PlatePlan]:
    from dataclasses import replace
    ordered = sorted(plates, key=lambda p: (p.start, p.printer))
    width = max(2, len(str(len(ordered))))
    return [replace(p, id=f"P{i + 1:0{width}d}", file=f"plates/P{i + 1:0{width}d}.3mf")
            for i, p in enumerate(ordered)]


def _order_status(job: Job, plates: list[PlatePlan]) -> tuple[OrderStatus, ...]:
    done: dict[str, datetime] = {}
    placed: dict[str, int] = defaultdict(int)
    for p in plates:
        for c in p.items:
            placed[c.order] += 1
            done[c.order] = max(done.get(c.order, p.end), p.end)
    out = []
    for o in job.orders:
        total = sum(line.quantity for line in o.lines)
        out.append(OrderStatus(o.id, o.due, o.priority, total, placed[o.id], done.get(o.id)))
    return tuple(out)


def _account(job: Job, plan: Plan) -> None:
    """Every ordered copy is on exactly one plate or unplaced: a broken promise is a bug."""
    want = {(o.id, line.part, n) for o in job.orders for line in o.lines for n in range(1, line.quantity + 1)}
    got = [(c.order, c.part, c.copy) for p in plan.plates for c in p.items]
    got += [(u.order, u.part, u.copy) for u in plan.unplaced]
    if len(got) != len(set(got)) or set(got) != want:
        missing, extra = want - set(got), set(got) - want
        raise PackerError(f"plan does not account for every copy exactly once (a bug): "
                          f"missing {sorted(missing)[:5]}, unexpected {sorted(extra)[:5]}, "
                          f"duplicates {len(got) - len(set(got))}")
