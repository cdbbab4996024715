"""Exact checks of a powder build before it is written.

* containment: every transformed mesh inside the volume shrunk by the margin
  (floor, walls and top), from its transformed vertices;
* spacing: mesh-to-mesh distance at least the spacing, with python-fcl
  (bounding-volume hierarchies of the triangles), plus a point-in-solid test so
  a part swallowed whole by another is caught too;
* no interlocking: every part can leave the build by slides along the axes,
  one after another (:func:`packer.pack3d.interlock.stuck_parts`) on
  conservative voxel sets.
"""

from __future__ import annotations

from typing import Sequence

import fcl
import numpy as np
import trimesh

from packer.pack3d.interlock import blocks, stuck_parts
from packer.pack3d.model import Body, BuildPlacement
from packer.pack3d.shapes import body_samples, cellset_of_points, sample_tolerance
from packer.pack3d.voxel import grid_pitch

__all__ = ["verify_build", "build_problems", "interlocked", "placed_mesh", "mesh_distance", "TOL"]

TOL = 1e-6  # mm, float slack on exact checks


def placed_mesh(body: Body, transform: np.ndarray) -> trimesh.Trimesh:
    """The body's mesh moved into build coordinates (a copy)."""
    m = body.mesh.copy()
    m.apply_transform(np.asarray(transform, dtype=float))
    return m


def _transform_problem(t: np.ndarray) -> str | None:
    t = np.asarray(t, dtype=float)
    if t.shape != (4, 4) or not np.allclose(t[3], [0, 0, 0, 1]):
        return "transform is not a 4x4 affine matrix"
    r = t[:3, :3]
    if not np.allclose(r @ r.T, np.eye(3), atol=1e-6):
        return "transform is not a rotation plus translation"
    if np.linalg.det(r) < 0:
        return "transform mirrors the part"
    return None


def _fcl_object(mesh: trimesh.Trimesh) -> fcl.CollisionObject:
    bvh = fcl.BVHModel()
    bvh.beginModel(len(mesh.vertices), len(mesh.faces))
    bvh.addSubModel(np.asarray(mesh.vertices, dtype=float), np.asarray(mesh.faces, dtype=np.int32))
    bvh.endModel()
    return fcl.CollisionObject(bvh, fcl.Transform())


def mesh_distance(a: fcl.CollisionObject, b: fcl.CollisionObject) -> float:
    """Surface distance of two meshes (<= 0 when they touch or cross)."""
    if fcl.collide(a, b, fcl.CollisionRequest(), fcl.CollisionResult()):
        return 0.0
    res = fcl.DistanceResult()
    return float(fcl.distance(a, b, fcl.DistanceRequest(enable_nearest_points=False), res))


def verify_build(bodies: Sequence[Body], placements: Sequence[BuildPlacement], *,
                 volume: tuple[float, float, float], spacing: float, margin: float,
                 pitch: float | None = None) -> list[str]:
    """Check one build exactly; return the problems found (empty when it is sound).

    Parameters
    ----------
    bodies : sequence of Body
    placements : sequence of BuildPlacement
    volume : (3,) float, mm
    spacing, margin : float, mm
    pitch : float, mm, optional
        Voxel pitch of the interlocking check; by default the packer's grid pitch.

    Returns
    -------
    list of str, one line per problem.
    """
    return [msg for _, msg in build_problems(bodies, placements, volume=volume, spacing=spacing,
                                             margin=margin, pitch=pitch)]


