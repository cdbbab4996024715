"""Covering outlines with few vertices that add as little area as they can.

A detailed outline (curves, hundreds of vertices) makes many convex parts and
slow collision tests, so the search uses a coarser outline that *covers* the
shape: a layout free of collisions for the coarse outlines is free for the
shapes.  Every step of the coarsening only adds material, so coverage holds by
construction, and the step taken is the one that adds the least area:

- *fill a notch*: drop a reflex vertex (material on the left of each ring, so
  the exterior runs counter-clockwise and the holes clockwise); the triangle
  of the vertex and its two neighbours joins the shape;
- *cut a corner outward*: replace two consecutive convex vertices by the
  crossing of the lines of the edges before and after them (possible when the
  two turns add up to less than half a turn); the triangle between joins;
- *fill a hole* (its area) when a hole has shrunk to a triangle.

A step whose new edges would cross or touch another edge is skipped, so the
outline stays simple.  The shape is first grown by a tiny margin so that
floating-point rounding in the crossings can never uncover it.
"""

from __future__ import annotations

import numpy as np
import shapely
from numba import njit

__all__ = ["cover_outline", "covering_outline", "grown_outline"]

#: margin added before coarsening, relative to the shape's size (rounding safety)
_MARGIN = 1e-7


def _area2(v: np.ndarray) -> float:
    return float(np.sum(v[:, 0] * np.roll(v[:, 1], -1) - np.roll(v[:, 0], -1) * v[:, 1]))


def _material_left(ring, exterior: bool) -> np.ndarray:
    v = np.asarray(ring.coords, dtype=float)[:-1]
    if (_area2(v) > 0) != exterior:
        v = v[::-1]
    return v


@njit(cache=True, nogil=True)
def _orient3(ax, ay, bx, by, cx, cy):
    return (bx - ax) * (cy - ay) - (by - ay) * (cx - ax)


@njit(cache=True, nogil=True)
def _meets(px, py, qx, qy, x, y, nxt, alive, skip):
    """Does segment p-q meet an edge (k, nxt[k]) of the alive vertices, other than edges with an
    end point in ``skip`` (vertex ids)?"""
    lox, hix = min(px, qx), max(px, qx)
    loy, hiy = min(py, qy), max(py, qy)
    for k in range(x.shape[0]):
        if not alive[k]:
            continue
        m = nxt[k]
        bad = False
        for s in skip:
            if k == s or m == s:
                bad = True
        if bad:
            continue
        ax, ay, bx, by = x[k], y[k], x[m], y[m]
        if max(ax, bx) < lox or min(ax, bx) > hix or max(ay, by) < loy or min(ay, by) > hiy:
            continue
        d1 = _orient3(ax, ay, bx, by, px, py)
        d2 = _orient3(ax, ay, bx, by, qx, qy)
        d3 = _orient3(px, py, qx, qy, ax, ay)
        d4 = _orient3(px, py, qx, qy, bx, by)
        if d1 == 0.0 and d2 == 0.0:
            # collinear: a hit when the boxes overlap (checked above)
            return True
        if (d1 * d2 <= 0.0) and (d3 * d4 <= 0.0):
            return True
    return False


@njit(cache=True, nogil=True)
def _coarsen(x, y, nxt, prv, ring, limit):
    """Greedy least-area steps until at most ``limit`` vertices are alive; returns the alive mask.

    Rings are linked lists (``nxt``/``prv`` over vertex ids, material on the left); ring 0 is
    the exterior.  A step whose new edges meet another edge is skipped this round."""
    n = x.shape[0]
    alive = np.ones(n, dtype=np.bool_)
    nring = ring.max() + 1
    size = np.zeros(nring, dtype=np.int64)
    for k in range(n):
        size[ring[k]] += 1
    count = n
    cost = np.empty(n)
    kind = np.zeros(n, dtype=np.int64)   # 1 notch at k, 2 corner at (k, nxt[k]), 3 fill hole of k
    cx_ = np.empty(n)
    cy_ = np.empty(n)
    skip = np.empty(4, dtype=np.int64)
    while count > limit:
        for k in range(n):
            cost[k] = np.inf
            kind[k] = 0
            if not alive[k]:
                continue
            r = ring[k]
            if r > 0 and size[r] <= 3:
                a = 0.0
                j = k
                for _ in range(size[r]):
                    a += x[j] * y[nxt[j]] - x[nxt[j]] * y[j]
                    j = nxt[j]
                cost[k] = abs(a) * 0.5
                kind[k] = 3
                continue
            a, c = prv[k], nxt[k]
            t = _orient3(x[a], y[a], x[k], y[k], x[c], y[c])
            if t <= 0.0:
                cost[k] = -0.5 * t
                kind[k] = 1
                continue
            d = nxt[c]
            t2 = _orient3(x[k], y[k], x[c], y[c], x[d], y[d])
            if t2 <= 0.0:
                continue
            d1x, d1y = x[k] - x[a], y[k] - y[a]
            d2x, d2y = x[d] - x[c], y[d] - y[c]
            den = d1x * d2y - d1y * d2x
            if den <= 0.0:
                continue
            wx, wy = x[c] - x[k], y[c] - y[k]
            tt = (wx * d2y - wy * d2x) / den
            ss = (wx * d1y - wy * d1x) / den
            if tt <= 0.0 or ss >= 0.0:
                continue
            px, py = x[k] + tt * d1x, y[k] + tt * d1y
            cost[k] = 0.5 * abs(_orient3(x[k], y[k], px, py, x[c], y[c]))
            kind[k] = 2
            cx_[k] = px
            cy_[k] = py
        done = False
        while not done:
            k = np.argmin(cost)
            if not np.isfinite(cost[k]):
                return alive
            a, c = prv[k], nxt[k]
            if kind[k] == 3:
                r = ring[k]
                j = k
                for _ in range(size[r]):
                    alive[j] = False
                    j = nxt[j]
                count -= size[r]
                size[r] = 0
                done = True
            elif kind[k] == 1:
                skip[0], skip[1], skip[2], skip[3] = a, k, c, c
                if _meets(x[a], y[a], x[c], y[c], x, y, nxt, alive, skip):
                    cost[k] = np.inf
                    continue
                alive[k] = False
                nxt[a] = c
                prv[c] = a
                size[ring[k]] -= 1
                count -= 1
                done = True
            else:
                d = nxt[c]
                px, py = cx_[k], cy_[k]
                skip[0], skip[1], skip[2], skip[3] = a, k, c, d
                if _meets(x[a], y[a], px, py, x, y, nxt, alive, skip) or \
                        _meets(px, py, x[d], y[d], x, y, nxt, alive, skip):
                    cost[k] = np.inf
                    continue
                x[k] = px
                y[k] = py
                alive[c] = False
                nxt[k] = d
                prv[d] = k
                size[ring[k]] -= 1
                count -= 1
                done = True
    return alive


