"""Python side of the fused strip move (:mod:`packer.nest.movekernel`).

:class:`TouchTable` keeps the outer no-fit vertices of every pair the fused moves have
used in one flat array (built once per kit, pair by pair on first use);
:class:`InnerFit` keeps one room's inner-fit offsets and corners per orientation;
:func:`fused_move` makes one move of a :class:`packer.nest.search.State` with them.
"""

from __future__ import annotations

import numpy as np

from packer.nest.kit import Kit, Room
from packer.nest.movekernel import move_candidates, strip_move

__all__ = ["TouchTable", "InnerFit", "fused_move", "DIRS"]

#: the pattern search's directions (the same as the one-query-per-step path)
DIRS = np.array([[1, 0], [-1, 0], [0, 1], [0, -1], [1, 1], [1, -1], [-1, 1], [-1, -1]], dtype=float)
DIRS[4:] /= np.sqrt(2.0)


class TouchTable:
    """Outer no-fit vertices (:meth:`packer.nest.kit.Kit.outer_vertices`) of the pairs used so far.

    ``first[f, o]`` / ``count[f, o]``: where the vertices of moving orientation ``o``
    around fixed orientation ``f`` lie in ``flat`` (-1: not built yet).
    """

    def __init__(self, kit: Kit):
        k = len(kit.orientations)
        self.kit = kit
        self.first = np.full((k + 1, k), -1, dtype=np.int64)
        self.count = np.zeros((k + 1, k), dtype=np.int64)
        self.flat = np.zeros((1024, 2))
        self.used = 0
        self.options = [np.array(o, dtype=np.int64) for o in kit.options]
        # the strip's rooms differ in length only: their no-fit pairs are stored once per kit
        self.stored = False
        self._reach: dict = {}

    def reach(self, normals: np.ndarray) -> np.ndarray:
        """(K, h): how far each orientation's hull reaches along each normal (cached per normals)."""
        key = np.asarray(normals, dtype=float).tobytes()
        got = self._reach.get(key)
        if got is None:
            got = np.array([np.max(o.hull @ normals.T, axis=0) for o in self.kit.orientations])
            self._reach[key] = got
        return got

    def add(self, pairs) -> None:
        """Build and store the vertices of the (fixed, moving) ``pairs`` (q, 2) not stored yet."""
        for f, o in np.asarray(pairs, dtype=np.int64).reshape(-1, 2):
            if self.first[f, o] >= 0:
                continue
            v = self.kit.outer_vertices(int(f), int(o))
            while self.used + len(v) > len(self.flat):
                self.flat = np.concatenate([self.flat, np.zeros_like(self.flat)])
            self.flat[self.used:self.used + len(v)] = v
            self.first[f, o] = self.used
            self.count[f, o] = len(v)
            self.used += len(v)


class InnerFit:
    """Inner-fit offsets (K, h) and corners (K, V, 2) of one room for every orientation.

    The same values as :meth:`packer.nest.kit.Room.ifp` and :meth:`~packer.nest.kit.Room.ifp_vertices`,
    computed for all orientations at once (the strip search makes a room per separation).
    """

    def __init__(self, room: Room, table: "TouchTable"):
        m, e0 = room.normals, room.offsets
        h = len(e0)
        self.normals = np.ascontiguousarray(m, dtype=float)
        self.offsets = e0[None, :] - table.reach(m)
        e = self.offsets
        a, b = m, np.roll(m, -1, axis=0)
        ea, eb = e, np.roll(e, -1, axis=1)
        det = a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]
        ok = np.abs(det) > 1e-12
        x = (ea * b[:, 1] - eb * a[:, 1])[:, ok] / det[ok]
        y = (a[:, 0] * eb - b[:, 0] * ea)[:, ok] / det[ok]
        pts = np.stack([x, y], axis=2)   # (K, c, 2)
        tol = 1e-9 * room.kit.scale
        feasible = np.all(np.einsum("kcj,hj->kch", pts, m) - e[:, None, :] <= tol, axis=2)
        self.corners = np.zeros((len(e), max(1, h * (h - 1) // 2), 2))
        self.ncorners = feasible.sum(axis=1).astype(np.int64)
        for o in range(len(e)):
            if self.ncorners[o]:
                self.corners[o, : self.ncorners[o]] = pts[o][feasible[o]]
            else:   # redundant halfplanes: the room's own search over every pair
                v = room.ifp_vertices(o)[: self.corners.shape[1]]
                self.corners[o, : len(v)] = v
                self.ncorners[o] = len(v)


def fused_move(state, i: int) -> None:
    """Move shape ``i`` of ``state`` (one plate, no obstacles) in one compiled call."""
    kit, room, n = state.kit, state.room, state.n
    meter = kit.meter
    item = int(state.items[i])
    table = state.touch
    opts = table.options[item]
    inner = state.inner
    seed = int(state.rng.integers(0, 2 ** 31 - 1))
    while True:
        pts, starts, chosen, missing, picked = move_candidates(
            seed, i, opts, room.bounds, state.bbox, state.size, state.fpos, state.fori, n, kit.pair_first,
            table.flat, table.first, table.count, inner.corners, inner.ncorners)
        if len(missing) == 0:
            break
        # build what is missing; the same seed draws the same orientations and candidates again
        if missing[0, 0] < 0:
            fixed = np.unique(state.orient)
            for o in missing[:, 1]:
                kit.ensure(fixed, int(o), room)
        else:
            table.add(missing)
    hn, hc, _, gs, ge, gb = kit.flat()
    meter.charge("fmove")
    meter.charge("option", len(chosen))
    meter.charge("touch", picked)
    meter.charge("row", n + 1)
    o, _, row = strip_move(pts, starts, chosen, i, n, state.weight[i], state.has_obstacles, DIRS, state.fpos,
                           state.fori, state.fbb, hn, hc, gs, ge, gb, kit.pair_first, kit.pair_count, state.bbox,
                           state.size, inner.normals, inner.offsets, state.tol, state.eps, meter.ops)
    meter.charge_ops()
    state.orient[i] = o
    out = row[: n + 1].copy()
    out[n] += row[n + 1]
    state.ov[i, :] = out
    state.ov[:, i] = out[:n]
    state.ov[i, i] = 0.0
