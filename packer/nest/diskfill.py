"""Equal disks in a convex plate with keep-outs: the search for the last few copies.

A lattice clipped to a plate leaves room at the rim, and on round plates or for
a handful of copies the best arrangement is not a lattice at all (five disks in
a circle sit on a ring). For copies of a round outline this module places k
copies as k equal disks, each the outline's minimum enclosing circle, so disks
that keep clear of each other and of the plate edge give outlines that do too.

Method: minimise the overlap energy
``E = sum_{i<j} max(0, 2R - |p_i - p_j|)^2 + sum_i sum_h max(0, c_h + R - n_h . p_i)^2
+ sum_i sum_z max(0, R - d(p_i, Z_z))^2`` (pairs, the plate's edge halfplanes,
the keep-out polygons Z) with L-BFGS from seeded random starts; a start whose
minimum has every constraint met (with a relative slack of ``1e-7``) is a
packing. This is the usual penalty formulation of packing equal circles in a
container, solved by local optimisation from many starts. Deterministic: the starts come from
``numpy.random.default_rng(seed)`` and the work charged is a count of energy
evaluations.
"""

from __future__ import annotations


import numpy as np
import shapely

from packer.nest.budget import Budget, Meter

__all__ = ["ROUND_ENOUGH", "disk_of", "halfplanes", "pack_disks"]

#: an outline is packed as its enclosing disk when it fills at least this share of it
#: (our own threshold: a hexagon fills 0.83, a square 0.64)
ROUND_ENOUGH = 0.75

#: work units charged per energy evaluation: a fixed part (with the optimiser's own
#: step), per keep-out zone and per pair of disks (fitted to 20-170 us per evaluation
#: for 5-30 disks and 0-2 zones on the development machine, at
#: :data:`packer.nest.budget.UNITS_PER_SECOND`)
EVAL_WORK, ZONE_WORK, PAIR_WORK = 50_000, 40_000, 50

#: basin hopping: shakes without improvement before a new start, and the shake (share of
#: the radius, normal per coordinate); our own settings, tried on 22-25 circles in a circle
HOPS, SHAKE = 8, 0.3

_SLACK = 1e-7          # relative: constraints are met with this margin before a packing counts


def disk_of(polygon: shapely.Polygon) -> tuple[np.ndarray, float]:
    """Centre (2,) and radius (mm) of the minimum enclosing circle of ``polygon``'s vertices."""
    circle = shapely.minimum_bounding_circle(polygon)
    centre = np.asarray(circle.centroid.coords[0], dtype=float)
    pts = np.asarray(polygon.exterior.coords, dtype=float)
    radius = float(np.hypot(*(pts - centre).T).max())      # exact for these vertices
    return centre, radius


def halfplanes(region: shapely.Polygon) -> tuple[np.ndarray, np.ndarray] | None:
    """Inward unit normals (h, 2) and offsets (h,) with ``n . p >= c`` inside; None if not convex."""
    if region.interiors or region.convex_hull.area > region.area * (1 + 1e-9):
        return None
    ring = shapely.geometry.polygon.orient(region, 1.0).exterior
    pts = np.asarray(ring.coords, dtype=float)
    edge = pts[1:] - pts[:-1]
    length = np.hypot(edge[:, 0], edge[:, 1])
    keep = length > 1e-12
    edge, start = edge[keep] / length[keep, None], pts[:-1][keep]
    normal = np.c_[-edge[:, 1], edge[:, 0]]                  # left of a counter-clockwise edge
    return normal, np.einsum("ij,ij->i", normal, start)


def _segments(zones) -> tuple[np.ndarray, np.ndarray, list]:
    a, b, polys = [], [], []
    for z in zones:
        pts = np.asarray(z.exterior.coords, dtype=float)
        a.append(pts[:-1])
        b.append(pts[1:])
        polys.append(z)
    if not a:
        return np.zeros((0, 2)), np.zeros((0, 2)), polys
    return np.vstack(a), np.vstack(b), polys


