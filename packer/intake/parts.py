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
customer's triangles are never changed: the measures use a consistently wound
copy, and the plate files carry the file's own triangles.

The footprint (:mod:`packer.intake.mesh.shadow`) is the exact shadow of the triangles;
separate islands are joined by thin bridges and counted in :attr:`Part.islands`.

Choices and limits
------------------
- Lay-flat thresholds are our own choices (no published source): a resting face
  must need a tip of at least 10 degrees to topple, and contact areas within
  10 % of the best count as equal (the lower pose then wins).
- The footprint is the union of every triangle's projection (whatever its
  winding), so open or badly wound meshes cast their true shadow.
- Several bodies in one file are one part (a kit printed together); bodies that
  overlap count their shared volume once (:mod:`packer.intake.mesh.volume`).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import shapely
import trimesh

from packer.errors import GeometryError
from packer.intake.mesh.examine import Examination, examine
from packer.intake.mesh.limits import Limits
from packer.intake.mesh.raw import unusable
from packer.intake.mesh.read import MESH_FORMATS, read_mesh
from packer.intake.mesh.shadow import footprint_of
from packer.intake.mesh.triage import unusable_defects
from packer.intake.squaring import square_to_plate

__all__ = ["MeshCheck", "Part", "MESH_FORMATS", "load_mesh", "check_mesh", "lay_flat",
           "footprint_of", "load_part", "powder_mesh"]

_MIN_TIP_DEG = 10.0        # a resting pose must tip by at least this angle before it falls over (our choice)
_NEAR_BEST_AREA = 0.9      # contact areas within 10 % of the best count as equally good; then lowest wins
_MAX_POSES = 512           # largest hull facets considered as resting faces