def _chain(alive, x, y, nxt, start):
    out = []
    k = start
    while True:
        out.append((x[k], y[k]))
        k = nxt[k]
        if k == start:
            return np.array(out)


def cover_outline(polygon: shapely.Polygon, max_vertices: int) -> shapely.Polygon | None:
    """A polygon with at most ``max_vertices`` vertices (rings counted by their vertices)
    that covers ``polygon``; None when the greedy steps cannot reach the limit with a
    valid covering polygon (the caller then falls back to a coarser method)."""
    minx, miny, maxx, maxy = polygon.bounds
    size = max(maxx - minx, maxy - miny)
    grown = polygon.buffer(_MARGIN * size, join_style="mitre", mitre_limit=1.5)
    if grown.geom_type != "Polygon":
        return None
    grown = grown.simplify(0.0)
    rings = [_material_left(grown.exterior, True)] + [_material_left(r, False) for r in grown.interiors]
    sizes = np.array([len(r) for r in rings])
    v = np.concatenate(rings)
    ids = np.arange(len(v))
    first = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    ring = np.repeat(np.arange(len(rings)), sizes)
    pos = ids - first[ring]
    nxt = first[ring] + (pos + 1) % sizes[ring]
    prv = first[ring] + (pos - 1) % sizes[ring]
    x, y = v[:, 0].copy(), v[:, 1].copy()
    alive = _coarsen(x, y, nxt, prv, ring, int(max_vertices))
    if alive.sum() > max_vertices or not alive[0:sizes[0]].any():
        return None
    rings = []
    for r in range(len(sizes)):
        live = np.flatnonzero(alive[first[r]:first[r] + sizes[r]])
        if len(live):
            rings.append(_chain(alive, x, y, nxt, first[r] + live[0]))
    out = shapely.Polygon(rings[0], rings[1:])
    if not out.is_valid or not out.covers(polygon):
        return None
    return shapely.orient_polygons(out) if hasattr(shapely, "orient_polygons") else out


#: covering outlines already built in this process: a pure function of its inputs, so
#: reusing one changes no result (only the time taken)
_MEMO: dict = {}


def covering_outline(polygon: shapely.Polygon, clearance: float, max_vertices: int) -> shapely.Polygon | None:
    """The least-area covering outline of ``polygon`` grown by half the clearance, for
    outlines with more than ``max_vertices`` vertices (None otherwise, or when the greedy
    coarsening fails)."""
    count = len(polygon.exterior.coords) + sum(len(r.coords) for r in polygon.interiors)
    if count <= max_vertices:
        return None
    key = (shapely.to_wkb(polygon), float(clearance), int(max_vertices))
    if key not in _MEMO:
        grown = grown_outline(polygon, clearance)
        if len(_MEMO) > 4096:
            _MEMO.clear()
        _MEMO[key] = cover_outline(grown, max_vertices)
    return _MEMO[key]


def grown_outline(polygon: shapely.Polygon, clearance: float) -> shapely.Polygon:
    """The outline grown by half the clearance (touching outlines keep the full clearance)."""
    if clearance <= 0:
        return polygon
    grown = polygon.buffer(clearance / 2.0, join_style="mitre", mitre_limit=1.5)
    if grown.geom_type != "Polygon" or not grown.covers(polygon):
        grown = polygon.buffer(clearance / 2.0, quad_segs=2)
    return grown
