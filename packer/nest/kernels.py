"""Compiled inner loops (numba) of the overlap search.

The halfplanes of every no-fit polygon the search has needed live in flat
arrays (see :class:`packer.nest.kit.Kit`, ``flat``); a pair table gives, for a
fixed orientation ``f`` and a moving orientation ``o``, the first group and the
number of groups of their no-fit polygon; ``gb`` (g, 4) holds each group's bounding
box, which rejects most groups of a shape with many convex parts at once.  The loops skip fixed shapes whose
bounding box misses the moving one, stop a group as soon as one halfplane shows
the point is outside it, and stop a candidate once its cost passes the best so far.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["cost_points", "cost_row", "outside_groups", "pattern_search", "point_cost"]


@njit(cache=True, nogil=True, inline="always")
def _depth(hn, hc, a, b, x, y, tol):
    """Depth of (x, y) in the convex group of halfplanes a..b, stopping once it is at most
    ``tol`` (outside); returns (depth or an upper bound of it, halfplanes read)."""
    dmin = 1e300
    for k in range(a, b):
        d = hc[k] - hn[k, 0] * x - hn[k, 1] * y
        if d < dmin:
            dmin = d
            if dmin <= tol:
                return dmin, k - a + 1
    return dmin, b - a


@njit(cache=True, nogil=True)
def point_cost(px, py, fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pf, pc, mbb, cm, ce, wc, tol, eps, cutoff,
                row, want_row, ops):
    tot = 0.0
    nh = 0
    ng = 0
    for l in range(cm.shape[0]):
        v = cm[l, 0] * px + cm[l, 1] * py - ce[l] - tol
        if v > 0.0:
            tot += wc * (v + eps)
            if want_row:
                row[row.shape[0] - 1] += v + eps
    bx0 = px + mbb[0]
    by0 = py + mbb[1]
    bx1 = px + mbb[2]
    by1 = py + mbb[3]
    n = fpos.shape[0]
    nb = 0
    for j in range(n):
        nb += 1
        w = fw[j]
        if w <= 0.0:
            continue
        if fbb[j, 0] >= bx1 or fbb[j, 2] <= bx0 or fbb[j, 1] >= by1 or fbb[j, 3] <= by0:
            continue
        f = fori[j]
        g0 = pf[f]
        rx = px - fpos[j, 0]
        ry = py - fpos[j, 1]
        for g in range(g0, g0 + pc[f]):
            ng += 1
            # outside the group's bounding box the point is outside the group
            if rx <= gb[g, 0] or rx >= gb[g, 2] or ry <= gb[g, 1] or ry >= gb[g, 3]:
                continue
            dmin, used = _depth(hn, hc, gs[g], ge[g], rx, ry, tol)
            nh += used
            if dmin > tol:
                c = dmin - tol + eps
                tot += w * c
                if want_row:
                    row[j] += c
        if tot > cutoff and not want_row:
            break
    ops[1] += nb
    ops[2] += ng
    ops[3] += nh
    return tot


@njit(cache=True, nogil=True)
def cost_points(pts, fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pf, pc, mbb, cm, ce, wc, tol, eps, cutoff, ops):
    """Weighted overlap cost (m,) of the moving shape at each point (m, 2).

    A candidate's cost is exact when below the best cost found so far (and
    below ``cutoff``); otherwise it is only known to be at least that.
    ``ops`` (4,) int64 receives the work done: points, bounding-box tests,
    convex groups entered, halfplanes evaluated (see :mod:`packer.nest.budget`).
    """
    m = pts.shape[0]
    out = np.empty(m)
    best = cutoff
    dummy = np.zeros(1)
    for i in range(m):
        c = point_cost(pts[i, 0], pts[i, 1], fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pf, pc, mbb, cm, ce, wc,
                        tol, eps, best, dummy, False, ops)
        out[i] = c
        if c < best:
            best = c
    ops[0] += m
    return out


@njit(cache=True, nogil=True)
def cost_row(px, py, fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pf, pc, mbb, cm, ce, tol, eps, ops):
    """Unweighted overlap (n + 1,) of the moving shape at one point with each fixed shape.

    Entries with ``fw <= 0`` are skipped (the shape itself, other plates); the
    last entry is the container.
    """
    row = np.zeros(fpos.shape[0] + 1)
    point_cost(px, py, fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pf, pc, mbb, cm, ce, 1.0, tol, eps, 1e300,
                row, True, ops)
    ops[0] += 1
    return row


@njit(cache=True, nogil=True)
def pattern_search(px, py, val, step, floor, dirs, fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pf, pc, mbb, cm, ce,
                   wc, tol, eps, ops):
    """Pattern search with halving steps from (px, py) of cost ``val``: each step tries the
    points ``step * dirs`` (d, 2) around the current one, moves to the best if it costs less,
    else halves the step, until the step is at most ``floor`` or the cost is 0.

    The same steps as calling :func:`cost_points` once per step (the cost so far as its
    cutoff), in one call.  Returns (x, y, cost); ``ops`` receives the work as there.
    """
    dummy = np.zeros(1)
    nd = dirs.shape[0]
    while step > floor and val > 0.0:
        best = val
        bx = px
        by = py
        for d in range(nd):
            qx = px + step * dirs[d, 0]
            qy = py + step * dirs[d, 1]
            c = point_cost(qx, qy, fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pf, pc, mbb, cm, ce, wc,
                            tol, eps, best, dummy, False, ops)
            if c < best:
                best = c
                bx = qx
                by = qy
        ops[0] += nd
        if best < val:
            val = best
            px = bx
            py = by
        else:
            step *= 0.5
    return px, py, val


@njit(cache=True, nogil=True)
def outside_groups(v, hn, hc, gs, ge, gb, tol, ops):
    """Mask (m,) of the points ``v`` (m, 2) that lie inside none of the groups ``gs..ge``
    (deeper than ``tol``); bounding boxes ``gb`` (g, 4) reject most groups at once."""
    m = v.shape[0]
    out = np.ones(m, dtype=np.bool_)
    nh = 0
    for i in range(m):
        px = v[i, 0]
        py = v[i, 1]
        for g in range(gs.shape[0]):
            if px <= gb[g, 0] or px >= gb[g, 2] or py <= gb[g, 1] or py >= gb[g, 3]:
                continue
            dmin, used = _depth(hn, hc, gs[g], ge[g], px, py, tol)
            nh += used
            if dmin > tol:
                out[i] = False
                break
    ops[0] += m
    ops[2] += m * gs.shape[0]
    ops[3] += nh
    return out


@njit(cache=True, nogil=True)
def _low(v):
    k = 0
    for i in range(1, v.shape[0]):
        if v[i, 1] < v[k, 1] or (v[i, 1] == v[k, 1] and v[i, 0] < v[k, 0]):
            k = i
    return k


@njit(cache=True, nogil=True)
def _angle(x, y):
    a = np.arctan2(y, x)
    if a < 0.0:
        a += 2.0 * np.pi
    return a


@njit(cache=True, nogil=True)
def minkowski_halfplanes(a, b):
    """Halfplanes of the Minkowski sum of convex CCW polygons ``a`` (k, 2) and ``b`` (m, 2).

    Edges of both are merged by angle from their lowest vertices.  Returns
    unit outward normals (t, 2), offsets (t,) and the start vertex of each edge (t, 2).
    """
    na, nb = a.shape[0], b.shape[0]
    ia, ib = _low(a), _low(b)
    x = a[ia, 0] + b[ib, 0]
    y = a[ia, 1] + b[ib, 1]
    n = na + nb
    verts = np.empty((n, 2))
    ex = np.empty(n)
    ey = np.empty(n)
    i = 0
    j = 0
    t = 0
    while i < na or j < nb:
        if i < na:
            p0 = a[(ia + i) % na]
            p1 = a[(ia + i + 1) % na]
            ax, ay = p1[0] - p0[0], p1[1] - p0[1]
            anga = _angle(ax, ay)
        if j < nb:
            q0 = b[(ib + j) % nb]
            q1 = b[(ib + j + 1) % nb]
            bx, by = q1[0] - q0[0], q1[1] - q0[1]
            angb = _angle(bx, by)
        if j >= nb or (i < na and anga <= angb):
            dx, dy = ax, ay
            i += 1
        else:
            dx, dy = bx, by
            j += 1
        if dx == 0.0 and dy == 0.0:
            continue
        # merge with the previous edge when parallel and same direction
        if t > 0 and abs(ex[t - 1] * dy - ey[t - 1] * dx) <= 1e-14 * (abs(dx) + abs(dy)) * (
                abs(ex[t - 1]) + abs(ey[t - 1])) and ex[t - 1] * dx + ey[t - 1] * dy > 0:
            ex[t - 1] += dx
            ey[t - 1] += dy
            x += dx
            y += dy
            continue
        verts[t, 0] = x
        verts[t, 1] = y
        ex[t] = dx
        ey[t] = dy
        t += 1
        x += dx
        y += dy
    normals = np.empty((t, 2))
    offsets = np.empty(t)
    for k in range(t):
        ln = np.sqrt(ex[k] * ex[k] + ey[k] * ey[k])
        normals[k, 0] = ey[k] / ln
        normals[k, 1] = -ex[k] / ln
        offsets[k] = normals[k, 0] * verts[k, 0] + normals[k, 1] * verts[k, 1]
    return normals, offsets, verts[:t].copy()
