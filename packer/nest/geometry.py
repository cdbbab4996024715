"""Convex pieces, convex no-fit polygons and halfplane form.

Every collision test of the engine reduces to one question: is a point strictly
inside a convex polygon, and how deep?  A shape is split once into convex parts;
the no-fit polygon of two convex parts is their Minkowski sum ``A + (-B)``
(compiled, :func:`packer.nest.kernels.minkowski_halfplanes`); a
convex polygon is stored as halfplanes ``n . p <= c`` (unit outward normals), so
the penetration depth of a point is ``min_k (c_k - n_k . p)`` (positive inside).
"""

from __future__ import annotations

import numpy as np
import shapely

__all__ = [
    "convex_parts",
    "halfplanes",
    "collision_polygon",
    "orient_polygon",
    "ring_ccw",
]


def ring_ccw(coords: np.ndarray) -> np.ndarray:
    """Vertices of a closed ring (n+1, 2) as open CCW array (n, 2), collinear points dropped."""
    v = np.asarray(coords, dtype=float)[:-1]
    area2 = np.sum(v[:, 0] * np.roll(v[:, 1], -1) - np.roll(v[:, 0], -1) * v[:, 1])
    if area2 < 0:
        v = v[::-1]
    return _drop_collinear(v)


def _drop_collinear(v: np.ndarray) -> np.ndarray:
    if len(v) <= 3:
        return v
    a = np.roll(v, 1, axis=0)
    b = np.roll(v, -1, axis=0)
    cross = (v[:, 0] - a[:, 0]) * (b[:, 1] - v[:, 1]) - (v[:, 1] - a[:, 1]) * (b[:, 0] - v[:, 0])
    scale = np.abs(v).max() + 1.0
    keep = np.abs(cross) > 1e-12 * scale * scale
    if keep.sum() < 3:
        return v
    return v[keep]


def _is_convex(v: list) -> bool:
    n = len(v)
    for k in range(n):
        ax, ay = v[k - 1]
        bx, by = v[k]
        cx, cy = v[(k + 1) % n]
        if (bx - ax) * (cy - by) - (by - ay) * (cx - bx) < -1e-12 * (abs(bx) + abs(by) + 1.0) ** 2:
            return False
    return True


def convex_parts(polygon: shapely.Polygon) -> list[np.ndarray]:
    """Split a polygon (holes allowed) into convex parts whose union is the polygon.

    Constrained Delaunay triangulation, then Hertel-Mehlhorn merging of
    neighbouring parts across their shared diagonal while the union stays
    convex (longest diagonals first).

    Parameters
    ----------
    polygon : shapely.Polygon
        A valid polygon, possibly with holes.

    Returns
    -------
    list of (k, 2) float arrays
        CCW vertex rings, one per convex part.
    """
    if polygon.is_empty or polygon.area <= 0:
        return []
    if not polygon.interiors:
        ring = ring_ccw(np.asarray(polygon.exterior.coords))
        if _is_convex([tuple(p) for p in ring]):
            return [ring]
    tris = shapely.constrained_delaunay_triangles(polygon)
    parts: dict[int, list] = {}
    for k, t in enumerate(tris.geoms):
        if t.area <= 0:
            continue
        parts[k] = [tuple(p) for p in ring_ccw(np.asarray(t.exterior.coords))]
    # shared edges between parts
    edges: dict[tuple, int] = {}
    diagonals = []
    for k, v in parts.items():
        for a in range(len(v)):
            u, w = v[a], v[(a + 1) % len(v)]
            key = (w, u)
            if key in edges:
                diagonals.append((u, w))
            edges[(u, w)] = k
    diagonals.sort(key=lambda e: -((e[0][0] - e[1][0]) ** 2 + (e[0][1] - e[1][1]) ** 2))
    owner = dict(edges)
    for u, w in diagonals:
        p = owner.get((u, w))
        q = owner.get((w, u))
        if p is None or q is None or p == q or p not in parts or q not in parts:
            continue
        vp, vq = parts[p], parts[q]
        ip = vp.index(u)  # vp: ... u, w ...
        iq = vq.index(w)  # vq: ... w, u ...
        # merged ring: walk vp from w around to u, then vq from u around to w (exclusive)
        rp = vp[ip + 1:] + vp[:ip + 1]  # starts at w, ends at u
        rq = vq[iq + 1:] + vq[:iq + 1]  # starts at u, ends at w
        merged = rp + rq[1:-1]
        if not _is_convex(merged):
            continue
        del parts[q]
        parts[p] = merged
        for a in range(len(merged)):
            owner[(merged[a], merged[(a + 1) % len(merged)])] = p
    return [_drop_collinear(np.array(v, dtype=float)) for v in parts.values()]


