"""The whole path of one plan: job -> parts -> layouts -> fleet plan -> plan.

:func:`plan_job` is what ``packer plan`` runs; it returns plain data that
:func:`write_outputs` turns into files. Nothing here draws, parses YAML or
talks to the user: the command line does that.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field, replace
from datetime import datetime, timedelta
from pathlib import Path
from typing import Callable, Sequence

import numpy as np

from packer.errors import GeometryError, InputError, PackerError
from packer.fleet.planner import CopyRef, plan_fleet
from packer.fleet.timemodel import PartStats, bed_material_g, part_mass_g
from packer.intake.job import Job, Printer
from packer.intake.orders import part_key, repaired_files
from packer.intake.parts import Part, load_part
from packer.layouts import LayoutPart, Layouts
from packer.layouts.flat import FlatLayouts, plate_rule
from packer.layouts.powder import PowderLayouts
from packer.output.partstable import parts_table
from packer.output.plan import OrderStatus, PlacedCopy, Plan, PlatePlan, UnplacedCopy

__all__ = ["Copy", "PlanSettings", "Outcome", "PlateMaker", "layout_service", "layout_parts", "plan_job", "intake", "expand_copies", "order_status", "stats_of"]


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
    seconds: float = 30.0       # budget of the whole plan (s); the fleet planner gets PLANNER_SHARE of it
    seed: int = 0


@dataclass(frozen=True)
class Outcome:
    plan: Plan
    parts: dict                 # (mesh path, locked) -> Part
    printers: tuple[Printer, ...]
    job: Job
    log: tuple[str, ...] = field(default=())
    run: dict = field(default_factory=dict)     # wall-clock figures of this run (run.json, not plan.json)


def intake(job: Job, *, progress: Callable[[str, int, int], None] | None = None) -> tuple[dict, dict]:
    """Load every distinct part of the job once.

    Returns ``(parts, failures)``: Part per key, and a reason per key whose
    mesh could not be used. ``progress("meshes", done, total)`` is called
    after each mesh when given.
    """
    lines = {}
    files = repaired_files(job.orders, Path(job.file).parent)
    for order in job.orders:
        for line in order.lines:
            if not line.problem:
                lines.setdefault(part_key(line, files), line)
    parts, failures = {}, {}
    for k, (key, line) in enumerate(lines.items()):
        try:
            parts[key] = load_part(line.mesh, name=line.part, lock_orientation=line.lock_orientation,
                                   units=line.units, repair=line.repair)
        except (GeometryError, InputError) as exc:
            failures[key] = str(exc)
        except MemoryError:
            failures[key] = f"{line.mesh.name}: the mesh needs more memory than there is"
        except Exception as exc:  # noqa: BLE001 - a hostile mesh file must cost its line, not the job
            failures[key] = f"{line.mesh.name}: could not be read ({type(exc).__name__}: {str(exc)[:200]})"
        if progress is not None:
            progress("meshes", k + 1, len(lines))
    return parts, failures


def line_refusal(line, part: Part) -> str | None:
    """Why a line's copies cannot use a part that did load (``meshes: strict``, units), or None."""
    if line.meshes == "strict" and part.exam is not None and part.exam.cautions:
        return (f"meshes: strict refuses {part.source}: "
                + "; ".join(f"{d.kind} ({d.count})" for d in part.exam.cautions))
    if part.exam is not None and part.exam.unit_source != "3MF unit attribute" and \
            (line.units or "mm") != part.exam.unit:
        return (f"{part.source} is used by another line with units: {part.exam.unit}; "
                f"this line says {line.units or 'mm'} (give each unit its own file)")
    return None


def expand_copies(job: Job, parts: dict, failures: dict) -> tuple[list[Copy], list[UnplacedCopy], list[str]]:
    copies, unplaced, notes = [], [], []
    files = repaired_files(job.orders, Path(job.file).parent)
    for order in job.orders:
        for line in order.lines:
            key = part_key(line, files)
            reason = line.problem or (f"mesh rejected: {failures[key]}" if key in failures else None)
            if reason is None and key in parts:
                reason = line_refusal(line, parts[key])
                if reason:
                    notes.append(f"{job.file}:{line.line_no}: {line.where}.mesh: {reason}")
            for n in range(1, line.quantity + 1):
                if reason:
                    unplaced.append(UnplacedCopy(order.id, line.part, n, reason))
                else:
                    copies.append(Copy(order.id, line.part, n, key, line.material, line.rotations,
                                       order.due, order.priority))
            if key in failures and not line.problem:
                notes.append(f"{job.file}:{line.line_no}: {line.where}.mesh: {failures[key]}")
    return copies, unplaced, notes


def stats_of(part: Part) -> PartStats:
    return PartStats(volume_mm3=part.volume, area_mm2=part.area, height_mm=part.height,
                     footprint_mm2=part.footprint.area)


def _rule(job: Job, printer: Printer):
    return plate_rule(job.rules, printer)