def build_problems(bodies: Sequence[Body], placements: Sequence[BuildPlacement], *,
                   volume: tuple[float, float, float], spacing: float, margin: float,
                   pitch: float | None = None) -> list[tuple[tuple[int, ...], str]]:
    """Like :func:`verify_build`, each problem with the positions (in ``placements``) it involves."""
    vol = np.asarray(volume, dtype=float)
    inner = vol - 2 * margin
    problems: list[str] = []
    meshes: list[tuple[int, trimesh.Trimesh]] = []
    where: list[int] = []
    seen: set[int] = set()
    for n, p in enumerate(placements):
        if not 0 <= p.index < len(bodies):
            problems.append(((n,), f"placement of body {p.index}: no such body"))
            continue
        if p.index in seen:
            problems.append(((n,), f"body {p.index} placed twice"))
        seen.add(p.index)
        bad = _transform_problem(p.transform)
        if bad:
            problems.append(((n,), f"body {p.index}: {bad}"))
            continue
        m = placed_mesh(bodies[p.index], p.transform)
        lo, hi = m.bounds
        if (lo < margin - TOL).any() or (hi > vol - margin + TOL).any():
            problems.append(((n,), f"body {p.index}: extends outside the volume shrunk by the margin "
                                   f"(bounds {np.round(lo, 3).tolist()}..{np.round(hi, 3).tolist()})"))
        meshes.append((p.index, m))
        where.append(n)
    # spacing, on pairs whose boxes come within the spacing
    if len(meshes) > 1:
        objs = [_fcl_object(m) for _, m in meshes]
        lo = np.array([m.bounds[0] for _, m in meshes])
        hi = np.array([m.bounds[1] for _, m in meshes])
        for i in range(len(meshes)):
            near = np.all((lo[i + 1:] < hi[i] + spacing) & (hi[i + 1:] > lo[i] - spacing), axis=1)
            for j in np.flatnonzero(near) + i + 1:
                d = mesh_distance(objs[i], objs[j])
                a, b = meshes[i], meshes[j]
                pair = (where[i], where[j])
                if d < spacing - TOL:
                    problems.append((pair, f"bodies {a[0]} and {b[0]} are {d:.3f} mm apart (< {spacing})"))
                elif (a[1].contains(b[1].vertices[:1]).any() or b[1].contains(a[1].vertices[:1]).any()):
                    problems.append((pair, f"bodies {a[0]} and {b[0]}: one lies inside the other"))
    # interlocking
    if len(meshes) > 1 and not problems:
        for k in interlocked(bodies, placements, spacing=spacing, margin=margin,
                             pitch=pitch if pitch is not None else grid_pitch(inner, spacing)):
            problems.append(((k,), f"body {placements[k].index} is interlocked: it cannot leave the build "
                                   "by sliding along an axis, even after the free parts are taken out"))
    return problems


def interlocked(bodies: Sequence[Body], placements: Sequence[BuildPlacement], *, spacing: float,
                margin: float, pitch: float) -> list[int]:
    """Positions in ``placements`` of parts that cannot be taken out by axis slides.

    Parts are voxelised conservatively on the packer's grid (origin at the
    margin corner, cell ``pitch``). A block the coarse cells claim between
    parts that stay stuck is re-tested on a finer grid, fine enough that parts
    at least ``spacing`` apart never share a cell: cells meet balls of radius
    ``tol`` around samples within ``tol`` of the surface, so every cell lies
    within ``tol + pitch * sqrt(3)`` of its part; the fine pitch keeps twice
    that below the spacing.
    """
    origin = np.full(3, float(margin))
    tol = sample_tolerance(pitch)
    fine_tol = min(tol, spacing / 8) if spacing > 0 else tol / 4
    fine_pitch = ((spacing / 2 - fine_tol) / np.sqrt(3) * 0.98) if spacing > 0 else pitch / 4
    fine_pitch = max(fine_pitch, pitch / 6)  # memory guard: below spacing ~ pitch, close pairs stay coarse
    world, coarse, fine = {}, [], {}
    for k, p in enumerate(placements):
        t = np.asarray(p.transform, dtype=float)
        pts = body_samples(bodies[p.index].mesh, tol=tol) @ t[:3, :3].T + t[:3, 3]
        world[k] = pts
        coarse.append(cellset_of_points(pts, origin=origin, pitch=pitch, tol=tol))

    def fine_cells(k):
        if k not in fine:
            if fine_tol == tol:
                pts = world[k]
            else:
                t = np.asarray(placements[k].transform, dtype=float)
                pts = body_samples(bodies[placements[k].index].mesh, tol=fine_tol) @ t[:3, :3].T + t[:3, 3]
            fine[k] = cellset_of_points(pts, origin=origin, pitch=fine_pitch, tol=fine_tol)
        return fine[k]

    def confirm(i, j, axis, sign):
        return blocks(fine_cells(i), fine_cells(j), axis, sign)

    return stuck_parts(coarse, confirm=confirm)
