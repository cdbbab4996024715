"""Bottom-left fill: place shapes one at a time at the leftmost feasible touching position.

Candidate reference points are the vertices of the no-fit polygons of the
shapes already placed and the corners of the inner-fit region; they are
checked in left-to-right order in vectorised chunks, and the first feasible one
is then slid down and left (ray casts) until it rests.  Holes of placed shapes
are ordinary free space, so small shapes drop into them when they fit.
"""

from __future__ import annotations

import numpy as np

from .board import feasible_mask, gather, slide
from .kit import Kit, Room

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


def _rest(g, m, e, p, tol, scale):
    """Slide down and left alternately until the point rests."""
    for _ in range(12):
        moved = 0.0
        for d in (_DOWN, _LEFT):
            t = slide(g, m, e, p, d, tol)
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


def place_one(kit: Kit, layout: Layout, options, *, tol: float, chunk: int = 512):
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
    for o in options:
        m, e = room.ifp(o)
        corners = room.ifp_vertices(o)
        if len(corners) == 0:
            continue
        g = gather(kit, room, fo, fp, o)
        cand = [corners, g.vertices, _hole_points(kit, fo, fp, o)]
        cand = np.concatenate([c for c in cand if len(c)])
        inside = np.all(cand @ m.T - e[None, :] <= 1e-9 * kit.scale, axis=1)
        cand = cand[inside]
        if len(cand) == 0:
            continue
        q = np.round(cand / (1e-9 * kit.scale)) * (1e-9 * kit.scale)
        order = np.lexsort((q[:, 1], q[:, 0]))
        cand = cand[order]
        found = None
        for s in range(0, len(cand), chunk):
            block = cand[s:s + chunk]
            ok = feasible_mask(g, block, tol)
            if np.any(ok):
                found = block[int(np.argmax(ok))]
                break
        if found is None:
            continue
        p = _rest(g, m, e, found.copy(), tol, kit.scale)
        bb = kit.orientations[o].bbox
        key = (round((p[0] + bb[2]) / (1e-9 * kit.scale)), round((p[1] + bb[3]) / (1e-9 * kit.scale)))
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