def plan_job(job: Job, *, settings: PlanSettings = PlanSettings(),
             say: Callable[[str], None] = lambda s: None,
             progress: Callable[[str, int, int], None] | None = None) -> Outcome:
    """Plan a job: every ordered copy ends on a plate or in the unplaced list with a reason.

    ``say`` gets a line per stage; ``progress(stage, done, total)``, when given,
    follows the mesh intake.
    """
    say(f"reading {sum(len(o.lines) for o in job.orders)} order lines")
    parts, failures = intake(job, progress=progress)
    copies, unplaced, notes = expand_copies(job, parts, failures)
    problems = [str(p) for p in job.problems]
    problems += [n for n in notes if n not in problems]
    say(f"{len(parts)} parts ready, {len(failures)} rejected; {len(copies)} copies to place")
    for part in parts.values():
        if part.exam is not None and part.exam.cautions:
            say(f"caution: {part.source}: " + ", ".join(f"{d.kind} ({d.count})" for d in part.exam.cautions)
                + " (planned; see the parts table)")

    kinds = sorted({(c.key, c.rotations) for c in copies}, key=str)
    kind_of = {k: i for i, k in enumerate(kinds)}
    stats = [stats_of(parts[key]) for key, _ in kinds]
    refs = [CopyRef(c.order, c.part, c.copy, kind_of[(c.key, c.rotations)], c.material, c.due, c.priority)
            for c in copies]
    layouts = layout_service(job, parts, kinds, seed=settings.seed)
    say(f"planning plates over {len(job.fleet)} printers ({settings.seconds:g} s budget)")
    try:
        fleet = plan_fleet(refs, job.fleet, stats=stats, calendar=job.calendar, start=job.start,
                           layouts=layouts, seconds=PLANNER_SHARE * settings.seconds, seed=settings.seed)
    except PackerError as exc:          # name the job file (and the key, for a calendar that cannot work)
        hint = "calendar.shift: " if "shift" in str(exc) else ""
        raise type(exc)(f"{job.file}: {hint}{exc}") from None
    for ref, reason in fleet.unplaced:
        unplaced.append(UnplacedCopy(ref.order, ref.part, ref.copy, reason))
    maker = PlateMaker(job, parts, kinds)
    plates = _changes_from(_number([maker.plate_plan(p) for p in fleet.plates]))
    orders = order_status(job, plates)
    notes, run = split_timing(_jsonable(fleet.stats))
    plan = Plan(job=job.name, job_file=job.file, start=job.start, plates=tuple(plates),
                unplaced=tuple(unplaced), orders=orders, problems=tuple(problems),
                bounds=_jsonable(fleet.bounds), notes=notes, parts=parts_table(job, parts, failures))
    _account(job, plan)
    return Outcome(plan=plan, parts=parts, printers=job.fleet, job=job, run=run)


#: Planner statistics read off the wall clock: they differ from run to run, so they go to
#: run.json, never into plan.json (which must be byte-identical for the same job, seed, budget).
WALL_CLOCK_NOTES = ("planning_s", "phases_s", "fits_s")


def split_timing(notes: dict) -> tuple[dict, dict]:
    """Split the planner's statistics into (deterministic notes, wall-clock figures).

    The keys of :data:`WALL_CLOCK_NOTES` at the top and every ``wall_s`` below it
    go to the second dict, named by their key path (``contents.rounds[0].wall_s``).
    """
    run: dict = {}

    def strip(value, where: str):
        if isinstance(value, dict):
            kept = {}
            for k, v in value.items():
                at = f"{where}.{k}" if where else str(k)
                if k == "wall_s" or (not where and k in WALL_CLOCK_NOTES):
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

def layout_parts(parts: dict, kinds: Sequence) -> list[LayoutPart]:
    """The layout engines' view of each kind: ``kinds[k]`` is ((mesh path, locked), rotations)."""
    return [LayoutPart(parts[key], tuple(rotations), bool(key[1])) for key, rotations in kinds]


def layout_service(job: Job, parts: dict, kinds: Sequence, *, seed: int) -> Layouts:
    """The layout service the fleet planner asks: flat plates and powder builds, routed per printer."""
    shapes = layout_parts(parts, kinds)
    return Layouts([FlatLayouts(shapes, job.rules, seed=seed), PowderLayouts(shapes, job.rules, seed=seed)])


class PlateMaker:
    """Turns the planner's plates into the plan's PlatePlans (copies placed, masses, times)."""

    def __init__(self, job: Job, parts: dict, kinds: Sequence) -> None:
        self.job, self.kinds = job, layout_parts(parts, kinds)
        self.meshes = [key[0] for key, _ in kinds]      # the mesh file each kind's copies name

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


def _number(plates: list[PlatePlan]) -> list[PlatePlan]:
    from dataclasses import replace
    ordered = sorted(plates, key=lambda p: (p.start, p.printer))
    width = max(2, len(str(len(ordered))))
    return [replace(p, id=f"P{i + 1:0{width}d}", file=f"plates/P{i + 1:0{width}d}.3mf")
            for i, p in enumerate(ordered)]


def _changes_from(plates: list[PlatePlan]) -> list[PlatePlan]:
    """Name the material each material change starts from (the printer's plate before)."""
    before: dict[str, str] = {}
    out = {}
    for p in sorted(plates, key=lambda p: (p.start, p.printer)):
        out[p.id] = replace(p, change_from=before.get(p.printer, "")) if p.change_s else p
        before[p.printer] = p.material
    return [out[p.id] for p in plates]


def order_status(job: Job, plates: list[PlatePlan]) -> tuple[OrderStatus, ...]:
    done: dict[str, datetime] = {}
    placed: dict[str, int] = defaultdict(int)
    for p in plates:
        for c in p.items:
            placed[c.order] += 1
            t = p.done or p.end      # through post-processing (plans written before it: print end)
            done[c.order] = max(done.get(c.order, t), t)
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
