"""Lay-flat: the rigid motion that rests a mesh on its most stable large face.

Each face of the convex hull is a way a part can rest on a plate
(:func:`lay_flat`); part intake (:mod:`packer.intake.parts`) then squares the
resting pose to the plate (:mod:`packer.intake.squaring`).

Choices and limits
------------------
Lay-flat thresholds are our own choices (no published source): a resting face
must need a tip of at least 10 degrees to topple, and contact areas within
10 % of the best count as equal (the lower pose then wins).
"""

from __future__ import annotations

import math

import numpy as np
import shapely
import trimesh

from packer.errors import GeometryError

__all__ = ["lay_flat"]

_MIN_TIP_DEG = 10.0        # a resting pose must tip by at least this angle before it falls over (our choice)
_NEAR_BEST_AREA = 0.9      # contact areas within 10 % of the best count as equally good; then lowest wins
_MAX_POSES = 512           # largest hull facets considered as resting faces


def cross3(a, b) -> np.ndarray:
    """a x b of two 3-vectors, term by term as ``numpy.cross`` computes it (the same bits)."""
    a0, a1, a2 = float(a[0]), float(a[1]), float(a[2])
    b0, b1, b2 = float(b[0]), float(b[1]), float(b[2])
    return np.array([a1 * b2 - a2 * b1, a2 * b0 - a0 * b2, a0 * b1 - a1 * b0])


def _plane_basis(n: np.ndarray) -> np.ndarray:
    """Two unit vectors (2, 3) spanning the plane with normal ``n``."""
    helper = (1.0, 0.0, 0.0) if abs(n[0]) < 0.9 else (0.0, 1.0, 0.0)
    u = cross3(n, helper)
    u /= np.linalg.norm(u)
    return np.array([u, cross3(n, u)])


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


def _supports(faces) -> list[tuple[bool, float]]:
    """Per resting face: whether the centre of mass projects inside the support polygon (the
    hull of the face's vertices in its plane), and its distance to the polygon's edge then
    (0 otherwise); the geometry of all faces built and measured in one call each."""
    counts = [len(f[3]) for f in faces]
    support = shapely.convex_hull(shapely.multipoints(np.concatenate([f[3] for f in faces]),
                                                      indices=np.repeat(np.arange(len(faces)), counts)))
    centre = shapely.points(np.array([f[4] for f in faces]))
    inside = (shapely.get_type_id(support) == shapely.GeometryType.POLYGON) & shapely.contains(support, centre)
    margin = np.where(inside, shapely.distance(shapely.get_exterior_ring(support), centre), 0.0)
    return [(bool(i), float(m) if i else 0.0) for i, m in zip(inside, margin)]


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

    faces = []  # (normal, height, plane offset, support points in the face's plane, centre of mass there)
    hull_vertices = np.asarray(hull.vertices, dtype=float)
    for n, vids, _ in _resting_faces(hull):
        n = n / np.linalg.norm(n)
        d = float((hull_vertices[vids] @ n).max())
        height = d - float((vertices @ n).min())
        basis = _plane_basis(n)
        faces.append((n, height, d, hull_vertices[vids] @ basis.T, com @ basis.T))
    poses = []  # (stable, tip_deg, contact_area, height, down_dot, normal)
    for (n, height, d, _, _), (inside, margin) in zip(faces, _supports(faces)):
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