class _Energy:
    """Overlap energy of k disks of radius R and its gradient (see the module docstring)."""

    def __init__(self, k: int, radius: float, normals, offsets, zones, meter: Meter):
        self.k, self.r, self.meter = k, radius, meter
        self.n, self.c = normals, offsets + radius
        self.iu = np.triu_indices(k, 1)
        self.zones = tuple(zones)
        self.za, self.zb, _ = _segments(self.zones)
        self.work = EVAL_WORK + ZONE_WORK * len(self.zones) + PAIR_WORK * k * k
        self.zid = np.concatenate([np.full(len(z.exterior.coords) - 1, i) for i, z in enumerate(self.zones)]) \
            if self.zones else np.zeros(0, dtype=int)

    def violations(self, p: np.ndarray) -> tuple[float, float, float]:
        d = np.hypot(*(p[:, None, :] - p[None, :, :]).transpose(2, 0, 1))[self.iu]
        pair = float(max(0.0, (2 * self.r - d).max(initial=-np.inf)))
        wall = float(max(0.0, (self.c[None, :] - p @ self.n.T).max()))
        zone = 0.0
        pts = shapely.points(p)
        for zz in self.zones:
            d = shapely.distance(zz, pts)
            inside = shapely.contains_xy(zz, p[:, 0], p[:, 1])
            zone = max(zone, float(np.where(inside, self.r + 1.0, self.r - d).max()))
        return pair, wall, zone

    def __call__(self, flat: np.ndarray):
        self.meter.charge_units(self.work)
        p = flat.reshape(self.k, 2)
        grad = np.zeros_like(p)
        diff = p[:, None, :] - p[None, :, :]
        dist = np.hypot(diff[..., 0], diff[..., 1])
        i, j = self.iu
        over = 2 * self.r - dist[i, j]
        hit = over > 0
        e = float((over[hit] ** 2).sum())
        if hit.any():
            ii, jj, ov = i[hit], j[hit], over[hit]
            dn = np.maximum(dist[ii, jj], 1e-12)
            g = (-2 * ov / dn)[:, None] * diff[ii, jj]
            np.add.at(grad, ii, g)
            np.add.at(grad, jj, -g)
        out = self.c[None, :] - p @ self.n.T
        pos = np.maximum(out, 0.0)
        e += float((pos ** 2).sum())
        grad -= 2 * pos @ self.n
        if self.zones:
            e += self._zone_terms(p, grad)
        return e, grad.ravel()

    def _zone_terms(self, p, grad) -> float:
        seg = self.zb - self.za
        t = np.clip(np.einsum("kmj,mj->km", p[:, None, :] - self.za[None], seg) / np.einsum("mj,mj->m", seg, seg),
                    0.0, 1.0)
        near = self.za[None] + t[..., None] * seg[None]
        vec = p[:, None, :] - near
        dd = np.hypot(vec[..., 0], vec[..., 1])
        e = 0.0
        for zi, zz in enumerate(self.zones):
            cols = np.flatnonzero(self.zid == zi)
            m = cols[np.argmin(dd[:, cols], axis=1)]
            rows = np.arange(len(p))
            d = dd[rows, m]
            v = vec[rows, m] / np.maximum(d, 1e-12)[:, None]
            inside = shapely.contains_xy(zz, p[:, 0], p[:, 1])
            sd = np.where(inside, -d, d)                      # signed distance, negative inside
            v = np.where(inside[:, None], -v, v)              # direction of increasing signed distance
            over = np.maximum(self.r - sd, 0.0)
            e += float((over ** 2).sum())
            grad -= 2 * over[:, None] * v
        return e


