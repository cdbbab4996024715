"""Overlap minimisation with guided local search, over one or several plates.

Shapes may overlap while the search runs.  The overlap of two shapes is the
sum, over pairs of their convex parts, of the squared penetration depth of one
reference point in the convex no-fit polygon (zero when they touch or are
apart); leaving the container costs the squared distance outside its
inner-fit region.  A move takes one overlapping shape and tries sampled
positions (uniform over the container and Gaussian around the current point)
in each allowed orientation (and, with several plates, on other plates), then
refines the best one by a pattern search with halving steps.  Every candidate
batch is one vectorised query (:mod:`packer.nest.board`).  When the total
overlap stalls, the weights of the overlapping pairs grow (guided local
search), so the next moves push those pairs apart first.
"""

from __future__ import annotations

import numpy as np

from .board import depths, gather
from .budget import Budget
from .kit import Kit, Room

__all__ = ["State", "separate", "empty_last_plate"]

_DIRS = np.array([[1, 0], [-1, 0], [0, 1], [0, -1], [1, 1], [1, -1], [-1, 1], [-1, -1]], dtype=float)
_DIRS[4:] /= np.sqrt(2.0)


class State:
    """Shapes spread over ``plates`` copies of one room, overlaps allowed.

    Attributes
    ----------
    items : (n,) int      shape indices
    orient : (n,) int     orientation ids
    pos : (n, 2) float    reference points
    plate : (n,) int      plate of each shape
    ov : (n, n + 1) float pairwise overlap (last column: container and obstacles)
    weight : (n, n + 1) float guided-local-search weights
    """

    def __init__(self, kit: Kit, room: Room, items, orient, pos, plate, plates: int,
                 rng: np.random.Generator):
        self.kit = kit
        self.room = room
        self.items = np.asarray(items, dtype=np.int64)
        self.orient = np.asarray(orient, dtype=np.int64).copy()
        self.pos = np.asarray(pos, dtype=float).reshape(-1, 2).copy()
        self.plate = np.asarray(plate, dtype=np.int64).copy()
        self.plates = int(plates)
        self.rng = rng
        n = len(self.items)
        self.n = n
        self.weight = np.ones((n, n + 1))
        self.ov = np.zeros((n, n + 1))
        self.tol = kit.tol
        self.size = np.array([max(o.bbox[2] - o.bbox[0], o.bbox[3] - o.bbox[1]) for o in kit.orientations])
        for i in range(n):
            self._refresh(i)

    # -- queries -----------------------------------------------------------------------------
    def _others(self, i: int, b: int) -> np.ndarray:
        mask = self.plate == b
        mask[i] = False
        return np.flatnonzero(mask)

    def _query(self, i, o, b):
        others = self._others(i, b)
        g = gather(self.kit, self.room, self.orient[others], self.pos[others], int(o))
        owner = np.append(others, self.n)[g.owner] if len(g.owner) else g.owner
        return g, owner

    def _values(self, i, o, g, owner, pts, weighted=True):
        """Weighted overlap of shape ``i`` in orientation ``o`` at points (m, 2) -> (m,)."""
        m, e = self.room.ifp(int(o))
        cv = np.maximum(pts @ m.T - e[None, :] - self.tol, 0.0)
        cont = np.sum(cv * cv, axis=1)
        w = self.weight[i]
        total = cont * (w[self.n] if weighted else 1.0)
        if len(owner):
            d = np.maximum(depths(g, pts) - self.tol, 0.0)
            pen = d * d
            total = total + (pen @ (w[owner] if weighted else np.ones(len(owner))))
        return total

    def _row(self, i):
        """Unweighted overlaps of shape ``i`` with every other shape and the container (n + 1,)."""
        o = int(self.orient[i])
        g, owner = self._query(i, o, int(self.plate[i]))
        p = self.pos[i][None, :]
        row = np.zeros(self.n + 1)
        m, e = self.room.ifp(o)
        cv = np.maximum(p @ m.T - e[None, :] - self.tol, 0.0)
        row[self.n] = float(np.sum(cv * cv))
        if len(owner):
            d = np.maximum(depths(g, p)[0] - self.tol, 0.0)
            row += np.bincount(owner, weights=d * d, minlength=self.n + 1)
        return row

    def _refresh(self, i):
        row = self._row(i)
        self.ov[i, :] = row
        self.ov[:, i] = row[: self.n]
        self.ov[i, i] = 0.0
        # shapes on other plates do not overlap shape i
        other = self.plate != self.plate[i]
        self.ov[i, : self.n][other] = 0.0
        self.ov[:, i][other] = 0.0

    def total(self) -> float:
        return float(np.sum(self.ov[:, : self.n]) / 2.0 + np.sum(self.ov[:, self.n]))

    def overlapping(self) -> np.ndarray:
        return np.flatnonzero(self.ov.sum(axis=1) > 0.0)

    # -- moves -------------------------------------------------------------------------------
    def move(self, i: int, *, samples: int = 48, other_plates: int = 2) -> None:
        """Move shape ``i`` to the least weighted-overlap position found."""
        kit, rng = self.kit, self.rng
        opts = kit.options[int(self.items[i])]
        if len(opts) > 6:
            pick = rng.choice(len(opts), size=5, replace=False)
            opts = tuple(dict.fromkeys([int(self.orient[i])] + [opts[k] for k in pick]))
        plates = [int(self.plate[i])]
        if self.plates > 1:
            rest = [b for b in range(self.plates) if b != plates[0]]
            rng.shuffle(rest)
            plates += rest[:other_plates]
        lo_room, hi_room = self.room.bounds[:2], self.room.bounds[2:]
        best = None
        for b in plates:
            for o in opts:
                bb = kit.orientations[o].bbox
                lo = lo_room - bb[:2]
                hi = np.maximum(hi_room - bb[2:], lo)
                n_glob = samples // 2
                pts = [lo + rng.random((n_glob, 2)) * (hi - lo)]
                if b == self.plate[i]:
                    s = self.size[o]
                    pts.append(self.pos[i] + rng.normal(size=(samples // 4, 2)) * (0.25 * s))
                    pts.append(self.pos[i] + rng.normal(size=(samples - n_glob - samples // 4, 2)) * (0.05 * s))
                    pts.append(self.pos[i][None, :])
                pts = np.concatenate(pts)
                g, owner = self._query(i, o, b)
                val = self._values(i, o, g, owner, pts)
                k = int(np.argmin(val))
                if best is None or val[k] < best[0]:
                    best = (float(val[k]), o, b, pts[k].copy(), g, owner)
        val, o, b, p, g, owner = best
        # pattern search with halving steps
        step = 0.1 * self.size[o]
        floor = 1e-5 * self.size[o]
        while step > floor and val > 0.0:
            cand = p[None, :] + step * _DIRS
            v = self._values(i, o, g, owner, cand)
            k = int(np.argmin(v))
            if v[k] < val:
                val, p = float(v[k]), cand[k]
            else:
                step *= 0.5
        self.orient[i] = o
        self.pos[i] = p
        old_plate = int(self.plate[i])
        self.plate[i] = b
        if b != old_plate:
            self.ov[i, :] = 0.0
            self.ov[:, i] = 0.0
        self._refresh(i)

    def grow_weights(self) -> None:
        """Guided local search: raise the weights of overlapping pairs."""
        ov = self.ov
        peak = ov.max()
        if peak <= 0:
            return
        grow = 1.0 + 0.5 * ov / peak
        self.weight *= np.where(ov > 0, grow, 1.0)
        sym = self.weight[:, : self.n]
        self.weight[:, : self.n] = np.maximum(sym, sym.T)


def separate(state: State, budget: Budget, *, strikes: int = 40) -> bool:
    """Move overlapping shapes until none overlap (True), or give up (False).

    Gives up after ``strikes`` rounds without a 1 % drop of the best total
    overlap, or when the budget is spent.
    """
    best = state.total()
    if best <= 0.0:
        return True
    bad = 0
    while not budget.done():
        over = state.overlapping()
        if len(over) == 0:
            return True
        for i in state.rng.permutation(over):
            if state.ov[i].sum() > 0.0:
                state.move(int(i))
        total = state.total()
        if total <= 0.0:
            return True
        if total < 0.99 * best:
            best = total
            bad = 0
        else:
            bad += 1
            if bad >= strikes:
                return False
        state.grow_weights()
    return state.total() <= 0.0


def empty_last_plate(kit: Kit, room: Room, plates, budget: Budget, rng: np.random.Generator,
                     *, target: int):
    """Try to use one plate fewer, repeatedly, by overlap minimisation over all plates.

    ``plates`` is a list of layouts (:class:`packer.nest.construct.Layout`); the
    result is a list of layouts again, never worse than the input.
    """
    from .construct import Layout

    best = plates
    while len(best) > max(1, target) and not budget.done():
        k = len(best) - 1
        # the plate with the least area is the one to empty
        areas = [sum(kit.orientations[o].area for o in l.orient) for l in best]
        drop = int(np.argmin(areas))
        keep = [l for j, l in enumerate(best) if j != drop]
        items, orient, pos, plate = [], [], [], []
        for b, l in enumerate(keep):
            items += l.items
            orient += l.orient
            pos += [p for p in l.pos]
            plate += [b] * len(l.items)
        free = np.array([sum(kit.orientations[o].area for o in l.orient) for l in keep])
        for i, o, p in zip(best[drop].items, best[drop].orient, best[drop].pos):
            b = int(np.argmin(free))
            items.append(i)
            orient.append(o)
            pos.append(p)
            plate.append(b)
            free[b] += kit.orientations[o].area
        state = State(kit, room, items, orient, pos, plate, k, rng)
        sub = budget.split(0.5)
        if not separate(state, sub, strikes=60):
            break
        out = []
        for b in range(k):
            lay = Layout(room)
            for j in np.flatnonzero(state.plate == b):
                lay.add(int(state.items[j]), int(state.orient[j]), state.pos[j])
            out.append(lay)
        out = [l for l in out if l.items]
        if len(out) < len(best):
            best = out
        else:
            break
    return best
