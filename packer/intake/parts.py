"""Part intake: read a mesh, triage its defects, lay it flat, cast its footprint.

The stage turns one mesh file into a :class:`Part`: the mesh in its print
orientation (resting on z = 0, bounds minimum at the origin, millimetres), the
motion that took it there from the file (a uniform unit scale, a rotation and a
translation), its exact XY shadow with holes, its height, volume and surface
area, and what :func:`packer.intake.mesh.examine.examine` found.

Defects are triaged (:mod:`packer.intake.mesh.triage`): an unusable file raises a
:class:`~packer.errors.GeometryError` naming the file and the reason; a mesh
that is printable with caution (open seams, shells touching or overlapping,
bad winding) becomes a part, and its defects are in :attr:`Part.exam`. The
customer's triangles are not changed unless the line asks for ``repair: true``:
the measures use a consistently wound copy, and the plate files carry the
file's own triangles. With repair, the part is made of the repaired mesh
(:mod:`packer.intake.mesh.repair`, in :attr:`Part.repair`), which the plate
files then carry.

The footprint (:mod:`packer.intake.mesh.shadow`) is the exact shadow of the triangles;
separate islands are joined by thin bridges and counted in :attr:`Part.islands`.

The resting pose comes from :func:`packer.intake.pose.lay_flat` (squared to the
plate by :mod:`packer.intake.squaring`).

Choices and limits
------------------
- The footprint is the union of every triangle's projection (whatever its
  winding), so open or badly wound meshes cast their true shadow.
- Several bodies in one file are one part (a kit printed together); bodies that
  overlap count their shared volume once (:mod:`packer.intake.mesh.volume`).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import shapely
import trimesh

from packer.errors import GeometryError
from packer.intake.mesh.examine import Examination, examine
from packer.intake.mesh.limits import Limits
from packer.intake.mesh.raw import unusable
from packer.intake.mesh.read import read_mesh
from packer.intake.mesh.repair import Repair, repair_mesh
from packer.intake.mesh.shadow import footprint_of
from packer.intake.mesh.triage import unusable_defects
from packer.intake.pose import lay_flat
from packer.intake.squaring import square_to_plate

__all__ = ["Part", "load_mesh", "load_part", "powder_mesh"]


@dataclass(frozen=True, eq=False)
class Part:
    """One part ready for placement (compared and hashed by identity: it holds arrays).

    Attributes
    ----------
    name
        Part name (the file stem unless given).
    source
        The mesh file.
    mesh
        The mesh in print orientation, bounds minimum at (0, 0, 0). Do not modify.
    to_print
        (4, 4) float, read-only: source mesh coordinates (the file's unit) -> print
        orientation in mm (a uniform unit scale, a rotation and a translation, never a mirror);
        for a repaired part: coordinates of the repaired mesh (mm, the file's frame) -> print.
    footprint
        XY shadow of ``mesh`` with holes, same frame (see module notes on islands).
    height
        Extent along z in print orientation, mm.
    volume
        Enclosed volume, mm^3 (method in ``exam.volume``).
    area
        Surface area, mm^2.
    islands
        Separate pieces of the shadow joined into ``footprint`` (1: exact shadow).
    exam
        What intake found: format, unit, defects, volume method (of the file, before repair).
    repair
        The repaired mesh and what changed, when the line asked for ``repair: true``; None:
        the part is the file's own triangles.
    cache_key
        Its entry in the parts cache (:mod:`packer.intake.cache`), ``""`` when not cacheable.
    """

    name: str
    source: Path
    mesh: trimesh.Trimesh
    to_print: np.ndarray
    footprint: shapely.Polygon
    height: float
    volume: float
    area: float
    islands: int
    exam: Examination
    repair: Repair | None = None
    cache_key: str = ""


# --- reading ---------------------------------------------------------------------------

def load_mesh(path: str | Path, *, limits: Limits | None = None) -> trimesh.Trimesh:
    """The file's own triangles, untouched, in the file's unit (for plate files).

    A file with several objects (a 3MF build) is flattened into one mesh with
    each object's placement applied. Nothing is merged, dropped or turned.

    Raises
    ------
    InputError
        Missing file or a suffix that is not a mesh format.
    GeometryError
        Unreadable content, no triangles, coordinates that are not finite.
    """
    raw = read_mesh(path, limits=limits)
    bad = unusable_defects(raw.vertices, raw.faces)
    if bad:
        raise unusable(raw.path, "; ".join(d.detail for d in bad))
    return trimesh.Trimesh(vertices=np.array(raw.vertices), faces=np.array(raw.faces), process=False)


@functools.lru_cache(maxsize=None)
def powder_mesh(part: Part) -> trimesh.Trimesh:
    """The mesh a powder build packs for the part, in print orientation.

    Voxels cover the surface and fill what it encloses, which needs a surface
    closed at the cell size. A part whose triangles are balanced (closed, even
    with shells touching or overlapping) is packed as it is; an open one as its
    convex hull, which contains it: spacing, containment and the interlocking
    check then hold for the part too (a part inside a removable hull comes out
    with it). A repaired part is packed as it is when repair closed it.
    """
    if part.repair is not None:
        return part.mesh if part.repair.after.closed else part.mesh.convex_hull
    if part.exam.topology.balanced:
        return part.mesh
    return part.mesh.convex_hull


# --- the whole intake -------------------------------------------------------------------

def load_part(path: str | Path, *, name: str | None = None, lock_orientation: bool = False,
              units: str | None = None, limits: Limits | None = None, repair: bool = False) -> Part:
    """Read, triage, orient and measure one part.

    Parameters
    ----------
    path
        Mesh file (STL, OBJ, PLY, 3MF).
    name
        Part name; default: the file stem.
    lock_orientation
        Keep the mesh as modelled (only translated onto the plate) instead of
        laying it flat.
    units
        Unit of a file without one (``mm``, ``cm``, ``m``, ``inch``); default mm.
        A 3MF file's own ``unit`` attribute always applies.
    limits
        Reader limits (file size, triangles, 3MF archive and XML).
    repair
        Repair the mesh (:func:`packer.intake.mesh.repair.repair_mesh`) and make the part of
        the result; default: the file's own triangles.

    Returns
    -------
    Part
        With ``exam.defects`` listing every caution-class defect (of the file as read).

    Raises
    ------
    InputError
        Missing file or unknown format.
    GeometryError
        Unusable mesh; the message names the file and the reason,
        e.g. ``"parts/box.stl: the file holds no triangles"``.
    """
    path = Path(path)
    vertices, faces, exam = examine(path, units=units, limits=limits)
    fixed = repair_mesh(vertices, exam.topology, exam.volume) if repair else None
    if fixed is not None:
        vertices, faces = np.array(fixed.vertices), np.array(fixed.faces)
    mesh = trimesh.Trimesh(vertices=vertices, faces=faces, process=False)
    scale = np.diag([1.0 if fixed is not None else exam.mm_per_unit] * 3 + [1.0])
    try:
        if lock_orientation:
            to_print = np.eye(4)
            to_print[:3, 3] = -np.asarray(mesh.bounds[0], dtype=float)
        else:
            to_print = square_to_plate(lay_flat(mesh), mesh.vertices)   # minimum-area box along x, y
    except GeometryError as exc:
        raise GeometryError(f"{path}: {exc}") from None
    printed = mesh.copy()
    printed.apply_transform(to_print)
    # remove rounding residue so the bounds minimum is exactly the origin
    residue = np.asarray(printed.bounds[0], dtype=float)
    printed.apply_translation(-residue)
    to_print = to_print.copy()
    to_print[:3, 3] -= residue
    try:
        footprint, islands = footprint_of(printed, with_islands=True)
    except GeometryError as exc:
        raise GeometryError(f"{path}: {exc}") from None
    to_print = to_print @ scale
    to_print.setflags(write=False)
    for array in (printed.vertices, printed.faces):
        array.flags.writeable = False
    return Part(name=name or path.stem, source=path, mesh=printed, to_print=to_print,
                footprint=footprint, height=float(printed.extents[2]),
                volume=float(fixed.after.volume_mm3 if fixed is not None else exam.volume.mm3),
                area=float(printed.area), islands=islands, exam=exam, repair=fixed)
