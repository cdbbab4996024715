"""Filling the small holes of a mesh (part of repair on request, :mod:`packer.intake.mesh.repair`).

A hole is a loop of open edges. It is *small* and filled when all of these hold (thresholds of
our own choosing, no published source): at most :data:`HOLE_EDGES` edges; its points lie within
:data:`HOLE_FLATNESS` of its largest extent from their best-fit plane; the patch covers at most
:data:`HOLE_SHARE` of the rest of the surface. The patch is the constrained Delaunay triangulation
of the loop in that plane (shapely, corners only), or a fan from the loop's centre for a loop of
at most :data:`FAN_EDGES` edges whose flat projection crosses itself (a crack).
"""

from __future__ import annotations

import numpy as np
import shapely

__all__ = ["fill_holes", "HOLE_EDGES", "HOLE_FLATNESS", "HOLE_SHARE", "FAN_EDGES"]

#: Most edges of a hole that is filled (our choice: bounds the cost of one patch).
HOLE_EDGES = 2000
#: Largest distance of a hole's points from their best-fit plane, as a share of the hole's largest
#: extent, for the hole to be filled (our choice: a flat cap is a safe guess, a warped rim is not).
HOLE_FLATNESS = 0.10
#: Largest area of a patch, as a share of the rest of the surface (our choice; see the module notes).
HOLE_SHARE = 0.25
#: Most edges of a hole whose flat projection crosses itself that is still filled, with a fan from
#: its centre (our choice: a crack or a sliver; a larger warped rim stays open).
FAN_EDGES = 12

def _open_half_edges(faces: np.ndarray, n: int) -> np.ndarray:
    he = faces[:, [0, 1, 1, 2, 2, 0]].reshape(-1, 2)
    key = he.min(axis=1) * np.int64(n) + he.max(axis=1)
    _, inverse, counts = np.unique(key, return_inverse=True, return_counts=True)
    return he[counts[inverse.reshape(-1)] == 1]


def _loops(half: np.ndarray) -> list[list[int]]:
    """Simple loops of open half-edges (a -> b), in their direction, each vertex at most once per loop.

    A walk follows the half-edges; when it comes back to a vertex already on its path, the
    loop from there is cut out. A walk that ends nowhere (a rim that does not close) is dropped.
    """
    out_of: dict[int, list[int]] = {}
    for a, b in half.tolist():
        out_of.setdefault(a, []).append(b)
    loops = []
    for start in sorted(out_of):
        while out_of[start]:
            path, pos, cur = [start], {start: 0}, start
            while out_of.get(cur):
                nxt = out_of[cur].pop()
                if nxt in pos:
                    k = pos[nxt]
                    loops.append(path[k:])
                    for v in path[k + 1:]:
                        del pos[v]
                    path = path[:k + 1]
                else:
                    pos[nxt] = len(path)
                    path.append(nxt)
                cur = nxt
    return [lp for lp in loops if len(lp) >= 3]


def _patch(vertices: np.ndarray, loop: list[int], centre_index: int) -> tuple[np.ndarray, np.ndarray | None]:
    """Patch triangles of one loop, wound against it, and the fan's centre vertex (or None).

    The loop is projected on its best-fit plane; where the projection is a simple polygon its
    constrained Delaunay triangulation (corners only: no new vertices) is the patch, else a fan
    from the loop's centre (vertex ``centre_index``).
    """
    ring_idx = np.asarray(loop, dtype=np.int64)
    pts = vertices[ring_idx]
    centre = pts.mean(axis=0)
    _, _, vt = np.linalg.svd(pts - centre, full_matrices=False)
    flat = (pts - centre) @ vt[:2].T
    ring = shapely.Polygon(flat)
    if ring.is_valid and ring.area > 0 and len({tuple(p) for p in flat.tolist()}) == len(loop):
        index = {tuple(p): k for k, p in enumerate(flat.tolist())}
        tris = [[index.get(tuple(c)) for c in np.asarray(t.exterior.coords)[:3].tolist()]
                for t in shapely.get_parts(shapely.constrained_delaunay_triangles(ring))]
        if tris and all(None not in t for t in tris):
            tris = np.array(tris, dtype=np.int64)
            a, b, c = flat[tris[:, 0]], flat[tris[:, 1]], flat[tris[:, 2]]
            ccw = ((b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0])) > 0
            turn = ccw == ring.exterior.is_ccw          # the loop runs ccw: its patch must run cw
            tris[turn] = tris[turn][:, ::-1]
            return ring_idx[tris], None
    if len(loop) > FAN_EDGES:
        return None, None
    fan = np.stack([np.roll(ring_idx, -1), ring_idx, np.full(len(loop), centre_index)], axis=1)
    return fan, centre[None, :]


def _area(vertices, faces) -> float:
    t = vertices[faces]
    return float(np.linalg.norm(np.cross(t[:, 1] - t[:, 0], t[:, 2] - t[:, 0]), axis=1).sum() / 2)


def fill_holes(vertices: np.ndarray, faces: np.ndarray) -> tuple[np.ndarray, np.ndarray, int, list[str]]:
    """Fill the small holes (module notes).

    Returns
    -------
    vertices (n', 3), faces (m', 3), the number of holes filled, what was left open (words).
    """
    half = _open_half_edges(faces, len(vertices))
    if not len(half):
        return vertices, faces, 0, []
    surface = _area(vertices, faces)
    centres, patches, left = [], [], []
    loops = _loops(half)
    for loop in loops:
        pts = vertices[loop]
        extent = float(np.ptp(pts, axis=0).max())
        off = float(np.abs((pts - pts.mean(axis=0)) @ np.linalg.svd(pts - pts.mean(axis=0))[2][2]).max())
        if len(loop) > HOLE_EDGES:
            left.append(f"a hole of {len(loop)} edges left open (more than {HOLE_EDGES})")
            continue
        if off > HOLE_FLATNESS * extent:
            left.append(f"a hole of {len(loop)} edges left open: not flat (points {100 * off / extent:.0f} % of "
                        f"its size off their plane; holes within {100 * HOLE_FLATNESS:.0f} % are filled)")
            continue
        tris, centre = _patch(vertices, loop, len(vertices) + len(centres))
        if tris is None:
            left.append(f"a hole of {len(loop)} edges left open: seen flat it crosses itself (such holes are "
                        f"filled up to {FAN_EDGES} edges)")
            continue
        area = _area(np.concatenate([vertices, *centres, *([centre] if centre is not None else [])]), tris)
        if area > HOLE_SHARE * surface:
            left.append(f"a hole of {len(loop)} edges left open: its patch ({area:.4g} mm^2) would be more "
                        f"than {100 * HOLE_SHARE:.0f} % of the surface ({surface:.4g} mm^2)")
            continue
        if centre is not None:
            centres.append(centre)
        patches.append(tris)
    rim = len(half) - sum(len(lp) for lp in loops)
    if rim:
        left.append(f"{rim} open edges that close no loop (a rim that ends) left open")
    return (np.concatenate([vertices, *centres]), np.concatenate([faces, *patches]), len(patches), left)
