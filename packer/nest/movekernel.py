"""One whole move of the strip search in one compiled call (numba).

The move of :meth:`packer.nest.search.State.move` draws its orientations, samples
candidate points (uniform over the room, Gaussian around the shape, its own point,
touching positions around a few shapes, the inner-fit corners), evaluates all of
them, refines the best by the pattern search with halving steps and computes the
shape's new overlap row.  Done from Python that is a dozen numpy and compiled calls
per move, which cost more than the evaluations themselves on small instances; here
it is one call.  The draws come from numba's own generator, seeded once per move
from the search's numpy generator, so a run stays deterministic.

Touching positions need the outer vertices of the no-fit polygon of each picked
pair (:meth:`packer.nest.kit.Kit.outer_vertices`), built in Python on first use:
when a pair is missing from the flat table, :func:`move_candidates` reports it and
evaluates nothing; the caller adds it and calls again with the same seed (the same
draws).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from packer.nest.kernels import cost_row, pattern_search, point_cost

__all__ = ["SAMPLES", "PIECES", "PER_SHAPE", "move_candidates", "best_candidate", "strip_move"]

#: sampled points per orientation (half uniform, a quarter each at 0.25 and 0.05 of the size)
SAMPLES = 64
#: shapes whose touching positions a move collects per orientation
PIECES = 8
#: touching positions taken around each of them at most
PER_SHAPE = 48


@njit(cache=True, nogil=True)
def _shuffle_head(idx, k):
    """Put a uniform draw of ``k`` of the ``len(idx)`` entries, without repeats, first."""
    m = idx.shape[0]
    for t in range(m):
        idx[t] = t
    for t in range(min(k, m)):
        r = np.random.randint(t, m)
        a = idx[t]
        idx[t] = idx[r]
        idx[r] = a


@njit(cache=True, nogil=True)
def _pick_options(cur, opts):
    """The orientations a move tries: all when at most two, else its own and one drawn."""
    if opts.shape[0] <= 2:
        return opts.copy()
    k = opts[np.random.randint(0, opts.shape[0])]
    if k == cur:
        out = np.empty(1, dtype=np.int64)
        out[0] = cur
        return out
    out = np.empty(2, dtype=np.int64)
    out[0] = cur
    out[1] = k
    return out


@njit(cache=True, nogil=True)
def move_candidates(seed, i, opts, room, obbox, size, fpos, fori, n, pair_first, ovf, ov_first, ov_count, iv, ivn):
    """Candidate points of a move of shape ``i`` (its allowed orientations ``opts``).

    ``room`` (4,) room bounds; ``obbox`` (K, 4) and ``size`` (K,) per orientation; ``fpos``,
    ``fori`` the shapes' points and orientations (first ``n`` rows); ``pair_first`` (K + 1, K)
    the kit's no-fit pair table (-1: not stored yet); ``ovf`` (v, 2) outer
    vertices, ``ov_first`` / ``ov_count`` (K + 1, K) their slice per (fixed, moving) pair (-1:
    not built yet); ``iv`` (K, V, 2) and ``ivn`` (K,) the inner-fit corners.

    Returns (points (m, 2), starts (c + 1,) of each orientation's points, orientations (c,),
    missing pairs (q, 2), shapes picked for touching positions).  A missing pair (-1, o): the
    no-fit polygons of a chosen orientation ``o`` around some shape are not stored (nothing
    else is drawn then); (f, o): the outer vertices of that pair are not in the table.
    """
    np.random.seed(seed)
    cur = fori[i]
    chosen = _pick_options(cur, opts)
    nc = chosen.shape[0]
    lack = np.empty((nc, 2), dtype=np.int64)
    nlack = 0
    for c in range(nc):
        for j in range(n):
            if pair_first[fori[j], chosen[c]] < 0:
                lack[nlack, 0] = -1
                lack[nlack, 1] = chosen[c]
                nlack += 1
                break
    if nlack:
        return np.empty((0, 2)), np.zeros(nc + 1, dtype=np.int64), chosen, lack[:nlack], 0
    cap = nc * (SAMPLES + 1 + PIECES * PER_SHAPE + iv.shape[1])
    pts = np.empty((cap, 2))
    starts = np.zeros(nc + 1, dtype=np.int64)
    missing = np.empty((nc * PIECES, 2), dtype=np.int64)
    nmiss = 0
    picked = 0
    order = np.empty(n, dtype=np.int64)
    m = 0
    px = fpos[i, 0]
    py = fpos[i, 1]
    n_glob = SAMPLES // 2
    n_wide = SAMPLES // 4
    for c in range(nc):
        o = chosen[c]
        lox = room[0] - obbox[o, 0]
        loy = room[1] - obbox[o, 1]
        hix = max(room[2] - obbox[o, 2], lox)
        hiy = max(room[3] - obbox[o, 3], loy)
        s = size[o]
        first = m
        for _ in range(n_glob):
            pts[m, 0] = lox + np.random.random() * (hix - lox)
            pts[m, 1] = loy + np.random.random() * (hiy - loy)
            m += 1
        for k in range(SAMPLES - n_glob):
            sd = 0.25 * s if k < n_wide else 0.05 * s
            pts[m, 0] = px + np.random.standard_normal() * sd
            pts[m, 1] = py + np.random.standard_normal() * sd
            m += 1
        pts[m, 0] = px
        pts[m, 1] = py
        m += 1
        _shuffle_head(order, PIECES)
        npick = min(n, PIECES)
        picked += npick
        for t in range(npick):
            j = order[t]
            f = fori[j]
            g = ov_first[f, o]
            if g < 0:
                missing[nmiss, 0] = f
                missing[nmiss, 1] = o
                nmiss += 1
                continue
            cnt = ov_count[f, o]
            take = min(cnt, PER_SHAPE)
            vidx = np.empty(cnt, dtype=np.int64)
            if cnt > PER_SHAPE:
                _shuffle_head(vidx, PER_SHAPE)
            else:
                for u in range(cnt):
                    vidx[u] = u
            for u in range(take):
                pts[m, 0] = ovf[g + vidx[u], 0] + fpos[j, 0]
                pts[m, 1] = ovf[g + vidx[u], 1] + fpos[j, 1]
                m += 1
        for u in range(ivn[o]):
            pts[m, 0] = iv[o, u, 0]
            pts[m, 1] = iv[o, u, 1]
            m += 1
        for u in range(first, m):
            pts[u, 0] = min(max(pts[u, 0], lox), hix)
            pts[u, 1] = min(max(pts[u, 1], loy), hiy)
        starts[c + 1] = m
    return pts[:m], starts, chosen, missing[:nmiss], picked


@njit(cache=True, nogil=True)
def best_candidate(pts, starts, chosen, fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pair_first, pair_count,
                   obbox, cm, ce_all, wc, tol, eps, ops):
    """The least weighted-overlap candidate: (orientation, x, y, cost).

    Orientation by orientation, each point's cost is computed with the best so far as its
    cutoff, and an orientation's best point replaces the best only if it costs less (the
    same choice as one :func:`packer.nest.kernels.cost_points` query per orientation).
    """
    best = np.inf
    bo = chosen[0]
    bx = pts[0, 0]
    by = pts[0, 1]
    dummy = np.zeros(1)
    for c in range(chosen.shape[0]):
        o = chosen[c]
        pf = pair_first[:, o].copy()
        pc = pair_count[:, o].copy()
        mbb = obbox[o]
        ce = ce_all[o]
        run = best
        low = np.inf
        k = -1
        for u in range(starts[c], starts[c + 1]):
            v = point_cost(pts[u, 0], pts[u, 1], fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pf, pc, mbb, cm, ce,
                           wc, tol, eps, run, dummy, False, ops)
            if v < run:
                run = v
            if v < low:
                low = v
                k = u
        ops[0] += starts[c + 1] - starts[c]
        if k >= 0 and low < best:
            best = low
            bo = o
            bx = pts[k, 0]
            by = pts[k, 1]
    return bo, bx, by, best


@njit(cache=True, nogil=True)
def strip_move(pts, starts, chosen, i, n, weight_row, has_obstacles, dirs, fpos, fori, fbb, hn, hc, gs, ge, gb,
               pair_first, pair_count, obbox, size, cm, ce_all, tol, eps, ops):
    """Evaluate the candidates, refine the best, put shape ``i`` there and return its overlap row.

    Writes the new point, orientation and bounding box of ``i`` into ``fpos``, ``fori`` and
    ``fbb``; returns (orientation, cost, row (n + 2,) as :func:`packer.nest.kernels.cost_row`).
    """
    fw = np.zeros(n + 1)
    for j in range(n):
        fw[j] = weight_row[j]
    fw[i] = 0.0
    wc = weight_row[n]
    if has_obstacles:
        fw[n] = wc
    o, x, y, val = best_candidate(pts, starts, chosen, fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pair_first,
                                  pair_count, obbox, cm, ce_all, wc, tol, eps, ops)
    pf = pair_first[:, o].copy()
    pc = pair_count[:, o].copy()
    step = 0.1 * size[o]
    floor = 1e-5 * size[o]
    if step > floor and val > 0.0:
        x, y, val = pattern_search(x, y, val, step, floor, dirs, fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pf, pc,
                                   obbox[o], cm, ce_all[o], wc, tol, eps, ops)
    fpos[i, 0] = x
    fpos[i, 1] = y
    fori[i] = o
    for k in range(4):
        fbb[i, k] = obbox[o, k] + (x if k % 2 == 0 else y)
    for j in range(n):
        fw[j] = 1.0
    fw[i] = 0.0
    fw[n] = 1.0 if has_obstacles else 0.0
    row = cost_row(x, y, fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pf, pc, obbox[o], cm, ce_all[o], tol, eps, ops)
    return o, val, row
