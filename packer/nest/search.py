"""Overlap minimisation with guided local search, over one or several plates.

Shapes may overlap while the search runs.  The overlap of two shapes is the
sum, over pairs of their convex parts, of the squared penetration depth of one
reference point in the convex no-fit polygon (zero when they touch or are
apart); leaving the container costs the squared distance outside its
inner-fit region.  A move takes one overlapping shape and tries sampled
positions (uniform over the container and Gaussian around the current point)
in each allowed orientation (and, with several plates, on other plates), then
refines the best one by a pattern search with halving steps.  Every candidate
batch is one compiled query (:mod:`packer.nest.kernels`); in the strip search
(a :class:`State` given a touch table) the whole move is one compiled call
(:mod:`packer.nest.fastmove`, :mod:`packer.nest.movekernel`).  When the total
overlap stalls, the weights of the overlapping pairs grow (guided local
search), so the next moves push those pairs apart first.
"""

from __future__ import annotations

import numpy as np

from packer.nest.kernels import cost_points, cost_row, pattern_search
from packer.nest.budget import Budget
from packer.nest.fastmove import DIRS, InnerFit, TouchTable, fused_move
from packer.nest.kit import Kit, Room

__all__ = ["State", "separate", "empty_last_plate", "layout_on"]

#: orientations a move draws at random besides its current one (the draw may repeat it; all of
#: them when there are at most MOVE_ORIENTS + 1): with four quarter turns, trying all four made
#: each move about twice as dear for fewer moves (8 s strip runs, seeds 1-2: +1.4 points
#: gardeyn4, +1.3 the generated 8-rotation set, +0.8 gardeyn9, -0.6 gardeyn5)
MOVE_ORIENTS = 1


