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
from packer.fleet.timemodel import PartStats, part_mass_g, powder_use_g
from packer.intake.footprint import nest_region
from packer.intake.job import Job, Printer
from packer.intake.orders import part_key, repaired_files
from packer.layouts import PlateRule, fits_empty_plate, layout_fill_plate, layout_one_plate, place_transform
from packer.nest.budget import UNITS_PER_SECOND, WORK
from packer.pack3d import Body, pack_builds
from packer.pack3d.orient import axis_rotations
from packer.intake.parts import Part, load_part, powder_mesh
from packer.output.partstable import parts_table
from packer.output.plan import OrderStatus, PlacedCopy, Plan, PlatePlan, UnplacedCopy

__all__ = ["Copy", "PlanSettings", "Outcome", "PlanGlue", "plan_job", "intake", "expand_copies", "order_status", "stats_of"]


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


def _rule(job: Job, printer: Printer) -> PlateRule:
    return PlateRule(printer.profile, job.rules.spacing_for(printer.profile), job.rules.margin_for(printer.profile))


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
    glue = PlanGlue(job, parts, kinds, seed=settings.seed)
    say(f"planning plates over {len(job.fleet)} printers ({settings.seconds:g} s budget)")
    try:
        fleet = plan_fleet(refs, job.fleet, stats=stats, calendar=job.calendar, start=job.start,
                           fits=glue.fits, capacity_hint=glue.capacity_hint, can_print=glue.can_print,
                           seconds=PLANNER_SHARE * settings.seconds, seed=settings.seed, work_meter=glue.work_done,
                           fill=glue.fill)
    except PackerError as exc:          # name the job file (and the key, for a calendar that cannot work)
        hint = "calendar.shift: " if "shift" in str(exc) else ""
        raise type(exc)(f"{job.file}: {hint}{exc}") from None
    for ref, reason in fleet.unplaced:
        unplaced.append(UnplacedCopy(ref.order, ref.part, ref.copy, reason))
    plates = _changes_from(_number([glue.plate_plan(p) for p in fleet.plates]))
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

#: Work-clock charges of one ``fits`` call, so that the planner's work clock follows the wall
#: clock: wall seconds per second of the nesting engine's work units, plus a charge per call
#: and per copy for the footprint offsets, the exact re-check and the glue. Fitted to
#: per-call measurements on the development machine (the engine's units follow its CPU time
#: since they are charged per evaluated item, hence 1.0; ``packer bench day`` prints the work
#: clock beside the wall clock; re-fit when they drift apart).
NEST_WALL_PER_WORK, FIT_CALL_S, FIT_COPY_S = 1.0, 0.04, 0.003
#: Packing variants of a powder build confirmation (fixed, so the answer is deterministic),
#: and its charge: ``POWDER_BODY_S * n + POWDER_PAIR_S * n**2`` for n bodies (the voxel
#: packing and the exact pairwise checks grow faster than linearly), fitted like the above.
POWDER_VARIANTS, POWDER_BODY_S, POWDER_PAIR_S = 1, 0.025, 0.00001
#: Orientations a copy may take in a powder build confirmation: the flattest of the 24 axis
#: rotations. Builds in a day plan are short (their contents are cut by due times), so
#: lying flat is what counts; on a 185-body build of the generated day this gave the same
#: height as all 24 in a third of the time.
POWDER_FLAT_ORIENTATIONS = 4


