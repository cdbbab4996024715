"""A job's copies as the planner sees them, built one way for plan and replan alike.

:func:`intake` loads each distinct part once (keyed by :class:`~packer.intake.identity.PartId`);
:func:`expand_copies` gives every ordered copy a :class:`Copy` or an unplaced
entry with its reason; :func:`catalog` numbers the part kinds and builds the
planner's copy references and part statistics from them. :func:`order_status`
and :func:`account` read a finished plan back against the job.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path
from typing import Callable, Collection, Sequence

from packer.errors import GeometryError, InputError, PackerError
from packer.fleet.planner import CopyRef
from packer.fleet.timemodel import PartStats
from packer.intake.identity import CopyKey, PartKind, copy_key, kind_order
from packer.intake.job import Job
from packer.intake.orders import part_key, repaired_files
from packer.intake.cache import load_part_keyed
from packer.intake.parts import Part
from packer.output.plan import OrderStatus, Plan, PlatePlan, UnplacedCopy

__all__ = ["Copy", "Catalog", "intake", "line_refusal", "expand_copies", "stats_of", "catalog", "order_status",
           "account"]


@dataclass(frozen=True)
class Copy:
    """One physical piece to print."""

    order: str
    part: str
    copy: int
    kind: PartKind             # which Part (``kind.part``) and the rotations it may take
    material: str
    due: datetime
    priority: int


@dataclass(frozen=True)
class Catalog:
    """The planner's tables for a set of copies.

    Attributes
    ----------
    kinds : tuple of PartKind
        ``CopyRef.kind`` indexes it.
    stats : tuple of PartStats
        Part statistics by kind, for the time model.
    refs : dict
        :class:`~packer.intake.identity.CopyKey` -> :class:`~packer.fleet.records.CopyRef`,
        in the order of the copies given.
    """

    kinds: tuple[PartKind, ...]
    stats: tuple[PartStats, ...]
    refs: dict


def intake(job: Job, *, progress: Callable[[str, int, int], None] | None = None,
           cache: Path | None = None) -> tuple[dict, dict]:
    """Load every distinct part of the job once (read back from the parts cache ``cache``, a
    folder of :mod:`packer.intake.cache`, when it holds them).

    Returns ``(parts, failures)``: Part per :class:`PartId`, and a reason per
    ``PartId`` whose mesh could not be used. ``progress("meshes", done, total)``
    is called after each mesh when given.
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
            parts[key] = load_part_keyed(line.mesh, cache=cache, name=line.part,
                                         lock_orientation=line.lock_orientation, units=line.units,
                                         repair=line.repair)
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
    if line.meshes == "strict" and part.exam.cautions:
        return (f"meshes: strict refuses {part.source}: "
                + "; ".join(f"{d.kind} ({d.count})" for d in part.exam.cautions))
    if part.exam.unit_source != "3MF unit attribute" and \
            (line.units or "mm") != part.exam.unit:
        return (f"{part.source} is used by another line with units: {part.exam.unit}; "
                f"this line says {line.units or 'mm'} (give each unit its own file)")
    return None


def expand_copies(job: Job, parts: dict, failures: dict) -> tuple[list[Copy], list[UnplacedCopy], list[str]]:
    """Every ordered copy: a :class:`Copy` to plan, or unplaced with its line's reason; plus the
    problems to report (``file:line: where.mesh: why``)."""
    copies, unplaced, notes = [], [], []
    files = repaired_files(job.orders, Path(job.file).parent)
    for order in job.orders:
        for line in order.lines:
            part_id = part_key(line, files)
            reason = line.problem or (f"mesh rejected: {failures[part_id]}" if part_id in failures else None)
            if reason is None and part_id in parts:
                reason = line_refusal(line, parts[part_id])
                if reason:
                    notes.append(f"{job.file}:{line.line_no}: {line.where}.mesh: {reason}")
            kind = PartKind(part_id, line.rotations)
            for n in range(1, line.quantity + 1):
                if reason:
                    unplaced.append(UnplacedCopy(order.id, line.part, n, reason))
                else:
                    copies.append(Copy(order.id, line.part, n, kind, line.material, order.due, order.priority))
            if part_id in failures and not line.problem:
                notes.append(f"{job.file}:{line.line_no}: {line.where}.mesh: {failures[part_id]}")
    return copies, unplaced, notes


def stats_of(part: Part) -> PartStats:
    return PartStats(volume_mm3=part.volume, area_mm2=part.area, height_mm=part.height,
                     footprint_mm2=part.footprint.area)


def catalog(copies: Sequence[Copy], parts: dict, *, later: Collection[str] = ()) -> Catalog:
    """Number the part kinds of ``copies`` and build the planner's copy references.

    Kinds are numbered in :func:`~packer.intake.identity.kind_order`; the kinds only
    copies of the orders in ``later`` have (orders added by a replan) come after the
    others, so the numbers an earlier version gave stay.
    """
    first = sorted({c.kind for c in copies if c.order not in later}, key=kind_order)
    kinds = tuple(first + sorted({c.kind for c in copies} - set(first), key=kind_order))
    number = {k: i for i, k in enumerate(kinds)}
    refs = {copy_key(c): CopyRef(c.order, c.part, c.copy, number[c.kind], c.material, c.due, c.priority) for c in copies}
    return Catalog(kinds=kinds, stats=tuple(stats_of(parts[k.part]) for k in kinds), refs=refs)


def order_status(job: Job, plates: Sequence[PlatePlan]) -> tuple[OrderStatus, ...]:
    """Per order of the job: copies, copies placed, and when its last placed copy is done."""
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


def account(job: Job, plan: Plan) -> None:
    """Every ordered copy is on exactly one plate or unplaced: a broken promise is a bug."""
    want = {CopyKey(o.id, line.part, n) for o in job.orders for line in o.lines for n in range(1, line.quantity + 1)}
    got = [copy_key(c) for p in plan.plates for c in p.items] + [copy_key(u) for u in plan.unplaced]
    if len(got) != len(set(got)) or set(got) != want:
        missing, extra = want - set(got), set(got) - want
        raise PackerError(f"plan does not account for every copy exactly once (a bug): "
                          f"missing {sorted(missing)[:5]}, unexpected {sorted(extra)[:5]}, "
                          f"duplicates {len(got) - len(set(got))}")