@dataclass(frozen=True)
class MeshCheck:
    """What :func:`check_mesh` found.

    Attributes
    ----------
    watertight
        Every edge is shared by exactly two triangles.
    winding_consistent
        Every shared edge is traversed in opposite directions by its two triangles.
    volume
        Signed enclosed volume, mm^3 (negative: the triangles face inward);
        meaningful only for a closed, consistently oriented mesh.
    euler
        Euler characteristic V - E + F (referenced vertices, unique edges, triangles).
    genus
        Total genus ``(2 * bodies - euler) / 2`` of a closed orientable mesh, else None.
    bodies
        Edge-connected pieces.
    problems
        Human-readable reasons the mesh is unusable; empty when it is fine.
    """

    watertight: bool
    winding_consistent: bool
    volume: float
    euler: int
    genus: int | None
    bodies: int
    problems: tuple[str, ...]

    @property
    def ok(self) -> bool:
        return not self.problems


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
        orientation in mm (a uniform unit scale, a rotation and a translation, never a mirror).
    footprint
        XY shadow of ``mesh`` with holes, same frame (see module notes on islands).
    height
        Extent along z in print orientation, mm.
    volume
        Enclosed volume, mm^3 (method in ``exam.volume``).
    area
        Surface area, mm^2.
    check
        The closed-solid checks (Euler characteristic, genus).
    islands
        Separate pieces of the shadow joined into ``footprint`` (1: exact shadow).
    exam
        What intake found: format, unit, defects, volume method.
    """

    name: str
    source: Path
    mesh: trimesh.Trimesh
    to_print: np.ndarray
    footprint: shapely.Polygon
    height: float
    volume: float
    area: float
    check: MeshCheck
    islands: int = 1
    exam: Examination | None = None


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


# --- checking --------------------------------------------------------------------------

def _signed_volume(vertices: np.ndarray, faces: np.ndarray) -> float:
    """Signed volume (1/6) sum v0 . (v1 x v2) over the triangles (divergence theorem), mm^3.

    Vertices (n, 3) are first centred on their mean, which leaves the volume of a
    closed mesh unchanged and keeps the products small.
    """
    v = vertices - vertices.mean(axis=0)
    t = v[faces]
    return float(np.einsum("ij,ij->i", t[:, 0], np.cross(t[:, 1], t[:, 2])).sum() / 6.0)


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" if n == 1 else f"{n} {noun}s"


def check_mesh(mesh: trimesh.Trimesh) -> MeshCheck:
    """Check that a mesh is a closed, consistently oriented solid of positive volume.

    Parameters
    ----------
    mesh
        Vertices (n, 3) float, mm; faces (m, 3) int.

    Returns
    -------
    MeshCheck
        ``problems`` names each defect: open edges, edges shared by more than
        two triangles, inconsistent orientation, inside-out or empty volume.
        Inverted meshes are reported, not repaired.
    """
    faces = np.asarray(mesh.faces)
    if len(faces) == 0:
        return MeshCheck(False, False, 0.0, 0, None, 0, ("mesh has no triangles",))
    edges = np.sort(faces[:, [0, 1, 1, 2, 2, 0]].reshape(-1, 2), axis=1)
    _, counts = np.unique(edges, axis=0, return_counts=True)
    n_open = int(np.sum(counts == 1))
    n_crowded = int(np.sum(counts > 2))
    euler = int(len(np.unique(faces)) - len(counts) + len(faces))
    bodies = int(len(np.unique(trimesh.graph.connected_component_labels(
        mesh.face_adjacency, node_count=len(faces)))))
    watertight = bool(n_open == 0 and n_crowded == 0)
    winding = bool(mesh.is_winding_consistent) if watertight else False
    volume = _signed_volume(np.asarray(mesh.vertices, dtype=float), faces)

    problems = []
    if n_open:
        problems.append(f"mesh is not closed: {_count(n_open, 'open edge')}")
    if n_crowded:
        problems.append(f"mesh is not manifold: {_count(n_crowded, 'edge')} shared by more than two triangles")
    if watertight and not winding:
        problems.append("triangles are not consistently oriented: neighbours disagree on which side is outside")
    genus = None
    if watertight and winding:
        scale = float(np.ptp(mesh.vertices, axis=0).max()) or 1.0
        if volume < -1e-9 * scale ** 3:
            problems.append(f"mesh is inside out: its triangles face inward (signed volume {volume:.6g} mm^3)")
        elif volume <= 1e-9 * scale ** 3:
            problems.append(f"mesh encloses no volume ({volume:.3g} mm^3)")
        twice = 2 * bodies - euler
        if twice >= 0 and twice % 2 == 0:
            genus = twice // 2
    return MeshCheck(watertight=watertight, winding_consistent=winding, volume=volume, euler=euler,
                     genus=genus, bodies=bodies, problems=tuple(problems))


# --- orientation -----------------------------------------------------------------------

def _plane_basis(n: np.ndarray) -> np.ndarray:
    """Two unit vectors (2, 3) spanning the plane with normal ``n``."""
    helper = np.array([1.0, 0.0, 0.0]) if abs(n[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    u = np.cross(n, helper)
    u /= np.linalg.norm(u)
    return np.stack([u, np.cross(n, u)])


def _resting_faces(hull: trimesh.Trimesh) -> list[tuple[np.ndarray, np.ndarray, float]]:
    """Coplanar groups of hull triangles: (outward normal (3,), vertex ids, area), largest first."""
    faces = np.asarray(hull.faces)            # plain arrays: trimesh re-checks its cache on every access
    facets = list(hull.facets)
    lone = np.ones(len(faces), dtype=bool)
    for idx in facets:
        lone[idx] = False
    lone = np.flatnonzero(lone)
    normals = np.concatenate([np.asarray(hull.facets_normal, dtype=float).reshape(-1, 3),
                              np.asarray(hull.face_normals, dtype=float)[lone]])
    areas = np.concatenate([np.asarray(hull.facets_area, dtype=float).reshape(-1),
                            np.asarray(hull.area_faces, dtype=float)[lone]])
    # largest first; ties broken by the normal so the order never depends on qhull's numbering
    key = np.round(normals, 9)
    order = np.lexsort((key[:, 2], key[:, 1], key[:, 0], -np.round(areas, 9)))[:_MAX_POSES]
    members = [np.unique(faces[facets[k]]) if k < len(facets) else faces[lone[k - len(facets)]]
               for k in order]
    return [(normals[k], vids, float(areas[k])) for k, vids in zip(order, members)]


def _centre_of_mass(mesh: trimesh.Trimesh) -> np.ndarray:
    """Centre of mass of the solid; of the surface when the triangles enclose no clear volume."""
    with np.errstate(all="ignore"):
        com = np.asarray(mesh.center_mass, dtype=float)
        inside = np.all(com >= mesh.bounds[0] - 1e-9) and np.all(com <= mesh.bounds[1] + 1e-9)
    if np.isfinite(com).all() and inside:
        return com
    w = np.asarray(mesh.area_faces, dtype=float)
    return (np.asarray(mesh.triangles_center, dtype=float) * w[:, None]).sum(axis=0) / max(w.sum(), 1e-300)


def lay_flat(mesh: trimesh.Trimesh) -> np.ndarray:
    """Rigid motion that rests a closed mesh on its most stable large face.

    Each face of the convex hull is a way the part can rest on a plate. A
    resting face qualifies when the centre of mass projects inside it and the
    part must tip by at least 10 degrees to fall over (if none does, the most
    stable ones qualify). Among those, the one with the largest area of mesh
    triangles actually touching the plate wins; areas within 10 % of the best
    count as equal and the lowest resulting height wins; then the face already
    facing down; then a fixed order of normals. The result is deterministic.

    Parameters
    ----------
    mesh
        Closed mesh, vertices (n, 3) float, mm.

    Returns
    -------
    numpy.ndarray
        (4, 4) float: a proper rotation (determinant +1) followed by the
        translation that puts the bounds minimum at the origin.
    """
    vertices = np.asarray(mesh.vertices, dtype=float)
    scale = float(np.ptp(vertices, axis=0).max()) or 1.0
    tol = 1e-6 * scale
    com = _centre_of_mass(mesh)
    try:
        hull = mesh.convex_hull
    except Exception as exc:  # flat or degenerate point sets have no hull
        raise GeometryError(f"cannot lay the mesh flat: it has no convex hull ({exc})") from exc
    normals = np.asarray(mesh.face_normals, dtype=float)
    tri_area = np.asarray(mesh.area_faces, dtype=float)
    centres = np.asarray(mesh.triangles_center, dtype=float)
    tri_far = np.einsum("ij,ij->i", normals, centres)    # plane offset of each triangle

    poses = []  # (stable, tip_deg, contact_area, height, down_dot, normal)
    hull_vertices = np.asarray(hull.vertices, dtype=float)
    for n, vids, _ in _resting_faces(hull):
        n = n / np.linalg.norm(n)
        d = float((hull_vertices[vids] @ n).max())
        height = d - float((vertices @ n).min())
        basis = _plane_basis(n)
        support = shapely.MultiPoint(hull_vertices[vids] @ basis.T).convex_hull
        centre = shapely.Point(com @ basis.T)
        inside = support.geom_type == "Polygon" and support.contains(centre)
        margin = support.exterior.distance(centre) if inside else 0.0
        lift = max(d - float(com @ n), tol)                     # height of the centre of mass
        tip = math.degrees(math.atan2(margin, lift)) if inside else 0.0
        touching = (normals @ n > 1.0 - 1e-6) & (np.abs(tri_far - d) < tol)
        contact = float(tri_area[touching].sum())
        poses.append((inside, tip, contact, height, float(n[2]), n))
    stable = [p for p in poses if p[0] and p[1] >= _MIN_TIP_DEG]
    if not stable:
        best_tip = max(p[1] for p in poses)
        stable = [p for p in poses if p[1] >= best_tip - 1e-9]
    best_area = max(p[2] for p in stable)
    near = [p for p in stable if p[2] >= _NEAR_BEST_AREA * best_area - 1e-12]
    chosen = min(near, key=lambda p: (round(p[3] / tol), p[4], *np.round(p[5], 9)))
    n = chosen[5]
    if n[2] < -1.0 + 1e-12:
        rotation = np.eye(4)
    else:
        rotation = trimesh.geometry.align_vectors(n, np.array([0.0, 0.0, -1.0]))
    moved = trimesh.transform_points(vertices, rotation)
    shift = np.eye(4)
    shift[:3, 3] = -moved.min(axis=0)
    return shift @ rotation


@functools.lru_cache(maxsize=None)
def powder_mesh(part: Part) -> trimesh.Trimesh:
    """The mesh a powder build packs for the part, in print orientation.

    Voxels cover the surface and fill what it encloses, which needs a surface
    closed at the cell size. A part whose triangles are balanced (closed, even
    with shells touching or overlapping) is packed as it is; an open one as its
    convex hull, which contains it: spacing, containment and the interlocking
    check then hold for the part too (a part inside a removable hull comes out
    with it).
    """
    if part.exam is None or part.exam.topology.balanced:
        return part.mesh
    return part.mesh.convex_hull


# --- the whole intake -------------------------------------------------------------------

def load_part(path: str | Path, *, name: str | None = None, lock_orientation: bool = False,
              units: str | None = None, limits: Limits | None = None) -> Part:
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

    Returns
    -------
    Part
        With ``exam.defects`` listing every caution-class defect.

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
    mesh = trimesh.Trimesh(vertices=vertices, faces=faces, process=False)
    check = check_mesh(mesh)
    scale = np.diag([exam.mm_per_unit] * 3 + [1.0])
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
                footprint=footprint, height=float(printed.extents[2]), volume=float(exam.volume.mm3),
                area=float(printed.area), check=check, islands=islands, exam=exam)