def _lbfgs(fun, x: np.ndarray, *, tol: float, memory: int = 8, max_iter: int = 2000) -> np.ndarray:
    """Limited-memory BFGS (two-loop recursion, Armijo backtracking) down to energy ``tol``.

    Nocedal and Wright, *Numerical Optimization*, 2nd ed., algorithm 7.4. Written here
    rather than taken from scipy because scipy's routine calls a threaded BLAS on these
    tiny problems, which costs milliseconds per step on a shared machine.
    """
    e, g = fun(x)
    ss, ys = [], []
    for _ in range(max_iter):
        if e <= tol:
            break
        q = g.copy()
        alphas = []
        for s_, y_ in zip(reversed(ss), reversed(ys)):
            a = float(s_ @ q) / float(y_ @ s_)
            alphas.append(a)
            q -= a * y_
        if ys:
            q *= float(ss[-1] @ ys[-1]) / float(ys[-1] @ ys[-1])
        for (s_, y_), a in zip(zip(ss, ys), reversed(alphas)):
            q += (a - float(y_ @ q) / float(y_ @ s_)) * s_
        d = -q
        slope = float(g @ d)
        if slope >= 0:
            d, slope, ss, ys = -g, -float(g @ g), [], []
        step = 1.0
        for _ in range(30):
            xn = x + step * d
            en, gn = fun(xn)
            if en <= e + 1e-4 * step * slope:
                break
            step *= 0.5
        else:
            break
        sv, yv = xn - x, gn - g
        if float(sv @ yv) > 1e-18:
            ss.append(sv)
            ys.append(yv)
            if len(ss) > memory:
                ss.pop(0)
                ys.pop(0)
        if e - en <= 1e-15 * max(e, 1e-300):
            x, e, g = xn, en, gn
            break
        x, e, g = xn, en, gn
    return x


def _starts(rng, k: int, box: np.ndarray, energy: _Energy) -> np.ndarray:
    """k random centres in the box, preferring points that meet the wall constraints."""
    pts = np.empty((0, 2))
    for _ in range(50):
        cand = box[:2] + rng.random((4 * k, 2)) * (box[2:] - box[:2])
        ok = (cand @ energy.n.T - energy.c[None, :] >= 0).all(axis=1)
        pts = np.vstack([pts, cand[ok]])
        if len(pts) >= k:
            return pts[:k]
    return np.vstack([pts, box[:2] + rng.random((k, 2)) * (box[2:] - box[:2])])[:k]


def pack_disks(k: int, radius: float, region: shapely.Polygon, keep_out=(), *, budget: Budget,
               seed: int = 0, first: np.ndarray | None = None) -> np.ndarray | None:
    """Centres (k, 2) of k disks of ``radius`` inside a convex ``region`` and clear of ``keep_out``.

    Parameters
    ----------
    k : int
    radius : float, mm
    region : shapely.Polygon
        Convex region the disks must lie in.
    keep_out : sequence of shapely.Polygon
        Convex zones the disks must not enter.
    budget : Budget
        Work budget; at least one start runs.
    seed : int
    first : (k, 2) float, optional
        A start tried before the random ones (for example a clipped lattice plus one).

    Returns
    -------
    (k, 2) float or None
        Centres with every pair at least ``2 * radius`` apart and every disk inside the
        region and off the zones (each with a relative slack of 1e-7), or None.
    """
    planes = halfplanes(region)
    if planes is None or k <= 0:
        return None if k > 0 else np.zeros((0, 2))
    scale = max(region.bounds[2] - region.bounds[0], region.bounds[3] - region.bounds[1])
    slack = _SLACK * scale
    energy = _Energy(k, radius + slack, planes[0], planes[1], keep_out, budget.meter)
    box = np.array(region.bounds, dtype=float)
    rng = np.random.default_rng(seed)
    check = _Energy(k, radius, planes[0], planes[1], keep_out, budget.meter)
    tol = (slack * 1e-3) ** 2
    tries = 0
    while True:
        start = first if (tries == 0 and first is not None) else _starts(rng, k, box, energy)
        tries += 1
        p = _lbfgs(energy, start.ravel(), tol=tol)
        e = energy(p)[0]
        stale = 0
        while True:                         # basin hopping: shake the best layout, keep it if better
            if max(check.violations(p.reshape(k, 2))) <= 0.0:
                return p.reshape(k, 2)
            if budget.done() or stale >= HOPS:
                break
            shaken = p + rng.normal(scale=SHAKE * radius, size=p.shape)
            q = _lbfgs(energy, shaken, tol=tol)
            eq = energy(q)[0]
            if eq < e:
                p, e, stale = q, eq, 0
            else:
                stale += 1
        if budget.done():
            return None