class State:
    """Shapes spread over ``plates`` copies of one room, overlaps allowed.

    Attributes
    ----------
    items : (n,) int      shape indices
    orient : (n,) int     orientation ids
    pos : (n, 2) float    reference points
    plate : (n,) int      plate of each shape
    ov : (n, n + 1) float pairwise overlap cost (last column: container and obstacles)
    weight : (n, n + 1) float guided-local-search weights
    """

    def __init__(self, kit: Kit, room: Room, items, orient, pos, plate, plates: int,
                 rng: np.random.Generator, *, compiled_steps: bool = False, touch: TouchTable | None = None):
        self.kit = kit
        # with a touch table (the strip search) a whole move is one compiled call (fastmove.py)
        self.touch = touch
        # the strip search runs a move's pattern search in one compiled call; the plate search
        # keeps one query per step (the same steps, charged as before, so plans do not change)
        self.compiled_steps = bool(compiled_steps)
        self.room = room
        self.items = np.asarray(items, dtype=np.int64)
        n = len(self.items)
        self.n = n
        self.orient = np.asarray(orient, dtype=np.int64).copy()
        self.plate = np.asarray(plate, dtype=np.int64).copy()
        self.plates = int(plates)
        self.rng = rng
        self.weight = np.ones((n, n + 1))
        self.ov = np.zeros((n, n + 1))
        # touching is fine; the search allows a thousandth of the fill's numerical slack,
        # far below what the exact check notices
        self.tol = 1e-3 * kit.tol
        self.size = np.array([max(o.bbox[2] - o.bbox[0], o.bbox[3] - o.bbox[1]) for o in kit.orientations])
        self.bbox = np.array([o.bbox for o in kit.orientations])
        self.eps = 0.01 * float(np.mean(self.size[self.orient])) if n else 0.0
        # fixed-shape arrays for the kernels: n shapes plus one row for the container obstacles
        parts = sum(len(o.parts) for o in kit.orientations)
        self.complete = parts * parts <= 100000
        if self.complete and not (touch is not None and touch.stored):
            kit.ensure_all(room)
            if touch is not None:   # one plate without obstacles: nothing of it depends on the room
                touch.stored = True
        self.obstacle = len(kit.orientations)
        self.has_obstacles = bool(room.obstacle_parts)
        self.fpos = np.zeros((n + 1, 2))
        self.fpos[:n] = np.asarray(pos, dtype=float).reshape(-1, 2)
        self.fori = np.append(self.orient, self.obstacle).astype(np.int64)
        self.fbb = np.zeros((n + 1, 4))
        self.fbb[n] = room.bounds + np.array([-1.0, -1.0, 1.0, 1.0]) * kit.scale
        for i in range(n):
            self._set_bbox(i)
        for i in range(n):
            self._refresh(i)
        if touch is not None:
            if self.plates != 1 or self.has_obstacles:
                raise ValueError("the fused move serves one plate without obstacles")
            self.inner = InnerFit(room, touch)

    @property
    def pos(self) -> np.ndarray:
        return self.fpos[: self.n]

    def _set_bbox(self, i):
        self.fbb[i] = self.bbox[self.orient[i]] + np.tile(self.fpos[i], 2)

    # -- queries -----------------------------------------------------------------------------
    def _prepare(self, o: int):
        kit = self.kit
        kit.ensure(np.unique(self.orient), o, self.room)
        hn, hc, hv, gs, ge, gb = kit.flat()
        m, e = self.room.ifp(o)
        return (hn, hc, gs, ge, gb, kit.pair_first[:, o].copy(), kit.pair_count[:, o].copy(),
                kit.orientations[o].bbox, m, e)

    def _fixed_weights(self, i, b, weighted=True):
        fw = np.zeros(self.n + 1)
        on = self.plate == b
        fw[: self.n][on] = self.weight[i, : self.n][on] if weighted else 1.0
        fw[i] = 0.0
        if self.has_obstacles:
            fw[self.n] = self.weight[i, self.n] if weighted else 1.0
        return fw

    def _values(self, i, o, b, pts, prep, cutoff=np.inf):
        """Weighted overlap cost of shape ``i`` in orientation ``o`` on plate ``b`` at points (m, 2)."""
        hn, hc, gs, ge, gb, pf, pc, mbb, m, e = prep
        fw = self._fixed_weights(i, b)
        self.kit.meter.charge("query")
        self.kit.meter.charge("row", self.n + 1)
        out = cost_points(np.ascontiguousarray(pts, dtype=float), self.fpos, self.fori, fw, self.fbb,
                          hn, hc, gs, ge, gb, pf, pc, mbb, m, e, float(self.weight[i, self.n]),
                          self.tol, self.eps, float(cutoff), self.kit.meter.ops)
        self.kit.meter.charge_ops()
        return out

    def _row(self, i):
        """Unweighted overlap costs of shape ``i`` with every other shape and the container (n + 1,)."""
        o = int(self.orient[i])
        hn, hc, gs, ge, gb, pf, pc, mbb, m, e = self._prepare(o)
        fw = self._fixed_weights(i, int(self.plate[i]), weighted=False)
        self.kit.meter.charge("query")
        self.kit.meter.charge("row", self.n + 1)
        p = self.fpos[i]
        row = cost_row(float(p[0]), float(p[1]), self.fpos, self.fori, fw, self.fbb, hn, hc, gs, ge, gb, pf,
                       pc, mbb, m, e, self.tol, self.eps, self.kit.meter.ops)
        self.kit.meter.charge_ops()
        out = row[: self.n + 1].copy()
        out[self.n] += row[self.n + 1]
        return out

    def _refresh(self, i):
        row = self._row(i)
        self.ov[i, :] = row
        self.ov[:, i] = row[: self.n]
        self.ov[i, i] = 0.0

    def total(self) -> float:
        self.kit.meter.charge("square", self.n * (self.n + 1))
        return float(np.sum(self.ov[:, : self.n]) / 2.0 + np.sum(self.ov[:, self.n]))

    def overlapping(self) -> np.ndarray:
        self.kit.meter.charge("square", self.n * (self.n + 1))
        return np.flatnonzero(self.ov.sum(axis=1) > 0.0)

    def _touching_points(self, b, o, count, per_shape: int = 48):
        """Touching positions of orientation ``o`` around a few shapes on plate ``b`` (vertices of
        their no-fit polygons outside every group, at most ``per_shape`` of each)."""
        kit = self.kit
        on = np.flatnonzero(self.plate == b)
        if len(on) == 0:
            return np.zeros((0, 2))
        pick = on if len(on) <= count else self.rng.choice(on, size=count, replace=False)
        self.kit.meter.charge("touch", len(pick))
        out = []
        rows = [(int(self.orient[j]), self.fpos[j]) for j in pick]
        if self.has_obstacles:
            rows.append((self.obstacle, np.zeros(2)))
        for f, at in rows:
            v = kit.outer_vertices(f, o)
            if len(v) > per_shape:
                v = v[self.rng.choice(len(v), size=per_shape, replace=False)]
            out.append(v + at)
        return np.concatenate(out) if out else np.zeros((0, 2))

    # -- moves -------------------------------------------------------------------------------
    def move(self, i: int, *, samples: int = 64, vertex_pieces: int = 8, other_plates: int = 2) -> None:
        """Move shape ``i`` to the least weighted-overlap position found."""
        if self.touch is not None:
            fused_move(self, i)
            return
        kit, rng = self.kit, self.rng
        self.kit.meter.charge("move")
        opts = kit.options[int(self.items[i])]
        if len(opts) > MOVE_ORIENTS + 1:
            pick = rng.choice(len(opts), size=MOVE_ORIENTS, replace=False)
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
                self.kit.meter.charge("option")
                prep = self._prepare(o)
                bb = kit.orientations[o].bbox
                lo = lo_room - bb[:2]
                hi = np.maximum(hi_room - bb[2:], lo)
                n_glob = samples // 2
                pts = [lo + rng.random((n_glob, 2)) * (hi - lo)]
                if b == self.plate[i]:
                    s = self.size[o]
                    pts.append(self.fpos[i] + rng.normal(size=(samples // 4, 2)) * (0.25 * s))
                    pts.append(self.fpos[i] + rng.normal(size=(samples - n_glob - samples // 4, 2)) * (0.05 * s))
                    pts.append(self.fpos[i][None, :])
                pts.append(self._touching_points(b, o, vertex_pieces))
                pts.append(self.room.ifp_vertices(o))
                pts = np.concatenate(pts)
                pts = np.minimum(np.maximum(pts, lo), hi)
                cutoff = best[0] if best is not None else np.inf
                val = self._values(i, o, b, pts, prep, cutoff)
                k = int(np.argmin(val))
                if best is None or val[k] < best[0]:
                    best = (float(val[k]), o, b, pts[k].copy(), prep)
        val, o, b, p, prep = best
        # pattern search with halving steps
        step = 0.1 * self.size[o]
        floor = 1e-5 * self.size[o]
        if self.compiled_steps:
            if step > floor and val > 0.0:
                p, val = self._pattern(i, b, p, val, step, floor, prep)
        else:
            while step > floor and val > 0.0:
                cand = p[None, :] + step * DIRS
                v = self._values(i, o, b, cand, prep, val)
                k = int(np.argmin(v))
                if v[k] < val:
                    val, p = float(v[k]), cand[k]
                else:
                    step *= 0.5
        self.orient[i] = o
        self.fori[i] = o
        self.fpos[i] = p
        self._set_bbox(i)
        old_plate = int(self.plate[i])
        self.plate[i] = b
        if b != old_plate:
            self.ov[i, :] = 0.0
            self.ov[:, i] = 0.0
        self._refresh(i)

    def _pattern(self, i, b, p, val, step, floor, prep):
        """The pattern search of :meth:`move` in one compiled call; (point, cost)."""
        hn, hc, gs, ge, gb, pf, pc, mbb, m, e = prep
        fw = self._fixed_weights(i, b)
        self.kit.meter.charge("pattern")
        self.kit.meter.charge("row", self.n + 1)
        x, y, val = pattern_search(float(p[0]), float(p[1]), float(val), float(step), float(floor), DIRS,
                                   self.fpos, self.fori, fw, self.fbb, hn, hc, gs, ge, gb, pf, pc, mbb, m, e,
                                   float(self.weight[i, self.n]), self.tol, self.eps, self.kit.meter.ops)
        self.kit.meter.charge_ops()
        return np.array([x, y]), float(val)

    def grow_weights(self) -> None:
        """Guided local search: raise the weights of overlapping pairs, relax the others."""
        ov = self.ov
        self.kit.meter.charge("square", 3 * self.n * (self.n + 1))
        peak = ov.max()
        if peak <= 0:
            return
        grow = 1.2 + 0.8 * ov / peak
        self.weight = np.where(ov > 0, self.weight * grow, np.maximum(1.0, self.weight * 0.95))
        sym = self.weight[:, : self.n]
        self.weight[:, : self.n] = np.maximum(sym, sym.T)


def separate(state: State, budget: Budget, *, strikes: int = 40, worst_first: bool = False) -> bool:
    """Move overlapping shapes until none overlap (True), or give up (False).

    Each round moves every overlapping shape once, in a random order, or with
    ``worst_first`` in decreasing weighted overlap (ties in the random order), so
    the shape that costs most moves while the others are still where they were.
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
        seq = state.rng.permutation(over)
        if worst_first:
            state.kit.meter.charge("square", len(seq) * (state.n + 1))
            cost = (state.ov[seq] * state.weight[seq]).sum(axis=1)
            seq = seq[np.argsort(-cost, kind="stable")]
        for i in seq:
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


def layout_on(state: State, b: int):
    """The shapes of ``state`` on plate ``b`` as a :class:`packer.nest.construct.Layout` (positions copied)."""
    from packer.nest.construct import Layout

    lay = Layout(state.room)
    for j in np.flatnonzero(state.plate == b):
        lay.add(int(state.items[j]), int(state.orient[j]), state.pos[j].copy())
    return lay


def empty_last_plate(kit: Kit, room: Room, plates, budget: Budget, rng: np.random.Generator,
                     *, target: int):
    """Try to use one plate fewer, repeatedly, by overlap minimisation over all plates.

    ``plates`` is a list of layouts (:class:`packer.nest.construct.Layout`); the
    result is a list of layouts again, never worse than the input.
    """
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
        out = [l for l in (layout_on(state, b) for b in range(k)) if l.items]
        if len(out) < len(best):
            best = out
        else:
            break
    return best

