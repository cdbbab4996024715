"""Compiled inner loops (numba) of the overlap search.

The halfplanes of every no-fit polygon the search has needed live in flat
arrays (see :class:`packer.nest.kit.Kit`, ``flat``); a pair table gives, for a
fixed orientation ``f`` and a moving orientation ``o``, the first group and the
number of groups of their no-fit polygon.  The loops skip fixed shapes whose
bounding box misses the moving one, stop a group as soon as one halfplane shows
the point is outside it, and stop a candidate once its cost passes the best so far.
"""

from __future__ import annotations

import numpy as np
from numba import njit

__all__ = ["cost_points", "cost_row"]


@njit(cache=True, nogil=True)
def _point_cost(px, py, fpos, fori, fw, fbb, hn, hc, gs, ge, pf, pc, mbb, cm, ce, wc, tol, eps, cutoff,
                row, want_row):
    tot = 0.0
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
    for j in range(n):
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
            dmin = 1e300
            for k in range(gs[g], ge[g]):
                d = hc[k] - hn[k, 0] * rx - hn[k, 1] * ry
                if d < dmin:
                    dmin = d
                    if dmin <= tol:
                        break
            if dmin > tol:
                c = dmin - tol + eps
                tot += w * c
                if want_row:
                    row[j] += c
        if tot > cutoff and not want_row:
            return tot
    return tot


@njit(cache=True, nogil=True)
def cost_points(pts, fpos, fori, fw, fbb, hn, hc, gs, ge, pf, pc, mbb, cm, ce, wc, tol, eps, cutoff):
    """Weighted overlap cost (m,) of the moving shape at each point (m, 2).

    A candidate's cost is exact when below the best cost found so far (and
    below ``cutoff``); otherwise it is only known to be at least that.
    """
    m = pts.shape[0]
    out = np.empty(m)
    best = cutoff
    dummy = np.zeros(1)
    for i in range(m):
        c = _point_cost(pts[i, 0], pts[i, 1], fpos, fori, fw, fbb, hn, hc, gs, ge, pf, pc, mbb, cm, ce, wc,
                        tol, eps, best, dummy, False)
        out[i] = c
        if c < best:
            best = c
    return out


@njit(cache=True, nogil=True)
def cost_row(px, py, fpos, fori, fw, fbb, hn, hc, gs, ge, pf, pc, mbb, cm, ce, tol, eps):
    """Unweighted overlap (n + 1,) of the moving shape at one point with each fixed shape.

    Entries with ``fw <= 0`` are skipped (the shape itself, other plates); the
    last entry is the container.
    """
    row = np.zeros(fpos.shape[0] + 1)
    _point_cost(px, py, fpos, fori, fw, fbb, hn, hc, gs, ge, pf, pc, mbb, cm, ce, 1.0, tol, eps, 1e300,
                row, True)
    return row
