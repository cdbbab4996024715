"""Bottom-left fill: place shapes one at a time at the leftmost feasible touching position.

Candidate reference points are the vertices of the no-fit polygons of the
shapes already placed and the corners of the inner-fit region; they are
checked in left-to-right order in vectorised chunks, and the first feasible one
is then slid down and left (ray casts) until it rests.  Holes of placed shapes
are ordinary free space, so small shapes drop into them when they fit.
"""

from __future__ import annotations

import numpy as np

from packer.nest.board import gather, slide
from packer.nest.kernels import cost_points
from packer.nest.kit import Kit, Room

__all__ = ["Layout", "place_one", "fill"]

_LEFT = np.array([-1.0, 0.0])
_DOWN = np.array([0.0, -1.0])


class Layout:
    """Shapes placed in one room: orientation ids and reference points."""

    def __init__(self, room: Room):
        self.room = room
        self.items: list[int] = []     # shape indices
        self.orient: list[int] = []    # orientation ids
        self.pos: list[np.ndarray] = []

    def add(self, item: int, o: int, p: np.ndarray) -> None:
        self.items.append(item)
        self.orient.append(o)
        self.pos.append(np.asarray(p, dtype=float))

    def copy(self) -> "Layout":
        out = Layout(self.room)
        out.items, out.orient, out.pos = list(self.items), list(self.orient), [p.copy() for p in self.pos]
        return out

    def extent_x(self, kit: Kit) -> float:
        """Right-most x of any placed shape (min x of the room when empty)."""
        if not self.items:
            return float(self.room.bounds[0])
        return max(float(p[0] + kit.orientations[o].bbox[2]) for o, p in zip(self.orient, self.pos))


def _rest(g, m, e, p, tol, scale, meter):
    """Slide down and left alternately until the point rests."""
    for _ in range(12):
        moved = 0.0
        for d in (_DOWN, _LEFT):
            t = slide(g, m, e, p, d, tol, meter)
            if t > 1e-12 * scale and np.isfinite(t):
                p = p + t * d
                moved += t
        if moved <= 1e-9 * scale:
            break
    return p


def _hole_points(kit: Kit, fixed_o, fixed_pos, o: int) -> np.ndarray:
    """Reference points where a vertex of ``o`` meets a vertex of a hole of a placed shape.

    Corners inside holes are where two no-fit edges of different convex parts
    cross, which no-fit vertices alone miss.
    """
    mv = kit.orientations[o].vertices
    out = []
    for f, p in zip(fixed_o, fixed_pos):
        hv = kit.orientations[f].hole_vertices
        if len(hv):
            out.append(((hv + p)[:, None, :] - mv[None, :, :]).reshape(-1, 2))
    return np.concatenate(out) if out else np.zeros((0, 2))


def _fixed_arrays(kit: Kit, layout: "Layout"):
    """Kernel inputs for the placed shapes plus one row for the room's obstacles."""
    room = layout.room
    n = len(layout.items)
    fpos = np.zeros((n + 1, 2))
    fori = np.full(n + 1, len(kit.orientations), dtype=np.int64)
    fbb = np.zeros((n + 1, 4))
    fw = np.ones(n + 1)
    if n:
        fpos[:n] = np.array(layout.pos)
        fori[:n] = layout.orient
        fbb[:n] = np.array([kit.orientations[o].bbox for o in layout.orient]) + np.tile(fpos[:n], (1, 2))
    fbb[n] = room.bounds + np.array([-1.0, -1.0, 1.0, 1.0]) * kit.scale
    if not room.obstacle_parts:
        fw[n] = 0.0
    return fpos, fori, fbb, fw


def _touching(kit: Kit, fpos, fori, fw, o: int) -> list[np.ndarray]:
    """Touching positions of ``o`` around every fixed row (vertices of the stored no-fit
    polygons that lie inside none of their groups; the others overlap the fixed shape)."""
    return [kit.outer_vertices(fori[j], o) + fpos[j] for j in range(len(fpos)) if fw[j] > 0]


def place_one(kit: Kit, layout: Layout, options, *, tol: float, chunk: int = 2048):
    """Best resting position of a shape with orientation ``options`` in a layout.

    Returns
    -------
    (orientation id, (2,) point) or None when no orientation fits.
    The orientation whose shape ends left-most (then lowest) wins.
    """
    room = layout.room
    best = None
    fo = layout.orient
    fp = layout.pos
    fpos, fori, fbb, fw = _fixed_arrays(kit, layout)
    present = np.unique(np.array(fo, dtype=np.int64)) if fo else np.zeros(0, dtype=np.int64)
    for o in options:
        m, e = room.ifp(o)
        corners = room.ifp_vertices(o)
        if len(corners) == 0:
            continue
        kit.meter.charge("place")
        kit.ensure(present, o, room)
        hn, hc, hv, gs, ge, gb = kit.flat()
        pf = kit.pair_first[:, o].copy()
        pc = kit.pair_count[:, o].copy()
        cand = [corners, _hole_points(kit, fo, fp, o)] + _touching(kit, fpos, fori, fw, o)
        cand = np.concatenate([c for c in cand if len(c)])
        kit.meter.charge("touch", len(fpos))
        kit.meter.charge("cand", len(cand))
        inside = np.all(cand @ m.T - e[None, :] <= 1e-9 * kit.scale, axis=1)
        cand = cand[inside]
        if len(cand) == 0:
            continue
        q = np.round(cand / (1e-9 * kit.scale)) * (1e-9 * kit.scale)
        order = np.lexsort((q[:, 1], q[:, 0]))
        cand = np.ascontiguousarray(cand[order])
        found = None
        mbb = kit.orientations[o].bbox
        for s in range(0, len(cand), chunk):
            block = cand[s:s + chunk]
            kit.meter.charge("query")
            cost = cost_points(block, fpos, fori, fw, fbb, hn, hc, gs, ge, gb, pf, pc, mbb, m, e, 1.0,
                               tol, 0.0, 0.0, kit.meter.ops)
            kit.meter.charge_ops()
            ok = cost <= 0.0
            if np.any(ok):
                found = block[int(np.argmax(ok))]
                break
        if found is None:
            continue
        g = gather(kit, room, fo, fp, o)
        p = _rest(g, m, e, found.copy(), tol, kit.scale, kit.meter)
        key = (round((p[0] + mbb[2]) / (1e-9 * kit.scale)), round((p[1] + mbb[3]) / (1e-9 * kit.scale)))
        if best is None or key < best[0]:
            best = (key, o, p)
    if best is None:
        return None
    return best[1], best[2]


def fill(kit: Kit, layout: Layout, order, *, tol: float) -> list[int]:
    """Place shapes in the given order where they fit; return those that did not."""
    left = []
    for i in order:
        got = place_one(kit, layout, kit.options[i], tol=tol)
        if got is None:
            left.append(i)
        else:
            layout.add(i, got[0], got[1])
    return left
