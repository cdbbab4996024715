"""The orders of a job file: order ids, due times and order lines, checked at the edge.

An order line that has any problem (an unknown key, a bad value, a mesh that is
missing or outside the folders the job may read) is refused as a whole: its
copies are listed as unplaced with the reason, never half-read. An order with
a problem of its own (a missing or duplicate id, a due time that is no time)
keeps its place in the plan and the report, every one of its copies goes to
``unplaced`` with the reason, and the problems of its lines are still reported.

Mesh paths must resolve, after following links, inside the job file's folder or
inside a folder the job lists under ``mesh_roots``; order ids and part names are
text without control characters and of limited length (:mod:`packer.limits`).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from datetime import datetime
from pathlib import Path
from typing import Sequence

from packer.intake.fields import Reader
from packer.intake.identity import PartId
from packer.intake.mesh.repair import repaired_names
from packer.limits import env_name
from packer.intake.source import key_path, shown

__all__ = ["Line", "Order", "read_orders", "check_materials", "mesh_inside", "repaired_files", "part_key",
           "MESH_SUFFIXES", "MESH_KEYS"]

MESH_SUFFIXES = (".stl", ".obj", ".ply", ".3mf")

_ORDER = {"id", "due", "priority", "lines", "notes"}
_LINE = {"part", "mesh", "quantity", "material", "rotations", "orientation", "units", "meshes", "repair"}
#: Mesh intake keys a line takes, with the job-level value as its default (packer/intake/mesh/).
MESH_KEYS = {"units": ("mm", "cm", "m", "inch"), "meshes": ("plan", "strict")}


@dataclass(frozen=True)
class Line:
    """One line of an order: a part mesh, how many copies, in which material."""

    part: str                         # part name, unique within the order
    mesh: Path                        # resolved from the job file's folder
    quantity: int
    material: str
    rotations: tuple[float, ...]      # allowed turns about z, degrees
    lock_orientation: bool            # keep the mesh as modelled (no lay-flat)
    where: str                        # key path in the job file, for messages
    problem: str | None = None        # why its copies cannot be planned, if so
    line_no: int | None = None        # line of the mesh key in the job file
    units: str | None = None          # unit of a mesh file without one (mm, cm, m, inch); None: mm
    meshes: str = "plan"              # "strict": refuse meshes with caution-class defects too
    repair: bool = False              # repair the mesh (packer/intake/mesh/repair.py); else plate files keep it


@dataclass(frozen=True)
class Order:
    id: str
    due: datetime | None              # None only for an order refused for its due time
    priority: int
    lines: tuple[Line, ...]
    problem: str | None = None        # why none of its copies can be planned, if so


def mesh_inside(path: Path, roots: Sequence[Path]) -> bool:
    """Whether ``path`` (resolved, links followed) lies inside one of ``roots`` (resolved)."""
    return any(path == root or root in path.parents for root in roots)


def repaired_files(orders: Sequence[Order], base: Path) -> dict[Path, Path]:
    """Where each mesh that a line asks to repair is written, relative to a plan's folder
    (``meshes/<stem>-repaired.3mf``, :func:`packer.intake.mesh.repair.repaired_names`)."""
    return repaired_names([ln.mesh for o in orders for ln in o.lines if ln.repair and ln.problem is None], base)


def part_key(line: Line, files: dict[Path, Path]) -> PartId:
    """Which part a line's copies are: (mesh, orientation locked). A repaired mesh is named by its
    file in the plan's folder (relative), so a line with ``repair: true`` and one without never
    share a part."""
    return PartId(files[line.mesh] if line.repair and line.mesh in files else line.mesh, line.lock_orientation)


def read_orders(r: Reader, value, base: Path, *, roots: Sequence[Path] | None = None,
                start: datetime | None = None, defaults: dict | None = None) -> tuple[Order, ...]:
    """Read ``orders:``; mesh paths resolve from ``base`` and must lie inside ``roots`` (default: ``base``).

    ``start``: when planning starts; a due time before it is a warning. ``defaults``: the
    job-level values of the mesh intake keys (:data:`MESH_KEYS`, and ``repair``).
    """
    if not isinstance(value, list) or not value:
        r.report("orders", "must be a list of orders, each with an id, a due time and lines")
        return ()
    roots = tuple(p.resolve() for p in (roots if roots is not None else (base,)))
    seen: dict[str, int] = {}
    for raw in value:
        oid = raw.get("id") if isinstance(raw, dict) else None
        if isinstance(oid, (str, int)) and not isinstance(oid, bool):
            seen[str(oid)] = seen.get(str(oid), 0) + 1
    orders, labels = [], set()
    for i, raw in enumerate(value):
        order = _read_order(r, raw, key_path("orders", i), base, roots, start, seen, defaults or {})
        if order is not None:
            label = order.id
            while label in labels:       # a refused order's label may meet a real id
                label += "*"
            labels.add(label)
            orders.append(replace(order, id=label))
    return tuple(orders)


def _read_order(r: Reader, raw, where: str, base: Path, roots, start, seen, defaults) -> Order | None:
    mark = r.mark()
    m = r.mapping(raw, where, allowed=_ORDER, required={"id", "due", "lines"})
    if m is None:
        return None
    oid = r.text(m, "id", where)
    due = r.moment(m, "due", where)
    priority = r.number(m, "priority", where, 1, minimum=1, maximum=1000, integer=True)
    if oid is not None and seen.get(oid, 0) > 1:
        r.report(key_path(where, "id"), f"order id {shown(oid)} is used by {seen[oid]} orders; "
                                        "their copies are not planned until the ids differ")
    own = [p for p in r.errors_since(mark) if not p.where.startswith(key_path(where, "lines"))]
    if due is not None and start is not None and due < start:
        r.warn(key_path(where, "due"), f"due {due.isoformat(timespec='minutes')} is before the plan starts "
                                       f"({start.isoformat(timespec='minutes')}); the order will be late")
    label = oid if oid is not None and seen.get(oid, 0) <= 1 else (
        f"{oid} ({where})" if oid is not None else where)
    lines = _read_lines(r, m.get("lines"), key_path(where, "lines"), base, roots, defaults)
    if not own:
        return Order(oid, due, int(priority or 1), lines)
    why = f"order refused: {own[0].where}: {own[0].message}" + (
        f" (and {len(own) - 1} more problem{'s' if len(own) > 2 else ''} of the order)" if len(own) > 1 else "")
    lines = tuple(replace(ln, problem=why if ln.problem is None else f"{why}; {ln.problem}") for ln in lines)
    return Order(label, due, int(priority or 1), lines, problem=why)


def _read_lines(r: Reader, value, where: str, base: Path, roots, defaults) -> tuple[Line, ...]:
    if not isinstance(value, list) or not value:
        r.report(where, "must be a list of lines with mesh, quantity and material")
        return ()
    lines, parts = [], set()
    for i, raw in enumerate(value):
        line = _read_line(r, raw, key_path(where, i), base, roots, defaults)
        if line is None:
            continue
        if line.part in parts:
            if line.problem is None:
                r.report(key_path(line.where, "part"), f"part name {shown(line.part)} appears twice in this "
                                                       "order; name the lines apart")
                line = replace(line, problem=f"part name {shown(line.part)} appears twice in this order")
            label = f"{line.part} ({line.where.rsplit('.', 1)[-1]})"
            while label in parts:
                label += "*"
            line = replace(line, part=label)
        parts.add(line.part)
        lines.append(line)
    return tuple(lines)


def _read_line(r: Reader, raw, at: str, base: Path, roots, defaults) -> Line | None:
    """One order line, or None when it has no countable copies (its problems are reported)."""
    mark = r.mark()
    m = r.mapping(raw, at, allowed=_LINE, required={"mesh", "quantity", "material"})
    if m is None:
        return None
    mesh = r.path_text(m, "mesh", at)
    qty = r.number(m, "quantity", at, minimum=1, integer=True)
    if qty is not None and qty > r.limits.copies_per_line:
        r.report(key_path(at, "quantity"), f"{qty} copies, more than the limit of {r.limits.copies_per_line} "
                                           f"per line ({env_name('copies_per_line')}); split the line or raise it")
        qty = None
    material = r.text(m, "material", at)
    rotations = _read_rotations(r, m, at)
    orient = r.choice(m, "orientation", at, ("lay-flat", "as-modelled"), "lay-flat")
    mesh_keys = {k: r.choice(m, k, at, options, defaults.get(k)) for k, options in MESH_KEYS.items()}
    repair = r.flag(m, "repair", at, defaults.get("repair"))
    stem = _stem(mesh)[:r.limits.text_chars]
    part = r.text(m, "part", at, stem) if stem or "part" in m else None
    mesh_path = _check_mesh(r, mesh, key_path(at, "mesh"), base, roots) if mesh is not None else None
    if qty is None:
        return None
    errors = r.errors_since(mark)
    problem = None
    if errors:
        first = errors[0]
        problem = f"line refused: {first.where}: {first.message}" if first.where != key_path(at, "mesh") \
            else first.message
    return Line(part=part or at.rsplit(".", 1)[-1], mesh=mesh_path or base, quantity=int(qty),
                material=material or "", rotations=rotations, lock_orientation=(orient == "as-modelled"),
                where=at, problem=problem, line_no=r.doc.line_of(key_path(at, "mesh")),
                units=mesh_keys["units"], meshes=mesh_keys["meshes"] or "plan", repair=bool(repair))


def _stem(mesh: str | None) -> str:
    try:
        return Path(mesh).stem if mesh else ""
    except ValueError:
        return ""


def _check_mesh(r: Reader, mesh: str, at: str, base: Path, roots) -> Path | None:
    """The mesh path resolved (links followed) if it is usable, else None with the problem reported."""
    try:
        path = (base / mesh).resolve()
    except (OSError, ValueError, RuntimeError) as exc:
        r.report(at, f"cannot resolve mesh path {shown(mesh)} ({exc})")
        return None
    if not mesh_inside(path, roots):
        inside = " or ".join(str(p) for p in roots)
        r.report(at, f"mesh path {shown(mesh)} resolves to {shown(str(path), limit=200)}, outside the folders "
                     f"this job may read ({inside}); list its folder under 'mesh_roots:' in the job to allow it")
        return None
    if path.suffix.lower() not in MESH_SUFFIXES:
        r.report(at, f"mesh format {shown(path.suffix)} is not one of {', '.join(MESH_SUFFIXES)}")
        return None
    if not path.is_file():
        r.report(at, f"mesh file not found: {shown(str(path), limit=200)}")
        return None
    return path


def _read_rotations(r: Reader, m: dict, at: str) -> tuple[float, ...]:
    value = m.get("rotations", "quarter-turns")
    presets = {"quarter-turns": (0.0, 90.0, 180.0, 270.0), "none": (0.0,),
               "half-turns": (0.0, 180.0), "fine": tuple(float(a) for a in range(0, 360, 15))}
    if isinstance(value, str):
        if value in presets:
            return presets[value]
        r.report(key_path(at, "rotations"), f"must be one of {', '.join(presets)} or a list of angles in degrees")
        return presets["quarter-turns"]
    got = r.numbers(m, "rotations", at)
    if got is not None and len(got) > 360:
        r.report(key_path(at, "rotations"), f"{len(got)} angles; at most 360")
        got = None
    if not got:
        if got is not None:
            r.report(key_path(at, "rotations"), "must list at least one angle")
        return presets["quarter-turns"]
    return tuple(sorted({a % 360.0 for a in got}))


def check_materials(r: Reader, orders: tuple[Order, ...], fleet) -> tuple[Order, ...]:
    """Mark lines whose material no printer of the fleet runs."""
    if not fleet:
        return orders
    runs = sorted({m for p in fleet for m in p.materials})
    out = []
    for order in orders:
        lines = []
        for line in order.lines:
            if line.problem is None and line.material not in runs:
                why = f"no printer in the fleet runs material {shown(line.material)} (fleet runs: {', '.join(runs)})"
                r.report(key_path(line.where, "material"), why)
                line = replace(line, problem=why)
            lines.append(line)
        out.append(replace(order, lines=tuple(lines)))
    return tuple(out)