def halfplanes(ring: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Halfplane form of a convex CCW ring.

    Returns
    -------
    normals : (k, 2) float
        Unit outward normals.
    offsets : (k,) float
        ``c`` such that the polygon is ``{p : normals @ p <= c}``.
    """
    e = np.roll(ring, -1, axis=0) - ring
    length = np.hypot(e[:, 0], e[:, 1])
    keep = length > 0
    n = np.stack([e[keep, 1], -e[keep, 0]], axis=1) / length[keep, None]
    c = np.einsum("ij,ij->i", n, ring[keep])
    return n, c


def orient_polygon(polygon: shapely.Polygon, rotation: float, mirror: bool) -> shapely.Polygon:
    """The polygon mirrored across the y axis (if asked), then rotated CCW about (0, 0)."""
    from shapely import affinity

    g = polygon
    if mirror:
        g = affinity.scale(g, xfact=-1.0, yfact=1.0, origin=(0, 0))
    if rotation % 360.0:
        r = rotation % 360.0
        # exact quarter turns keep integer coordinates exact
        if r in (90.0, 180.0, 270.0):
            c, s = {90.0: (0, 1), 180.0: (-1, 0), 270.0: (0, -1)}[r]
            g = affinity.affine_transform(g, [c, -s, s, c, 0.0, 0.0])
        else:
            g = affinity.rotate(g, r, origin=(0, 0))
    return shapely.orient_polygons(g) if hasattr(shapely, "orient_polygons") else g


def collision_polygon(polygon: shapely.Polygon, *, max_vertices: int = 40) -> shapely.Polygon:
    """A polygon that covers ``polygon`` with at most about ``max_vertices`` vertices.

    Shapes with many vertices (curves) make many convex parts; the search uses a
    slightly grown, simplified outline instead.  The result always covers the
    input, so a layout free of collisions for the outlines is free for the shapes.
    """
    count = len(polygon.exterior.coords) + sum(len(r.coords) for r in polygon.interiors)
    if count <= max_vertices:
        return polygon
    minx, miny, maxx, maxy = polygon.bounds
    size = max(maxx - minx, maxy - miny)
    d = 0.002 * size
    best = polygon
    for _ in range(8):
        grown = polygon.buffer(d, join_style="mitre", mitre_limit=2.0)
        simple = grown.simplify(d, preserve_topology=True)
        if simple.geom_type != "Polygon":
            simple = simple.convex_hull
        if not simple.covers(polygon):
            simple = shapely.union(simple, polygon)
            if simple.geom_type != "Polygon":
                d *= 1.6
                continue
            simple = simple.simplify(0.0)
        # holes too small to matter are dropped (filled)
        holes = [h for h in simple.interiors if shapely.Polygon(h).area > 0.01 * simple.area]
        simple = shapely.Polygon(simple.exterior, holes)
        n = len(simple.exterior.coords) + sum(len(r.coords) for r in simple.interiors)
        if simple.is_valid and simple.covers(polygon):
            best = simple
            if n <= max_vertices:
                return simple
        d *= 1.6
    return best
