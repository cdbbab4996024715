"""Corners of the exact fill (:mod:`packer.nest.exactfill`): shape orientations anchored at
their leftmost-lowest vertex, and the direction tests that decide whether a shape's corner
fits into a corner of the empty region."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely

from packer.nest.geometry import orient_polygon
from packer.nest.shapes import Shape

__all__ = ["Orient", "anchor", "corner", "orientations", "cross", "same_dir", "fits_corner", "wedged", "polygon_parts"]


@dataclass(frozen=True)
class Orient:
    """One orientation of one outline, moved so its anchor vertex is at (0, 0)."""

    polygon: shapely.Polygon   # anchored outline (holes kept)
    rotation: float
    mirror: bool
    shift: tuple[float, float]  # anchor vertex in the shape's oriented coordinates (mm)
    first: np.ndarray          # (2,) direction of the edge leaving the anchor (CCW)
    last: np.ndarray           # (2,) direction of the edge arriving at the anchor, reversed
    bounds: np.ndarray         # (4,) anchored bounding box
    area: float
    ring: np.ndarray           # (n, 2) anchored exterior vertices


def anchor(coords: np.ndarray) -> int:
    """Index of the leftmost-then-lowest point of ``coords`` ((n, 2))."""
    return int(np.lexsort((coords[:, 1], coords[:, 0]))[0])


def corner(ring: np.ndarray, j: int, tol: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Directions (next - p, prev - p) at vertex ``j`` of an open ring ((n, 2)).

    Neighbours within ``tol`` of p (repeats, float noise) are skipped.
    """
    n = len(ring)
    p = ring[j]
    k = (j + 1) % n
    while k != j and np.hypot(*(ring[k] - p)) <= tol:
        k = (k + 1) % n
    m = (j - 1) % n
    while m != j and np.hypot(*(ring[m] - p)) <= tol:
        m = (m - 1) % n
    return ring[k] - p, ring[m] - p


def orientations(shape: Shape) -> list[Orient]:
    """Distinct orientations of a shape (symmetric outlines give fewer)."""
    out, seen = [], set()
    for mirror in ((False, True) if shape.mirror else (False,)):
        for rot in shape.rotations:
            g = shapely.orient_polygons(orient_polygon(shape.polygon, rot, mirror))
            ring = np.asarray(g.exterior.coords)[:-1]
            j = anchor(ring)
            shift = ring[j].copy()
            anchored = shapely.transform(g, lambda c, s=shift: c - s)
            key = shapely.normalize(anchored).wkb
            if key in seen:
                continue
            seen.add(key)
            first, last = corner(ring, j, 1e-9 * float(np.ptp(ring, axis=0).max()))
            out.append(Orient(anchored, float(rot), bool(mirror), (float(shift[0]), float(shift[1])),
                               first, last, np.asarray(anchored.bounds), float(g.area), ring - shift))
    return out


def cross(a, b) -> float:
    return float(a[0] * b[1] - a[1] * b[0])


def same_dir(a, b, eps: float) -> bool:
    return abs(cross(a, b)) <= eps * np.hypot(*a) * np.hypot(*b) and float(a @ b) > 0


def fits_corner(o: Orient, first, last, eps: float) -> bool:
    """The shape's corner lies within E's corner (both convex, in a common half-plane)."""
    n1, n2 = np.hypot(*first), np.hypot(*o.first)
    if cross(first, o.first) < -eps * n1 * n2:
        return False
    m1, m2 = np.hypot(*o.last), np.hypot(*last)
    return cross(o.last, last) >= -eps * m1 * m2


def wedged(o: Orient, first, last) -> np.ndarray:
    """Offset of the anchor from the corner point when the shape touches both corner edges.

    The shape (anchored) is moved by d so that it lies within the corner (left of the
    first edge, right of the last) and touches both lines: two linear equations.
    """
    v = o.ring
    a = float(np.min(first[0] * v[:, 1] - first[1] * v[:, 0]))
    b = float(np.min(v[:, 0] * last[1] - v[:, 1] * last[0]))
    m = np.array([[-first[1], first[0]], [last[1], -last[0]]], dtype=float)
    return np.linalg.solve(m, np.array([-a, -b]))


def polygon_parts(g) -> list:
    if g.is_empty:
        return []
    if isinstance(g, shapely.Polygon):
        return [g]
    return [p for p in getattr(g, "geoms", []) if isinstance(p, shapely.Polygon) and not p.is_empty]