class PlanGlue:
    """The callables the fleet planner asks: can this printer print it, does this set fit."""

    def __init__(self, job: Job, parts: dict, kinds: list, *, seed: int) -> None:
        self.job, self.parts, self.kinds, self.seed = job, parts, kinds, seed
        self.empty_fit: dict = {}
        self.grown_area: dict = {}
        self.work_s = 0.0           # deterministic seconds of work done by fits (the work meter)
        self.flat: dict = {}        # kind -> flattest rotations for powder builds

    def work_done(self) -> float:
        """Deterministic seconds of layout work so far (the planner's work meter)."""
        return self.work_s

    def part(self, ref: CopyRef) -> Part:
        return self.parts[self.kinds[ref.kind][0]]

    def rule(self, printer: Printer) -> PlateRule:
        return _rule(self.job, printer)

    def can_print(self, printer: Printer, ref: CopyRef) -> str | None:
        part, rule = self.part(ref), self.rule(printer)
        prof = printer.profile
        if ref.material not in printer.materials:
            return f"{printer.name} does not run {ref.material}"
        if prof.technology == "powder":
            inner = np.array(prof.build_volume, dtype=float) - 2 * rule.margin
            if self.kinds[ref.kind][0][1]:
                dims = np.asarray(part.mesh.extents)
                fits = all(dims <= inner) or all(dims[[1, 0, 2]] <= inner)
            else:
                fits = all(np.sort(part.mesh.extents) <= np.sort(inner))
            return None if fits else f"larger than the build volume of {printer.name} inside the margin"
        if part.height > prof.build_volume[2] + 1e-9:
            return f"{part.height:.1f} mm tall; {printer.name} builds {prof.build_volume[2]:g} mm high"
        key = (ref.kind, prof.name, rule.spacing, rule.margin)
        if key not in self.empty_fit:
            self.empty_fit[key] = fits_empty_plate(part.footprint, self.kinds[ref.kind][1], rule)
        if not self.empty_fit[key]:
            return f"footprint does not fit the plate of {printer.name} inside the margin in any allowed rotation"
        return None

    def capacity_hint(self, printer: Printer, refs: Sequence[CopyRef]) -> float:
        """Share of the plate (or volume) the set needs, by the continuous bound."""
        rule = self.rule(printer)
        if printer.profile.technology == "powder":
            usable = float(np.prod(np.array(printer.profile.build_volume) - 2 * rule.margin))
            need = sum(float(np.prod(np.asarray(self.part(r).mesh.extents) + rule.spacing)) for r in refs)
            return need / usable
        region, _ = nest_region(printer.profile, spacing=rule.spacing, margin=rule.margin)
        total = 0.0
        for r in refs:
            key = (r.kind, rule.spacing)
            if key not in self.grown_area:
                fp = self.part(r).footprint
                self.grown_area[key] = fp.buffer(rule.spacing / 2).area
            total += self.grown_area[key]
        return total / region.area

    def fits(self, printer: Printer, refs: Sequence[CopyRef], *, seconds: float | None = None):
        """A verified layout of ``refs`` on the printer's plate, or None.

        ``seconds`` is the time the planner allows this call (from its budget);
        without it the layout gets its own default by the number of copies.
        """
        rule = self.rule(printer)
        budget = min(8.0, 1.0 + 0.08 * len(refs))
        powder_budget = budget * 3
        if seconds is not None:
            budget, powder_budget = min(budget, seconds), min(powder_budget, seconds)
        if printer.profile.technology == "powder":
            bodies = [Body(powder_mesh(self.part(r)), self._powder_rotations(r)) for r in refs]
            result = pack_builds(bodies, volume=tuple(printer.profile.build_volume), spacing=rule.spacing,
                                 margin=rule.margin, seconds=powder_budget, seed=self.seed,
                                 variants=POWDER_VARIANTS)
            self.work_s += FIT_CALL_S + POWDER_BODY_S * len(refs) + POWDER_PAIR_S * len(refs) ** 2
            if len(result.builds) != 1 or result.unplaced:
                return None
            return _PowderLayout(result.builds[0], result.builds[0].height)
        return self._nested(layout_one_plate, rule, refs, seconds=budget)

    def fill(self, printer: Printer, refs: Sequence[CopyRef], *, must: int, seconds: float):
        """A verified layout of the first ``must`` of ``refs`` and as many more as fit.

        Filament and resin plates only. Returns (layout, chosen): ``chosen`` are the
        indices into ``refs`` on the plate (ascending) and the layout numbers them in
        that order; None when the first ``must`` found no common layout in time.
        """
        return self._nested(layout_fill_plate, self.rule(printer), refs, must=must,
                            seconds=min(seconds, 1.0 + 0.08 * len(refs)))

    def _nested(self, layout_fn, rule: PlateRule, refs: Sequence[CopyRef], **kw):
        """Call a flat-plate layout function on the copies' footprints and charge its work
        to the work meter (engine work units at their wall rate, plus per call and per copy)."""
        footprints = [self.part(r).footprint for r in refs]
        rotations = [self.kinds[r.kind][1] for r in refs]
        units = WORK[0]
        got = layout_fn(footprints, rotations, rule, seed=self.seed, **kw)
        self.work_s += NEST_WALL_PER_WORK * (WORK[0] - units) / UNITS_PER_SECOND + FIT_CALL_S + FIT_COPY_S * len(refs)
        return got

    def _powder_rotations(self, ref: CopyRef):
        """Orientations of a copy in powder builds: as loaded when locked, else the flattest."""
        if self.kinds[ref.kind][0][1]:
            return "locked"
        if ref.kind not in self.flat:
            rots = axis_rotations()
            verts = self.part(ref).mesh.vertices
            z = np.array([np.ptp(verts @ r[2]) for r in rots])
            order = np.argsort(np.round(z, 6), kind="stable")[:POWDER_FLAT_ORIENTATIONS]
            self.flat[ref.kind] = rots[order]
        return self.flat[ref.kind]

    def plate_plan(self, pj) -> PlatePlan:
        printer = next(p for p in self.job.fleet if p.name == pj.printer)
        prof, rule = printer.profile, self.rule(printer)
        items = []
        if prof.technology == "powder":
            moves = {bp.index: np.asarray(bp.transform, dtype=float) for bp in pj.layout.build.placements}
            height = pj.layout.build_height_mm
        else:
            moves = {pl.item: place_transform(self.part(pj.copies[pl.item]).to_print, pl)
                     for pl in pj.layout.places}
            height = max(self.part(r).height for r in pj.copies)
        for k, ref in enumerate(pj.copies):
            part = self.part(ref)
            move = moves[k] if prof.technology != "powder" else moves[k] @ np.asarray(part.to_print)
            mass = part_mass_g(prof, ref.material, stats_of(part))
            items.append(PlacedCopy(ref.order, ref.part, ref.copy, self.kinds[ref.kind][0][0], move, ref.material,
                                    part.volume, mass, locked=self.kinds[ref.kind][0][1]))
        volume = sum(i.volume_mm3 for i in items)
        mass = sum(i.mass_g for i in items)
        if prof.technology == "powder":
            x, y, _ = prof.build_volume
            utilization = volume / (x * y * height) if height else 0.0
            mass += powder_use_g(prof, pj.material, build_volume_used_mm3=x * y * height,
                                 parts_volume_mm3=volume)
        else:
            utilization = pj.layout.utilization
        return PlatePlan(id=pj.id, printer=pj.printer, profile=prof.name, technology=prof.technology,
                         material=pj.material, volume=tuple(prof.build_volume), spacing=rule.spacing,
                         margin=rule.margin, items=tuple(items), start=pj.start, end=pj.end, free=pj.free,
                         height_mm=height, utilization=utilization, print_s=pj.time.total_s - pj.time.clear_s,
                         mass_g=mass, time_terms=dict(pj.time.terms), note=getattr(pj, "note", ""),
                         change_s=pj.change_s, post=tuple((q.step, q.duration_s, q.operator) for q in pj.post),
                         done=pj.done if pj.post else pj.free)


@dataclass(frozen=True)
class _PowderLayout:
    build: object
    build_height_mm: float


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
